"""Recoveries learnt from the logbook: the mass balance inverted, the least squares, the skips."""

from __future__ import annotations

import tomllib
from collections.abc import Callable
from dataclasses import replace
from datetime import datetime, timedelta
from pathlib import Path
from types import MappingProxyType

import numpy as np
import pytest
import statsmodels.api as sm
from scipy import stats

from meltfix.commands.recoveries import toml_snippet
from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner
from meltfix.plan.uncertainty import R_TO_SIGMA
from meltfix.records.demo_logbook import build_demo_logbook
from meltfix.records.logbook import Logbook
from meltfix.records.recovery_fit import RecoveryEstimate, RecoveryFit, fit_logbook, pair_cases, weighted_ratio
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.repeatability import default_curve

# A manganese alloy (balance iron), a silicon alloy and a silicomanganese, so cases can be worked by hand.
MATERIALS = """
[[material]]
name = "FeMn test"
price_per_kg = 1.4
composition = { Mn = 80.0 }
recovery = { Mn = 0.90 }

[[material]]
name = "FeSi test"
price_per_kg = 1.6
composition = { Si = 75.0 }
recovery = { Si = 0.80 }

[[material]]
name = "SiMn test"
price_per_kg = 1.3
composition = { Mn = 66.0, Si = 17.0 }
recovery = { Mn = 0.90, Si = 0.80 }
"""
GRADE = """
name = "Test steel"
[window]
C = [0.10, 0.60]
Si = [0.10, 0.60]
Mn = [0.30, 1.60]
"""
TRUE_MN_RECOVERY = 0.80  # what the bath really takes up from "FeMn test"; the recipe book says 0.90
DAY = datetime(2026, 3, 9, 6, 0)


@pytest.fixture(scope="module")
def hand_book(tmp_path_factory: pytest.TempPathFactory, write_recipes: Callable[..., Path]) -> RecipeBook:
    # This module's own book (three alloys), in place of the shared one of tests/conftest.py.
    return load_recipes(write_recipes(tmp_path_factory.mktemp("book") / "recipes", MATERIALS, GRADE))


def _really(material: Material) -> Material:
    """The material as the bath really takes it: Mn recovery of "FeMn test" lower than the book's."""
    if material.name != "FeMn test":
        return material
    return replace(material, recovery=MappingProxyType({**material.recovery, "Mn": TRUE_MN_RECOVERY}))


def _measured(true_pct: dict[str, float], rng: np.random.Generator | None) -> Analysis:
    """The spectrometer's reading: exact, or with normal scatter of sigma = r(c) / 2.8 rounded as printed."""
    if rng is None:
        return Analysis(dict(true_pct))
    return Analysis({s: round(p + float(rng.normal(0.0, default_curve(s).limit_pct(p) / R_TO_SIGMA)), 3)
                     for s, p in true_pct.items()})


def _write_week(path: Path, book: RecipeBook, rng: np.random.Generator | None, heats: int = 14) -> None:
    """Heats of two samples each with a manganese trim between them (every third a silicon trim
    instead), plus one heat with a third sample after a 5 kg top-up, and one whose manganese comes
    half from each manganese alloy. Each heat has one alloy whose recovery is unknown to the fit, so
    the bath it grows is exact and so is every estimate when the analyses are."""
    layout = np.random.default_rng(7)  # the heats themselves do not depend on the noise
    planner = Planner(book)
    with Logbook(path, book) as logbook:
        for k in range(heats + 2):
            heat_id, when = f"T-{k + 1}", DAY + timedelta(hours=2 * k)
            bath_kg = float(layout.uniform(15_000, 25_000))
            true_pct = {"C": float(layout.uniform(0.15, 0.30)), "Si": float(layout.uniform(0.15, 0.25)),
                        "Mn": float(layout.uniform(0.35, 0.60))}
            first = _measured(true_pct, rng)
            logbook.record_sample(heat_id, "S1", first, when=when)
            heat = Heat(heat_id, "Test steel", bath_kg, first)
            plan_id = logbook.record_plan(heat, planner.plan(heat), when + timedelta(minutes=2))
            made = [("FeMn test", 5.0 * round(float(layout.uniform(80, 200)) / 5.0))]
            if k % 3 == 0:
                made = [("FeSi test", 5.0 * round(float(layout.uniform(30, 60)) / 5.0))]
            if k == heats + 1:  # manganese half from each alloy: no single material to credit
                made = [("FeMn test", 60.0), ("SiMn test", 75.0)]
            logbook.record_additions(heat_id, made, plan_id, when + timedelta(minutes=4))
            true_kg, true_pct = bath_after(bath_kg, true_pct, [(_really(book.material(m)), kg) for m, kg in made])
            logbook.record_sample(heat_id, "S2", _measured(true_pct, rng), when=when + timedelta(minutes=12))
            if k == heats:  # a 5 kg top-up: a rise of about 0.02 % Mn, well inside the analysis scatter
                logbook.record_additions(heat_id, [("FeMn test", 5.0)], None, when + timedelta(minutes=15))
                true_kg, true_pct = bath_after(true_kg, true_pct, [(_really(book.material("FeMn test")), 5.0)])
                logbook.record_sample(heat_id, "S3", _measured(true_pct, rng), when=when + timedelta(minutes=25))


