"""Properties every plan must have, on shops and heats drawn by Hypothesis (derandomised, so the
suite is repeatable; the number of examples is kept modest so it stays fast).

Each plan is re-checked by a mass balance written here from the definitions of the mass balance (element
mass W c + sum a r x, bath W + sum x sum_i a_i r_i), sharing no code with the planner:
windows met (or exactly the reported violations), stock, capacity, temperature, whole packs,
minimum additions, locks. Then two properties of the optimum: one more material never makes it
dearer, and scaling every mass scales the plan.
"""

from __future__ import annotations

from types import MappingProxyType
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from meltfix.plan.planner import Planner
from meltfix.plan.result import Plan, PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material, parse_material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ShopSettings

ELEMENTS = ("C", "Si", "Mn", "Cr", "Ni", "Cu")
FAST = settings(derandomize=True, database=None, max_examples=150, deadline=None,
                suppress_health_check=[HealthCheck.too_slow])
MET_PCT = 1e-7  # a limit counts as met within the solver's feasibility tolerance [wt %]


# --------------------------------------------------------------------------------------------
# Strategies

def material_entry(draw: st.DrawFn, j: int, main: str, elements: tuple[str, ...], packs: bool) -> dict[str, Any]:
    """One material: ``main`` at 20-85 % (or "clean" for a dilution material), one side element."""
    composition: dict[str, float] = {}
    if main != "clean":
        composition[main] = draw(st.floats(20, 85))
    side = draw(st.sampled_from(elements))
    if side != main:
        composition[side] = draw(st.floats(0.0, 5.0))
    entry: dict[str, Any] = {
        "name": f"M{j}", "kind": "dilution" if main == "clean" else "alloy",
        # A small distinct factor keeps two materials from costing exactly the same per unit of
        # what they bring, so the optimum is unique (the scaling property needs that).
        "price_per_kg": draw(st.floats(0.2, 40.0)) * (1 + 0.0137 * j),
        "composition": composition,
        "recovery": {s: draw(st.floats(0.5, 1.0)) for s in composition},
        "stock_kg": draw(st.floats(50.0, 5000.0)),
        "chill_per_kg_t": draw(st.floats(-1.0, 2.5)),
    }
    if packs and draw(st.booleans()):
        entry["pack_kg"] = draw(st.sampled_from([5.0, 10.0, 25.0, 50.0]))
    if draw(st.integers(0, 3)) == 0:
        entry["min_kg"] = draw(st.floats(1.0, 50.0))
    return entry


@st.composite
def shop_and_heat(draw: st.DrawFn, packs: bool = True, extras: tuple[int, int] = (0, 2)
                  ) -> tuple[list[dict[str, Any]], dict[str, Any], ShopSettings, Heat]:
    """A grade on 2-4 elements, an alloy for each element with a minimum (mostly), then ``extras``
    more materials, and a heat that is mostly short of its windows."""
    elements = tuple(draw(st.permutations(ELEMENTS))[: draw(st.integers(2, 4))])
    window = {}
    for s in elements:
        low = draw(st.floats(0.05, 1.5) | st.just(0.0))
        window[s] = [low, low + draw(st.floats(0.05, 0.6))]
    aim = {s: lo + draw(st.floats(0.0, 1.0)) * (hi - lo) for s, (lo, hi) in window.items() if draw(st.booleans())}
    grade: dict[str, Any] = {"name": "G", "window": window, "aim": aim}
    if draw(st.integers(0, 4)) == 0:
        first, second = elements[:2]
        grade["index"] = {"IX": {"terms": {first: 1.0, second: draw(st.sampled_from([0.5, -2.0]))},
                                 "max": window[first][1] + 0.5}}
    mains = [s for s, (lo, _) in window.items() if lo > 0 and draw(st.integers(0, 9)) > 0]
    mains += [draw(st.sampled_from(elements + ("clean",))) for _ in range(draw(st.integers(*extras)))]
    entries = [material_entry(draw, j, main, elements, packs) for j, main in enumerate(mains)]

    bath = draw(st.floats(5_000.0, 150_000.0))
    # Mostly short of the window (a trim), sometimes inside, now and then a little over the top.
    pct = {}
    for s, (lo, hi) in window.items():
        where = draw(st.sampled_from(["short", "short", "inside", "over"]))
        fraction = {"short": -0.05 - draw(st.floats(0.0, 0.6)), "inside": draw(st.floats(0.0, 1.0)),
                    "over": 1.0 + draw(st.floats(0.0, 0.05))}[where]
        pct[s] = max(0.0, lo + fraction * (hi - lo))
    below = draw(st.frozensets(st.sampled_from(elements), max_size=1))
    heat = Heat(
        heat_id="H", grade="G", bath_kg=bath, analysis=Analysis(pct, below),
        capacity_kg=draw(st.none() | st.floats(0.005, 0.15).map(lambda f: bath * (1 + f))),
        max_temp_drop_c=draw(st.none() | st.floats(2.0, 40.0)),
    )
    return entries, grade, ShopSettings(aim_penalty=draw(st.floats(0.05, 3.0))), heat


