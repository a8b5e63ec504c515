"""Recoveries learnt from the logbook: what each material really brings to the bath.

Method. Between two consecutive samples of a heat — bath ``W1`` [kg] at analysis ``c1``, the next
analysis ``c2`` (fractions) — the additions ``x_j`` made in between obey, for every element they
carry, the mass balance of :mod:`meltfix.plan.massbalance`: ``W1 c1 + sum_j a_j r_j x_j = M2 c2`` with
``M2 = W1 + sum_j g_j x_j``. When one material ``j`` brings at least ``MIN_SHARE`` (80 %) of the
element put in, the case is attributed to it: the other materials count with their catalogue
recoveries (``S`` [kg] dissolved), and ``M2`` is the catalogue's bath with ``j``'s own term left
unknown, ``M2 = M2cat + a_j x_j (r_j - rcat_j)``. The balance is then exactly linear in ``r_j``::

    D = r_j A,   D = c2 (M2cat - a_j x_j rcat_j) - W1 c1 - S,   A = a_j x_j (1 - c2)   [kg]

so with no analysis error ``D / A`` is the true recovery exactly. The bath at the first sample is
the one the heat's first plan was made for; later baths grow by the catalogue mass balance, as in
the replay (:func:`meltfix.records.heat_record.record_from_history`). Where the catalogue is off for the other
materials or for this material's other elements too, the bath mass is off by a few kg in tens of tonnes, moving ``D / A`` by about ``c2`` times that
error over ``A``: far less than the analysis error.

Over the cases of one (material, element), ``r`` is the weighted least-squares line through the
origin, ``r = sum(w A D) / sum(w A^2)``. Two errors move ``D``: the analysis, whose variance ``v``
comes from the spectrometer's repeatability curve (sigma = r(c) / 2.8, :mod:`meltfix.shop.repeatability` and
``[spectrometer.repeatability]`` in shop.toml), and the recovery itself, which scatters from heat to
heat (slag, oxygen, stirring) by a standard deviation ``s`` that moves ``D`` by ``s A``: a 300 kg
addition carries sixty times the scatter of a 5 kg one. So the weights are
``w = 1 / (v + s^2 A^2)``, with ``s^2`` estimated from a first fit's residuals ``e`` by moments,
``s^2 = max(0, sum(e^2 - v) / sum(A^2))``. The standard error is the heteroscedasticity-consistent
HC3 one (MacKinnon & White, J. Econometrics 29 (1985) 305-325), which holds whatever the real shape
of the scatter: ``SE^2 = sum((w A e / (1 - h))^2) / sum(w A^2)^2`` with leverage
``h = w A^2 / sum(w A^2)``, and the interval ``r ± t(0.975, n - 1) SE`` (Student's t). With only
the analysis error in the weights and one residual scale, the interval covered the true recovery
in 84-87 % of simulated logbooks with a recovery scatter of 0.05; this one in at least 93 %
(tests/core/test_recovery_fit.py). Estimate and interval are clipped to (0, 1].

Analysis error: a rise of a few repeatability limits is mostly scatter, so a case whose
catalogue-predicted rise is under ``MIN_RISE_LIMITS`` (3) repeatability limits is skipped, and
counted in the notes. An update is proposed only with at least ``min_cases`` cases, an interval
that excludes the catalogue value and an estimate that differs from it to three decimals. Nothing
here edits the recipes: :func:`meltfix.commands.recoveries.toml_snippet` prints lines for the
metallurgist to check and paste.
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from datetime import date

import numpy as np
from scipy import stats

from meltfix.base.errors import InputError
from meltfix.plan.massbalance import bath_after
from meltfix.plan.uncertainty import R_TO_SIGMA
from meltfix.readers.export_layout import ExportLayout
from meltfix.records.heat_record import HeatRecord, record_from_history
from meltfix.records.logbook import Logbook
from meltfix.shop.analysis import Analysis
from meltfix.shop.elements import element_sort_key
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook

MIN_SHARE = 0.80
"""Share of the element put in [0..1] one material must bring for the case to be its own."""
MIN_RISE_LIMITS = 3.0
"""Smallest predicted rise that counts, in repeatability limits of the spectrometer."""
DEFAULT_MIN_CASES = 5
CONFIDENCE = 0.95

# Why a (sample pair, element) is not a case; the text ends a note "N cases skipped: ...".
SKIP_REASONS = {
    "not analysed": "the element is missing from one of the two analyses",
    "below limit": "one of the two analyses reports the element below its detection limit",
    "small rise": (f"the predicted rise is under {MIN_RISE_LIMITS:g} repeatability limits of the spectrometer, "
                   "so the change would be mostly analysis scatter"),
    "mixed": f"no single material brought {MIN_SHARE * 100:g} % or more of the element",
}


@dataclass(frozen=True)
class RecoveryCase:
    """One sample pair's evidence on one material's recovery of one element."""

    heat_id: str
    sample_from: str
    sample_to: str
    material: str
    element: str
    basis_kg: float
    """A = a x (1 - c2): the element the material put in, net of the bath growth it causes [kg]."""
    dissolved_kg: float
    """D: the element from this material the next sample finds dissolved [kg]."""
    weight: float
    """1 / variance of D from the analysis error [1/kg^2]."""

    @property
    def implied(self) -> float:
        """The recovery this case alone implies [0..1, may fall outside]."""
        return self.dissolved_kg / self.basis_kg


@dataclass(frozen=True)
class SkippedCase:
    """A (sample pair, element) the additions carried that gives no case, and why (a SKIP_REASONS key)."""

    heat_id: str
    sample_from: str
    sample_to: str
    element: str
    reason: str


@dataclass(frozen=True)
class RecoveryEstimate:
    """One material's recovery of one element, estimated from the logbook."""

    material: str
    element: str
    catalogue: float
    """Recovery in the recipe book [0..1]."""
    estimate: float
    """Weighted least-squares estimate, clipped to (0, 1]."""
    ci_low: float | None
    """Lower end of the confidence interval [0..1]; None with fewer than two cases."""
    ci_high: float | None
    std_error: float | None
    """Standard error of the unclipped estimate; None with fewer than two cases."""
    cases: int
    propose: bool
    """True when there are enough cases and the interval excludes the catalogue value."""

    @property
    def proposed(self) -> float:
        """The value to write in materials.toml: two decimals, three when two would give back the catalogue's."""
        value = round(self.estimate, 2)
        return round(self.estimate, 3) if value == self.catalogue else value

    def to_json(self) -> dict[str, object]:
        return {"material": self.material, "element": self.element, "catalogue": self.catalogue,
                "estimate": self.estimate, "ci_low": self.ci_low, "ci_high": self.ci_high, "cases": self.cases,
                "propose": self.propose}