def _fit(tmp_path: Path, book: RecipeBook, rng: np.random.Generator | None) -> RecoveryFit:
    path = tmp_path / ("noisy.sqlite" if rng is not None else "exact.sqlite")
    _write_week(path, book, rng)
    with Logbook(path, book, create=False) as logbook:
        return fit_logbook(logbook, book)


def _one(fit: RecoveryFit, material: str, element: str):
    (found,) = [e for e in fit.estimates if (e.material, e.element) == (material, element)]
    return found


def test_one_case_inverts_the_mass_balance_exactly(hand_book: RecipeBook) -> None:
    # By hand (the mass balance of meltfix.plan.massbalance, worked here), 40 kg of an alloy of 80 % Mn (balance iron) into 10 000 kg at 0.50 % Mn with a
    # true recovery 0.80: Mn 50 + 40 x 0.80 x 0.80 = 75.6 kg; bath 10 000 + 40 x (0.64 + 0.20) = 10 033.6 kg;
    # c2 = 75.6 / 10 033.6. The estimator does not know r: with the book's 0.90 the bath would be
    # 10 000 + 40 x (0.72 + 0.20) = 10 036.8 kg, of which 28.8 kg is this alloy's Mn, so
    # D = c2 (10 036.8 - 28.8) - 50 and A = 32 (1 - c2); D / A = (75.6 x 10 008 / 10 033.6 - 50)
    # / (32 x 9 958 / 10 033.6) = (75.6 x 10 008 - 50 x 10 033.6) / (32 x 9 958) = 254 924.8 / 318 656 = 0.80.
    femn = hand_book.material("FeMn test")
    c2_pct = 100.0 * 75.6 / 10_033.6
    cases, skipped = pair_cases("H", "S1", "S2", 10_000.0, Analysis({"Mn": 0.50}), Analysis({"Mn": c2_pct}),
                                [(femn, 40.0)])
    assert skipped == []
    (case,) = cases
    assert case.basis_kg == pytest.approx(32 * 9_958 / 10_033.6, rel=1e-12)
    assert case.implied == pytest.approx(254_924.8 / 318_656, abs=1e-12)
    assert case.implied == pytest.approx(0.80, abs=1e-12)


def test_weighted_ratio_matches_statsmodels_wls_with_hc3() -> None:
    basis = np.array([4.0, 40.0, 120.0, 200.0, 16.0, 240.0, 80.0])
    dissolved = basis * np.array([0.82, 0.78, 0.86, 0.74, 0.80, 0.83, 0.79]) + np.array([0.3, -0.5, 0.2, 0.4, -0.1, 0.0, 0.6])
    weight = 1.0 / np.array([1.0, 2.0, 1.5, 1.0, 0.5, 2.5, 1.2]) ** 2
    slope, std_error, half = weighted_ratio(basis, dissolved, weight, np.zeros(basis.size, dtype=int))
    # Reference: statsmodels' weighted least squares, first with the analysis weights alone; the
    # recovery scatter s^2 from its residuals by moments; then with both in the weights and
    # statsmodels' HC3 covariance (MacKinnon & White 1985).
    first = sm.WLS(dissolved, basis[:, None], weights=weight).fit()
    scatter2 = max(0.0, float(np.sum(first.resid**2 - 1.0 / weight) / np.sum(basis**2)))
    assert scatter2 > 0  # recoveries from 0.74 to 0.86: the scatter is real here
    final = sm.WLS(dissolved, basis[:, None], weights=1.0 / (1.0 / weight + scatter2 * basis**2)).fit(cov_type="HC3")
    assert slope[0] == pytest.approx(final.params[0], rel=1e-12)
    assert std_error[0] == pytest.approx(final.bse[0], rel=1e-9)
    # Student's t, 0.975 quantile with 6 degrees of freedom: 2.447 (NIST/SEMATECH e-Handbook of
    # Statistical Methods, table of critical values of the t distribution, §1.3.6.7.2; from memory).
    assert half[0] / std_error[0] == pytest.approx(2.447, abs=5e-4)