def make_book(entries: list[dict[str, Any]], grade: dict[str, Any], shop: ShopSettings) -> RecipeBook:
    materials = tuple(parse_material(e, "drawn", f"material #{k}.") for k, e in enumerate(entries, 1))
    return RecipeBook(materials, MappingProxyType({"G": parse_grade(grade, "grades/G.toml")}), shop)


# --------------------------------------------------------------------------------------------
# The independent re-check

def mass_balance(heat: Heat, additions: list[tuple[Material, float]], floor_below: bool
                 ) -> tuple[float, dict[str, float]]:
    """Final bath [kg] and analysis [wt %]; ``floor_below`` counts below-limit readings as 0."""
    kg = {s: heat.bath_kg * (0.0 if floor_below and s in heat.analysis.below_limit else v) / 100
          for s, v in heat.analysis.pct.items()}
    final = heat.bath_kg
    for material, x in additions:
        for s, a in material.composition_pct.items():
            into_bath = x * a / 100 * material.recovery.get(s, 1.0)
            final += into_bath
            if s != "Fe":
                kg[s] = kg.get(s, 0.0) + into_bath
    return final, {s: 100 * m / final for s, m in kg.items()}


def missed_limits(book: RecipeBook, heat: Heat, plan: Plan) -> dict[tuple[str, str], float]:
    """Every limit the plan misses, recomputed here: (name, "min"/"max") -> by how much [wt %].

    Against a minimum a below-limit reading counts as 0 (the safe end); against a maximum, at its
    limit; for an index, each term at whichever end is the safe one given its weight's sign."""
    used = [(book.material(a.material), a.kg) for a in plan.additions]
    _, high = mass_balance(heat, used, floor_below=False)
    _, low = mass_balance(heat, used, floor_below=True)
    grade = book.grade(heat.grade)
    misses: dict[tuple[str, str], float] = {}
    for s, (lo, hi) in grade.window_pct.items():
        if lo > 0 and low.get(s, 0.0) < lo:
            misses[(s, "min")] = lo - low.get(s, 0.0)
        if high.get(s, 0.0) > hi:
            misses[(s, "max")] = high.get(s, 0.0) - hi
    for index in grade.indices:
        least = sum(w * (low if w > 0 else high).get(s, 0.0) for s, w in index.terms.items())
        most = sum(w * (high if w > 0 else low).get(s, 0.0) for s, w in index.terms.items())
        if index.min_value is not None and least < index.min_value:
            misses[(index.name, "min")] = index.min_value - least
        if index.max_value is not None and most > index.max_value:
            misses[(index.name, "max")] = most - index.max_value
    return misses


def objective(book: RecipeBook, heat: Heat, plan: Plan, use_aim: bool) -> float:
    """Cost plus the aim penalty (10 w per kg of element off aim), from the independent balance."""
    used = [(book.material(a.material), a.kg) for a in plan.additions]
    final, pct = mass_balance(heat, used, floor_below=False)
    grade = book.grade(heat.grade)
    off_kg = sum(abs(pct.get(s, 0.0) - aim) / 100 * final for s, aim in grade.aim_pct.items()) if use_aim else 0.0
    return sum(a.kg * book.material(a.material).price_per_kg for a in plan.additions) + \
        10 * book.settings.aim_penalty * off_kg


# --------------------------------------------------------------------------------------------

