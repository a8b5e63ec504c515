"""In-spec odds of a plan (seeded Monte Carlo).

Outside checks: with no scatter the draws are the measured heat, so the odds must be exactly the
plan's own checks (1 inside, 0 outside); with only the bath weight uncertain, the odds follow in
closed form from the mass balance and the normal distribution (scipy.stats.norm, a reference
library); a plan on a limit with errors symmetric about the measured values lands on either side
of it equally often.
"""

from __future__ import annotations

from pathlib import Path
from types import MappingProxyType
from typing import Any

import pytest
from scipy.stats import norm

from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.plan.uncertainty import NO_SCATTER, plan_odds
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.materials import parse_material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import Scatter, ShopSettings

DEMO_HEATS = sorted((Path(__file__).resolve().parents[2] / "demo" / "heats").glob("*.toml"))
NO_AIM_LOOSE = PlanOptions(use_aim=False, continuous=True)
W = 50_000.0


def mn_book(window: list[float], **extra: Any) -> RecipeBook:
    """One ferromanganese (Mn 78 %, r 0.85: 3.5 standard deviations of 5 % below 1, so its error is
    not clipped in practice)."""
    femn = {"name": "FeMn", "price_per_kg": 1.4, "composition": {"Mn": 78.0}, "recovery": {"Mn": 0.85}, **extra}
    aluminium = {"name": "Al bar", "kind": "deoxidiser", "price_per_kg": 2.7, "composition": {"Al": 99.5},
                 "recovery": {"Al": 0.5}}
    materials = tuple(parse_material(m, "materials.toml", f"material #{k}.") for k, m in enumerate((femn, aluminium), 1))
    grade = parse_grade({"name": "Mn", "window": {"Mn": window, "Al": [0.020, 0.060]}}, "grades/mn.toml")
    return RecipeBook(materials, MappingProxyType({"Mn": grade}), ShopSettings())


def mn_heat(**fields: Any) -> Heat:
    return Heat("U1", "Mn", W, Analysis({"Mn": 0.50, "Al": 0.030}), **fields)


# --------------------------------------------------------------------------------------------
# No scatter: the odds are the plan's own checks

def test_with_no_scatter_the_odds_are_exactly_the_plans_own_checks() -> None:
    book = load_recipes(None)
    planner = Planner(book)
    heats = [load_heat(path, book) for path in DEMO_HEATS]
    # One heat made hopeless on purpose: no free capacity, so residuals over a maximum stay over.
    heats.append(heats[4].with_changes(capacity_kg=heats[4].bath_kg))
    statuses = set()
    for heat in heats:
        plan = planner.plan(heat)
        statuses.add(plan.status)
        odds = plan_odds(heat, book, plan, draws=50, seed=1, scatter=NO_SCATTER)
        expected = {f"{c.element} {c.limit}": 1.0 if c.margin_pct >= -1e-9 else 0.0 for c in plan.checks}
        assert dict(odds.limits) == expected, heat.heat_id
        assert odds.heat == (1.0 if plan.status == "optimal" else 0.0), heat.heat_id
    assert statuses == {"optimal", "closest"}


def test_with_no_scatter_the_deoxidation_debt_is_simulated_as_planned() -> None:
    # The plan puts Al exactly on its 0.020 % minimum after paying 400 ppm O: the simulation must
    # take the same debt off, or Al would come out 0.045 % higher (or, missed the other way, short).
    book = mn_book([0.80, 0.95])
    heat = mn_heat(dissolved_o_ppm=400.0)
    plan = Planner(book).plan(heat, NO_AIM_LOOSE)
    assert plan.predicted_pct["Al"] == pytest.approx(0.020, abs=1e-9)
    odds = plan_odds(heat, book, plan, draws=20, scatter=NO_SCATTER)
    assert odds.limits["Al min"] == 1.0 and odds.heat == 1.0
    # Judged without the reading, the same additions would sit 0.045 % higher, never on the limit.
    assert plan_odds(heat.with_changes(dissolved_o_ppm=None), book, plan, draws=20,
                     scatter=Scatter(0.0, 0.0, 1.0)).limits["Al min"] == 1.0
    assert plan_odds(heat, book, plan, draws=2000, scatter=Scatter(0.0, 0.0, 1.0)).limits["Al min"] < 0.6


# --------------------------------------------------------------------------------------------
# Known distributions

def test_bath_weight_alone_gives_the_closed_form_odds() -> None:
    # 230 kg of FeMn locked (0.802 % Mn as planned); true bath W' normal around W with a 1 %
    # relative standard deviation. Mn after = (W' c0 + A) / (W' + G) with A = r a x, G = g x; it
    # falls as W' grows, so Mn >= lo exactly when W' <= (A - lo G) / (lo - c0) = W*, and
    # P = Phi((W*/W - 1) / 0.01), the normal distribution function from scipy.stats.norm.
    x, a, r = 230.0, 0.78, 0.85
    g = a * r + (1 - a)  # the iron balance dissolves fully
    book = mn_book([0.80, 0.95])
    heat = Heat("U2", "Mn", W, Analysis({"Mn": 0.50, "Al": 0.030}), locked_kg={"FeMn": x})
    plan = Planner(book).plan(heat, NO_AIM_LOOSE)
    lo, c0 = 0.0080, 0.0050
    w_star = (r * a * x - lo * g * x) / (lo - c0)
    expected = float(norm.cdf((w_star / W - 1.0) / 0.01))
    assert 0.2 < expected < 0.8  # the window edge is inside the scatter: a real test
    odds = plan_odds(heat, book, plan, draws=20_000, seed=3, scatter=Scatter(0.0, 0.01, 0.0))
    assert odds.limits["Mn min"] == pytest.approx(expected, abs=0.015)  # 3.4 standard errors at 20 000 draws
    assert odds.limits["Mn max"] == 1.0


def test_a_plan_on_a_limit_has_even_odds_for_that_limit() -> None:
    # The cheapest plan raises Mn exactly to its 0.80 % minimum. Every error is normal about what
    # was measured (recoveries 5 %, none clipped at 1 here; the bath 2 %; the analysis); the content
    # after is close to linear in each over such small errors, so its median is the planned 0.80 %
    # and half the heats fall short. (The bath enters as 1/W, a convex curve: the bias is of order
    # 0.02^2, far below the scatter.)
    book = mn_book([0.80, 0.95])
    heat = mn_heat()
    plan = Planner(book).plan(heat, NO_AIM_LOOSE)
    assert plan.predicted_pct["Mn"] == pytest.approx(0.80, abs=1e-9)
    odds = plan_odds(heat, book, plan, draws=4000, seed=5)
    assert odds.limits["Mn min"] == pytest.approx(0.5, abs=0.03)  # 3.8 standard errors at 4000 draws
    assert odds.limits["Mn max"] == 1.0
    assert odds.heat == pytest.approx(odds.limits["Mn min"], abs=0.02)


def test_the_odds_are_reproducible_with_a_seed() -> None:
    book = mn_book([0.80, 0.95])
    heat = mn_heat()
    plan = Planner(book).plan(heat, NO_AIM_LOOSE)
    first = plan_odds(heat, book, plan, draws=500, seed=42)
    assert plan_odds(heat, book, plan, draws=500, seed=42) == first
    assert plan_odds(heat, book, plan, draws=500, seed=43).limits["Mn min"] != first.limits["Mn min"]
    assert first.to_json() == {"heat": first.heat, "limits": dict(first.limits), "draws": 500, "seed": 42}