def test_without_recovery_scatter_the_weights_are_the_analysis_ones() -> None:
    # Residuals smaller than the analysis error: no scatter is estimated, and the slope is plain
    # weighted least squares (statsmodels' WLS).
    basis = np.array([1.0, 2.0, 3.0, 4.0, 5.0])
    dissolved = 0.8 * basis + np.array([0.01, -0.02, 0.0, 0.02, -0.01])
    weight = np.array([1.0, 2.0, 0.5, 1.0, 4.0])
    slope, std_error, _ = weighted_ratio(basis, dissolved, weight, np.zeros(5, dtype=int))
    reference = sm.WLS(dissolved, basis[:, None], weights=weight).fit(cov_type="HC3")
    assert slope[0] == pytest.approx(reference.params[0], rel=1e-12)
    assert std_error[0] == pytest.approx(reference.bse[0], rel=1e-9)


# ---------------------------------------------------------------------------------------------
# Coverage under heat-to-heat recovery scatter: many simulated logbooks at once, one group each.

TRIALS = 2000
FEMN_MN_PCT, FEMN_CATALOGUE = 80.0, 0.90  # "FeMn test" above


def _simulated_cases(seed: int, scatter_sd: float) -> tuple[np.ndarray, ...]:
    """Cases of TRIALS logbooks of 10-25 manganese trims each: additions of 5-300 kg of the 80 % Mn
    alloy into 15-25 t at 0.35-0.60 % Mn, each heat's recovery drawn around TRUE_MN_RECOVERY with
    ``scatter_sd``, both analyses with the spectrometer's scatter. Returns the cases as
    :func:`pair_cases` makes them (basis, dissolved, weight), the group (logbook) of each, and the
    case inputs (bath, kg, measured contents) for checking against pair_cases."""
    rng = np.random.default_rng(seed)
    group = np.repeat(np.arange(TRIALS), rng.integers(10, 26, TRIALS))
    size = group.size
    bath_kg, kg = rng.uniform(15_000, 25_000, size), rng.uniform(5, 300, size)
    a = FEMN_MN_PCT / 100
    recovery = TRUE_MN_RECOVERY + rng.normal(0.0, scatter_sd, size)
    c1 = rng.uniform(0.35, 0.60, size) / 100
    c2 = (bath_kg * c1 + a * recovery * kg) / (bath_kg + kg * (a * recovery + 1 - a))  # iron balance at 1
    limit = np.vectorize(default_curve("Mn").limit_pct)
    c1_seen = c1 + rng.normal(0.0, 1.0, size) * limit(100 * c1) / R_TO_SIGMA / 100
    c2_seen = c2 + rng.normal(0.0, 1.0, size) * limit(100 * c2) / R_TO_SIGMA / 100
    # pair_cases: the catalogue bath less this alloy's own dissolved Mn, bath + kg (1 - a).
    rest_kg = bath_kg + kg * (1 - a)
    sigma1, sigma2 = (limit(100 * c) / R_TO_SIGMA / 100 for c in (c1_seen, c2_seen))
    weight = 1.0 / ((rest_kg * sigma2) ** 2 + (bath_kg * sigma1) ** 2)
    return (a * kg * (1 - c2_seen), c2_seen * rest_kg - bath_kg * c1_seen, weight, group,
            bath_kg, kg, c1_seen, c2_seen)


def _coverage(slope: np.ndarray, half: np.ndarray) -> float:
    return float(np.mean(np.abs(slope - TRUE_MN_RECOVERY) <= half))