@dataclass(frozen=True)
class RecoveryFit:
    """Every estimate from a stretch of the logbook, with what was left out and why."""

    estimates: tuple[RecoveryEstimate, ...]
    """In the recipe book's material order, elements as on an analysis sheet."""
    cases: tuple[RecoveryCase, ...]
    skipped: tuple[SkippedCase, ...]
    heats: int
    """Heats read from the logbook."""
    heats_skipped: tuple[str, ...]
    """One line per heat that could not be used, with the reason."""
    min_cases: int
    confidence: float

    @property
    def proposals(self) -> tuple[RecoveryEstimate, ...]:
        return tuple(e for e in self.estimates if e.propose)

    @property
    def notes(self) -> tuple[str, ...]:
        """Plain sentences on what was used, skipped and assumed."""
        pairs = len({(c.heat_id, c.sample_from) for c in self.cases})
        used = len({c.heat_id for c in self.cases})
        notes = [f"{len(self.cases)} cases from {pairs} sample pairs in {used} heats ({self.heats} heats read)."]
        for reason, count in sorted(Counter(s.reason for s in self.skipped).items(),
                                    key=lambda item: list(SKIP_REASONS).index(item[0])):
            notes.append(f"{count} {'case' if count == 1 else 'cases'} skipped: {SKIP_REASONS[reason]}.")
        if self.heats_skipped:
            shown = "; ".join(self.heats_skipped[:3]) + (" ..." if len(self.heats_skipped) > 3 else "")
            notes.append(f"{len(self.heats_skipped)} {'heat' if len(self.heats_skipped) == 1 else 'heats'} "
                         f"skipped: {shown}.")
        notes.append(f"A case is one sample pair and one element, given to the material that brought at least "
                     f"{MIN_SHARE * 100:g} % of it; the other materials count with their catalogue recoveries, and "
                     "baths after the first sample grow by the catalogue mass balance.")
        notes.append(f"An update is proposed only with at least {self.min_cases} cases and a "
                     f"{self.confidence * 100:g} % interval that excludes the catalogue value; the interval allows "
                     "for the recovery's scatter from heat to heat as well as the analysis error (weights with "
                     "both, a robust HC3 standard error, Student's t); estimates are clipped to (0, 1].")
        notes.append("The recipe book is never changed here: check the proposals against the shop's practice, "
                     "then edit materials.toml by hand.")
        return tuple(notes)

    def to_json(self) -> dict[str, object]:
        return {"estimates": [e.to_json() for e in self.estimates], "skipped": len(self.skipped),
                "notes": list(self.notes)}