@FAST
@given(drawn=shop_and_heat(), use_aim=st.booleans(), continuous=st.booleans())
def test_every_plan_rechecked_by_an_independent_mass_balance(drawn, use_aim: bool, continuous: bool) -> None:
    entries, grade_table, shop, heat = drawn
    book = make_book(entries, grade_table, shop)
    plan = Planner(book).plan(heat, PlanOptions(use_aim=use_aim, continuous=continuous))
    used = [(book.material(a.material), a.kg) for a in plan.additions]

    for addition, (material, kg) in zip(plan.additions, used):
        assert kg > 0 and addition.cost >= 0  # never negative (zero amounts are left out)
        assert kg <= material.stock_kg * (1 + 1e-9)
        if material.pack_kg and not continuous:
            assert addition.packs is not None and addition.packs == round(addition.packs)
            assert kg == pytest.approx(addition.packs * material.pack_kg, rel=1e-12)
        assert kg >= material.min_kg * (1 - 1e-9)

    final, pct = mass_balance(heat, used, floor_below=False)
    assert plan.final_kg == pytest.approx(final, rel=1e-12)
    for s, value in pct.items():
        assert plan.predicted_pct[s] == pytest.approx(value, rel=1e-9, abs=1e-12)
    if heat.capacity_kg is not None:
        assert final <= heat.capacity_kg * (1 + 1e-9)
    if heat.max_temp_drop_c is not None:
        drop = sum(m.chill_per_kg_t * kg for m, kg in used) / (heat.bath_kg / 1000)
        assert drop <= heat.max_temp_drop_c + 1e-6

    misses = missed_limits(book, heat, plan)
    if plan.status == "optimal":
        assert all(by < MET_PCT for by in misses.values()), misses
    else:
        reported = {(v.element, v.limit): v.by_pct for v in plan.violations}
        assert reported.keys() == {k for k, by in misses.items() if by > 1e-9}
        for key, by in reported.items():
            assert by == pytest.approx(misses[key], rel=1e-9, abs=1e-12)
            assert by > 0


@FAST
@given(drawn=shop_and_heat(extras=(1, 2)), use_aim=st.booleans(), continuous=st.booleans())
def test_one_more_material_never_makes_the_optimum_dearer(drawn, use_aim: bool, continuous: bool) -> None:
    # Adding a material keeps every old plan possible (add none of it), so the optimum of what is
    # minimised cannot rise. With --no-aim that is the cost; with aims it is cost plus aim penalty,
    # and the cost alone may rise (a dearer material can buy a closer aim).
    entries, grade_table, shop, heat = drawn
    fewer = make_book(entries[:-1], grade_table, shop)
    more = make_book(entries, grade_table, shop)
    options = PlanOptions(use_aim=use_aim, continuous=continuous)
    before = Planner(fewer).plan(heat, options)
    after = Planner(more).plan(heat, options)
    if before.status == "optimal":
        assert after.status == "optimal"
        # within the relative MIP gap (1e-6) of each solve
        assert objective(more, heat, after, use_aim) <= objective(fewer, heat, before, use_aim) * (1 + 2e-6) + 1e-6
        if not use_aim:
            assert after.total_cost <= before.total_cost * (1 + 2e-6) + 1e-6


def scaled(entries: list[dict[str, Any]], heat: Heat, k: float) -> tuple[list[dict[str, Any]], Heat]:
    """Every mass times k: bath, capacity, stock, packs, minimum additions."""
    grown = [dict(e, **{key: e[key] * k for key in ("stock_kg", "pack_kg", "min_kg") if key in e}) for e in entries]
    return grown, heat.with_changes(bath_kg=heat.bath_kg * k,
                                    capacity_kg=None if heat.capacity_kg is None else heat.capacity_kg * k)


@FAST
@given(drawn=shop_and_heat(), k=st.sampled_from([0.25, 0.5, 2.0, 3.7, 10.0]), use_aim=st.booleans(),
       continuous=st.booleans())
def test_scaling_every_mass_scales_the_plan(drawn, k: float, use_aim: bool, continuous: bool) -> None:
    # The windows, the aim penalty per kg and the chill per kg/t are all homogeneous in mass, so
    # scaling bath, capacity, stock, packs and minimums by k scales the optimal plan by k.
    entries, grade_table, shop, heat = drawn
    options = PlanOptions(use_aim=use_aim, continuous=continuous)
    plan = Planner(make_book(entries, grade_table, shop)).plan(heat, options)
    big_entries, big_heat = scaled(entries, heat, k)
    big = Planner(make_book(big_entries, grade_table, shop)).plan(big_heat, options)
    assert big.status == plan.status
    if plan.status != "optimal":
        return
    assert big.total_cost == pytest.approx(k * plan.total_cost, rel=1e-5, abs=1e-6 * k)
    assert big.final_kg == pytest.approx(k * plan.final_kg, rel=1e-9)
    small = {a.material: a.kg for a in plan.additions}
    large = {a.material: a.kg for a in big.additions}
    tolerance = 1e-5 * max(1.0, sum(small.values()))
    for name in small.keys() | large.keys():
        assert large.get(name, 0.0) / k == pytest.approx(small.get(name, 0.0), abs=tolerance)
    for s, value in plan.predicted_pct.items():
        assert big.predicted_pct[s] == pytest.approx(value, rel=1e-6, abs=1e-9)
    for a, b in zip(sorted(plan.additions, key=lambda a: a.material), sorted(big.additions, key=lambda a: a.material)):
        assert a.packs == b.packs  # the same whole numbers of k-times-larger packs