def test_the_simulated_cases_are_the_ones_pair_cases_makes(hand_book: RecipeBook) -> None:
    basis, dissolved, weight, _, bath_kg, kg, c1, c2 = _simulated_cases(seed=1, scatter_sd=0.05)
    femn = hand_book.material("FeMn test")
    for k in np.flatnonzero(kg > 150)[:5]:
        (case,), _ = pair_cases("H", "S1", "S2", float(bath_kg[k]), Analysis({"Mn": 100 * c1[k]}),
                                Analysis({"Mn": 100 * c2[k]}), [(femn, float(kg[k]))])
        assert (case.basis_kg, case.dissolved_kg, case.weight) == pytest.approx(
            (basis[k], dissolved[k], weight[k]), rel=1e-9)


@pytest.mark.parametrize("scatter_sd", [0.05, 0.0])
def test_the_95_percent_interval_covers_the_truth_under_recovery_scatter(scatter_sd: float) -> None:
    # The truth is known in a simulation: the share of 2000 logbooks whose interval holds it must be
    # near 95 %; at least 93 % is asked (the binomial standard error of a 95 % share over 2000 trials
    # is 0.5 %, so 93 % is four of them below).
    basis, dissolved, weight, group, *_ = _simulated_cases(seed=20261202, scatter_sd=scatter_sd)
    slope, _, half = weighted_ratio(basis, dissolved, weight, group)
    assert _coverage(slope, half) >= 0.93


def test_an_interval_from_the_analysis_error_alone_fails_the_coverage_check() -> None:
    # The deliberately wrong method, the one this module used first: analysis weights only and one
    # residual scale. Under a recovery scatter of 0.05 it covers about 86 %: the check above fails it.
    basis, dissolved, weight, group, *_ = _simulated_cases(seed=20261202, scatter_sd=0.05)
    sum_wbb = np.bincount(group, weight * basis**2)
    slope = np.bincount(group, weight * basis * dissolved) / sum_wbb
    dof = np.bincount(group) - 1
    scale2 = np.bincount(group, weight * (dissolved - slope[group] * basis) ** 2) / dof
    half = stats.t.ppf(0.975, dof) * np.sqrt(scale2 / sum_wbb)
    assert _coverage(slope, half) < 0.90


def test_a_single_case_has_an_estimate_but_no_interval() -> None:
    slope, std_error, half = weighted_ratio(np.array([2.0, 1.0, 3.0]), np.array([1.6, 0.8, 2.5]),
                                            np.ones(3), np.array([0, 1, 1]))
    assert slope[0] == pytest.approx(0.8) and np.isnan(std_error[0]) and np.isnan(half[0])
    assert np.isfinite(half[1])


def test_without_noise_the_estimate_is_the_true_recovery(tmp_path: Path, hand_book: RecipeBook) -> None:
    fit = _fit(tmp_path, hand_book, rng=None)
    mn = _one(fit, "FeMn test", "Mn")
    assert mn.estimate == pytest.approx(TRUE_MN_RECOVERY, abs=1e-9)
    assert mn.cases == 10 and mn.propose
    # The silicon alloy behaves as the book says, is found to, and gets no proposal.
    si = _one(fit, "FeSi test", "Si")
    assert si.estimate == pytest.approx(0.80, abs=1e-9) and not si.propose


def test_with_analysis_scatter_the_interval_holds_the_truth_and_the_update_is_proposed(
        tmp_path: Path, hand_book: RecipeBook) -> None:
    fit = _fit(tmp_path, hand_book, rng=np.random.default_rng(20260309))
    mn = _one(fit, "FeMn test", "Mn")
    assert mn.ci_low < TRUE_MN_RECOVERY < mn.ci_high < 0.90
    assert mn.propose and mn.proposed == pytest.approx(round(mn.estimate, 2))
    assert [(e.material, e.element) for e in fit.proposals] == [("FeMn test", "Mn")]
    assert fit.to_json()["estimates"][0].keys() == {"material", "element", "catalogue", "estimate", "ci_low",
                                                    "ci_high", "cases", "propose"}

    snippet = toml_snippet(fit, hand_book)
    assert tomllib.loads(snippet) == {"recovery": {"Mn": mn.proposed}}