# ---------------------------------------------------------------------------------------------
# Cases


def _merged(used: Iterable[tuple[Material, float]]) -> list[tuple[Material, float]]:
    """The same material added twice between two samples counts once, with its total mass."""
    totals: dict[str, tuple[Material, float]] = {}
    for material, kg in used:
        kg_before = totals.get(material.name, (material, 0.0))[1]
        totals[material.name] = (material, kg_before + kg)
    return list(totals.values())


def pair_cases(heat_id: str, sample_from: str, sample_to: str, bath_kg: float, now: Analysis, nxt: Analysis,
               used: Sequence[tuple[Material, float]],
               layout: ExportLayout | None = None) -> tuple[list[RecoveryCase], list[SkippedCase]]:
    """The cases one sample pair gives: ``bath_kg`` [kg] at analysis ``now``, the additions
    ``used`` (material, kg) between them, the next analysis ``nxt``. See the module's method."""
    layout = layout or ExportLayout()
    used = _merged(used)
    final_kg, predicted_pct = bath_after(bath_kg, now.pct, used)
    carried = sorted({s for m, _ in used for s, pct in m.composition_pct.items() if s != "Fe" and pct > 0},
                     key=element_sort_key)
    cases: list[RecoveryCase] = []
    skipped: list[SkippedCase] = []
    for symbol in carried:
        def skip(reason: str) -> None:
            skipped.append(SkippedCase(heat_id, sample_from, sample_to, symbol, reason))

        if symbol not in now.pct or symbol not in nxt.pct:
            skip("not analysed")
            continue
        if symbol in now.below_limit or symbol in nxt.below_limit:
            skip("below limit")
            continue
        curve = layout.curve(symbol)
        if predicted_pct[symbol] - now.pct[symbol] < MIN_RISE_LIMITS * curve.limit_pct(predicted_pct[symbol]):
            skip("small rise")
            continue
        put_in_kg = np.array([kg * m.composition_pct.get(symbol, 0.0) / 100.0 for m, kg in used])
        main = int(np.argmax(put_in_kg))
        if put_in_kg[main] < MIN_SHARE * put_in_kg.sum():
            skip("mixed")
            continue
        material = used[main][0]
        c1, c2 = now.pct[symbol] / 100.0, nxt.pct[symbol] / 100.0
        own_kg = put_in_kg[main]
        others_kg = math.fsum(kg * m.yield_pct(symbol) / 100.0 for k, (m, kg) in enumerate(used) if k != main)
        catalogue = material.recovery.get(symbol, 1.0)
        # The bath without this material's own dissolved element: the unknown r puts it back on both sides.
        rest_kg = final_kg - own_kg * catalogue
        sigma = [curve.limit_pct(pct) / R_TO_SIGMA / 100.0 for pct in (now.pct[symbol], nxt.pct[symbol])]
        cases.append(RecoveryCase(
            heat_id, sample_from, sample_to, material.name, symbol,
            basis_kg=own_kg * (1.0 - c2),
            dissolved_kg=c2 * rest_kg - bath_kg * c1 - others_kg,
            weight=1.0 / ((rest_kg * sigma[1]) ** 2 + (bath_kg * sigma[0]) ** 2),
        ))
    return cases, skipped