def test_the_snippet_keeps_the_other_elements_of_the_material(hand_book: RecipeBook) -> None:
    proposal = RecoveryEstimate("SiMn test", "Mn", 0.90, 0.8234, 0.80, 0.85, 0.01, 12, True)
    fit = RecoveryFit((proposal,), (), (), 12, (), 5, 0.95)
    snippet = toml_snippet(fit, hand_book)
    assert snippet.splitlines()[0] == '# [[material]] name = "SiMn test": replace its recovery line with'
    # Silicon keeps the book's 0.80: pasting the line in place of the old one loses nothing.
    assert tomllib.loads(snippet) == {"recovery": {"Mn": 0.82, "Si": 0.8}}
    assert "Mn was 0.9, 12 cases, 95 % CI 0.800-0.850" in snippet
    assert toml_snippet(RecoveryFit((replace(proposal, propose=False),), (), (), 12, (), 5, 0.95), hand_book) == ""


def test_small_rises_and_shared_elements_are_skipped_and_said_so(tmp_path: Path, hand_book: RecipeBook) -> None:
    fit = _fit(tmp_path, hand_book, rng=None)
    small = [(s.heat_id, s.sample_from, s.sample_to, s.element) for s in fit.skipped if s.reason == "small rise"]
    assert ("T-15", "S2", "S3", "Mn") in small
    # The top-up's predicted rise, 5 x 0.80 x 0.90 / ~20 t = about 0.02 % Mn, is under three repeatability
    # limits (3 x 0.018 x sqrt(0.9 %) = 0.05 % by the spectrometer's curve).
    assert not any(c.sample_to == "S3" for c in fit.cases)
    mixed = [(s.heat_id, s.element) for s in fit.skipped if s.reason == "mixed"]
    assert mixed == [("T-16", "Mn")]
    notes = " ".join(fit.notes)
    assert "under 3 repeatability limits" in notes and "no single material brought 80 %" in notes
    assert fit.to_json()["skipped"] == len(fit.skipped)


def test_a_heat_that_cannot_be_read_is_named_not_fatal(tmp_path: Path, hand_book: RecipeBook) -> None:
    path = tmp_path / "log.sqlite"
    with Logbook(path, hand_book) as logbook:  # two samples and an addition, but never planned
        logbook.record_sample("U-1", "S1", Analysis({"Mn": 0.4}), when=DAY)
        logbook.record_additions("U-1", [("FeMn test", 100.0)], None, DAY + timedelta(minutes=3))
        logbook.record_sample("U-1", "S2", Analysis({"Mn": 0.8}), when=DAY + timedelta(minutes=10))
        fit = fit_logbook(logbook, hand_book)
    assert fit.estimates == () and fit.heats == 1
    assert fit.heats_skipped[0].startswith("U-1 (plans: the heat was never planned")


def test_on_the_demo_week_the_estimates_land_near_the_simulated_recoveries(tmp_path: Path) -> None:
    book = load_recipes()
    path = tmp_path / "demo.sqlite"
    build_demo_logbook(path, book)
    with Logbook(path, create=False) as logbook:
        fit = fit_logbook(logbook, book)
    # meltfix.records.demo_logbook scales each heat's recoveries by a factor drawn from N(0.98, 0.03) (clipped
    # to 0.85..1.05, a recovery never above 1) and weighs the bath with a 2 % scatter: on average the
    # bath takes up 0.98 of the book's recovery.
    solid = [e for e in fit.estimates if e.cases >= 8]
    assert len(solid) >= 5
    truth = np.array([min(0.98 * e.catalogue, 1.0) for e in solid])
    # Each estimate's error in its own standard errors (the unclipped estimate is truth + z SE).
    z = np.array([(e.estimate - t) / e.std_error for e, t in zip(solid, truth)])
    # Calibration: with honest standard errors sum(z^2) follows chi-square with one degree of freedom
    # per estimate; above its 99th percentile (scipy.stats.chi2) the intervals are too narrow.
    assert float(np.sum(z**2)) < stats.chi2.ppf(0.99, len(solid)), z
    # Coverage: with k honest 95 % intervals two or more misses happen with probability
    # 1 - 0.95^k - k 0.05 0.95^(k-1) (3.3 % for k = 6), so at most one miss is allowed, not 20 %.
    inside = [e.ci_low <= t <= e.ci_high for e, t in zip(solid, truth)]
    assert inside.count(False) <= 1, list(zip(solid, truth))