def record_cases(record: HeatRecord, book: RecipeBook,
                 layout: ExportLayout | None = None) -> tuple[list[RecoveryCase], list[SkippedCase]]:
    """Every case of one recorded heat: each pair of consecutive samples with additions between them."""
    cases: list[RecoveryCase] = []
    skipped: list[SkippedCase] = []
    bath_kg = record.bath_kg
    for now, nxt in zip(record.samples, record.samples[1:]):
        # The replay's rule: an addition belongs to the last sample at or before it.
        used = [(book.material(a.material), a.kg) for a in record.additions if now.minute <= a.minute < nxt.minute]
        if used:
            found, left = pair_cases(record.heat_id, now.sample_id, nxt.sample_id, bath_kg, now.analysis,
                                     nxt.analysis, used, layout)
            cases += found
            skipped += left
            bath_kg, _ = bath_after(bath_kg, now.analysis.pct, used)
    return cases, skipped


# ---------------------------------------------------------------------------------------------
# Estimates


def _slope(basis: np.ndarray, dissolved: np.ndarray, weight: np.ndarray, group: np.ndarray,
           groups: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per group the weighted least-squares slope through the origin, sum(w b^2) per group, and
    each case's residual."""
    sum_wbb = np.bincount(group, weight * basis * basis, groups)
    slope = np.bincount(group, weight * basis * dissolved, groups) / sum_wbb
    return slope, sum_wbb, dissolved - slope[group] * basis


def recovery_scatter_variance(basis: np.ndarray, residual: np.ndarray, analysis_variance: np.ndarray,
                              group: np.ndarray, groups: int) -> np.ndarray:
    """Per group the variance of the recovery from case to case [1], by moments: each residual's
    square is about s^2 b^2 plus the analysis variance, so s^2 = sum(e^2 - v) / sum(b^2), at least 0."""
    excess = np.bincount(group, residual * residual - analysis_variance, groups)
    return np.maximum(excess / np.bincount(group, basis * basis, groups), 0.0)


def weighted_ratio(basis: np.ndarray, dissolved: np.ndarray, weight: np.ndarray, group: np.ndarray,
                   confidence: float = CONFIDENCE) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per group (see the module's method): the slope through the origin of ``dissolved`` on
    ``basis`` [kg] weighted by the analysis error (``weight`` = 1 / its variance [1/kg^2]) and the
    recovery scatter, its HC3 standard error and the half-width of its confidence interval
    (Student's t, n - 1 degrees of freedom). Groups of one case get NaN for both."""
    groups = int(group.max()) + 1
    analysis_variance = 1.0 / weight
    _, _, first = _slope(basis, dissolved, weight, group, groups)
    scatter = recovery_scatter_variance(basis, first, analysis_variance, group, groups)
    weight = 1.0 / (analysis_variance + scatter[group] * basis * basis)
    slope, sum_wbb, residual = _slope(basis, dissolved, weight, group, groups)
    n = np.bincount(group, minlength=groups)
    dof = n - 1
    with np.errstate(divide="ignore", invalid="ignore"):
        leverage = weight * basis * basis / sum_wbb[group]
        score = weight * basis * residual / (1.0 - leverage)
        std_error = np.where(dof > 0, np.sqrt(np.bincount(group, score * score, groups)) / sum_wbb, np.nan)
    t = stats.t.ppf(0.5 + confidence / 2.0, np.maximum(dof, 1))
    return slope, std_error, np.where(dof > 0, t * std_error, np.nan)


def estimate(cases: Sequence[RecoveryCase], book: RecipeBook, min_cases: int = DEFAULT_MIN_CASES,
             confidence: float = CONFIDENCE) -> tuple[RecoveryEstimate, ...]:
    """One estimate per (material, element) that has cases, in the recipe book's order."""
    if not cases:
        return ()
    order = {name: k for k, name in enumerate(book.material_names)}
    keys = sorted({(c.material, c.element) for c in cases},
                  key=lambda key: (order.get(key[0], len(order)), element_sort_key(key[1])))
    index = {key: k for k, key in enumerate(keys)}
    group = np.array([index[(c.material, c.element)] for c in cases])
    slope, std_error, half = weighted_ratio(np.array([c.basis_kg for c in cases]),
                                            np.array([c.dissolved_kg for c in cases]),
                                            np.array([c.weight for c in cases]), group, confidence)
    counts = np.bincount(group, minlength=len(keys))
    estimates = []
    for k, (name, symbol) in enumerate(keys):
        catalogue = book.material(name).recovery.get(symbol, 1.0)
        known = bool(np.isfinite(half[k]))
        # A recovery lies in (0, 1]; an interval beyond 1 says "all of it", one below 0 "none".
        low, high = (float(np.clip(slope[k] - half[k], 0.0, 1.0)),
                     float(np.clip(slope[k] + half[k], 0.0, 1.0))) if known else (None, None)
        # A slope at or below 0 contradicts the mass balance; one that rounds to the catalogue's
        # value to three decimals gives nothing to write: no proposal from either.
        propose = (low is not None and high is not None and slope[k] > 0 and counts[k] >= min_cases
                   and not low <= catalogue <= high
                   and round(float(slope[k]), 3) != catalogue)
        estimates.append(RecoveryEstimate(
            material=name, element=symbol, catalogue=catalogue, estimate=float(np.clip(slope[k], 1e-3, 1.0)),
            ci_low=low, ci_high=high, std_error=float(std_error[k]) if known else None, cases=int(counts[k]),
            propose=bool(propose)))
    return tuple(estimates)


def fit_records(records: Iterable[HeatRecord], book: RecipeBook, min_cases: int = DEFAULT_MIN_CASES,
                confidence: float = CONFIDENCE) -> RecoveryFit:
    """Estimates from recorded heats (see the module's method)."""
    if min_cases < 2:
        raise ValueError(f"min_cases must be at least 2 (an interval needs two cases), got {min_cases}")
    layout = ExportLayout.from_settings(book.settings.spectrometer)
    cases: list[RecoveryCase] = []
    skipped: list[SkippedCase] = []
    heats = 0
    for record in records:
        found, left = record_cases(record, book, layout)
        cases += found
        skipped += left
        heats += 1
    return RecoveryFit(estimate(cases, book, min_cases, confidence), tuple(cases), tuple(skipped), heats, (),
                       min_cases, confidence)


def fit_logbook(logbook: Logbook, book: RecipeBook, date_from: date | None = None, date_to: date | None = None,
                min_cases: int = DEFAULT_MIN_CASES, confidence: float = CONFIDENCE) -> RecoveryFit:
    """Estimates from the heats that started between two dates (inclusive; either may be open).

    A heat the replay cannot read (never planned, a material or grade not in the recipe book,
    samples out of order) is left out and named in the notes, not fatal.
    """
    records: list[HeatRecord] = []
    left_out: list[str] = []
    with logbook.reading():
        summaries = logbook.list_heats(date_from, date_to)
        for summary in summaries:
            if summary.samples < 2 or not summary.corrections:
                continue  # nothing to learn from, and nothing wrong either
            try:
                records.append(record_from_history(logbook.heat_history(summary.heat_id), book))
            except InputError as exc:
                where = f"{exc.field}: " if exc.field else ""
                left_out.append(f"{summary.heat_id} ({where}{exc.message})")
    fit = fit_records(records, book, min_cases, confidence)
    return replace(fit, heats=len(summaries), heats_skipped=tuple(left_out))
