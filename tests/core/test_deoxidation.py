"""Aluminium for dissolved oxygen (2 Al + 3 O -> Al2O3) and how the planner pays it.

Recipe books are built here from the same tables a recipes folder holds (through the real parsers).
Contents in wt %, oxygen in ppm, masses in kg, recoveries as fractions.
"""

from __future__ import annotations

import shutil
import tomllib
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import periodictable
import pytest

from meltfix.base.errors import InputError
from meltfix.base.paths import default_recipes_dir
from meltfix.plan.deoxidation import AL_PER_O, aluminium_for_oxygen_pct, aluminium_owed_pct
from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat, heat_to_toml, parse_heat, validate_heat
from meltfix.shop.materials import parse_material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import ShopSettings

NO_AIM = PlanOptions(use_aim=False)
W = 50_000.0  # 50 t
R_AL = 0.5  # the aluminium's recovery, given


def shop(al_window: list[float] | None, with_aluminium: bool = True, basis: str = "killed") -> RecipeBook:
    """A two-material book; ``basis`` is what its aluminium recovery is measured on, carried by the
    grade as load_recipes carries shop.toml's aluminium_recovery_basis."""
    materials = [{"name": "FeMn", "price_per_kg": 1.4, "composition": {"Mn": 78.0}, "recovery": {"Mn": 0.9}}]
    if with_aluminium:
        materials.append({"name": "Al bar", "kind": "deoxidiser", "price_per_kg": 2.7,
                          "composition": {"Al": 99.5}, "recovery": {"Al": R_AL}})
    window: dict[str, list[float]] = {"Mn": [0.80, 1.00]}
    if al_window is not None:
        window["Al"] = al_window
    parsed = tuple(parse_material(m, "materials.toml", f"material #{k}.") for k, m in enumerate(materials, 1))
    grade = replace(parse_grade({"name": "Killed", "window": window}, "grades/killed.toml"),
                    aluminium_recovery_basis=basis)
    return RecipeBook(parsed, MappingProxyType({"Killed": grade}), ShopSettings(aluminium_recovery_basis=basis))


def heat(oxygen_ppm: float | None, al_pct: float = 0.005) -> Heat:
    return Heat("D1", "Killed", W, Analysis({"Mn": 0.85, "Al": al_pct}), dissolved_o_ppm=oxygen_ppm)


def al_kg(plan: Any) -> float:
    return sum(a.kg for a in plan.additions if a.material == "Al bar")


# --------------------------------------------------------------------------------------------
# Stoichiometry

def test_al_to_o_ratio_matches_the_published_ratio_and_periodictable() -> None:
    # Worked here from the IUPAC/CIAAW 2021 standard atomic weights (Al 26.9815384, O 15.999):
    # 2 x 26.9815384 / (3 x 15.999) = 53.9631 / 47.997 = 1.12430; O : Al = 0.88944.
    assert AL_PER_O == pytest.approx(1.1243, abs=5e-5)
    assert 1 / AL_PER_O == pytest.approx(0.8894, abs=5e-5)
    # periodictable 2.x carries the IUPAC/CIAAW standard atomic weights; older IUPAC tables differ in
    # the 5th-7th digit (e.g. Al 26.981538 in 1997), hence the relative tolerance.
    outside = 2 * periodictable.Al.mass / (3 * periodictable.O.mass)
    assert AL_PER_O == pytest.approx(outside, rel=1e-4)
    alumina = periodictable.formula("Al2O3")
    # Al2O3 is 53.9631 / (53.9631 + 47.997) = 0.52926 aluminium by mass (CIAAW 2021 weights, worked here).
    assert 2 * periodictable.Al.mass / alumina.mass == pytest.approx(0.5293, abs=5e-5)


def test_removing_400_ppm_oxygen_needs_0_04497_percent_aluminium() -> None:
    # Worked here: 400 ppm O = 0.0400 %, times 1.12430 = 0.04497 % Al = 0.450 kg per tonne.
    assert aluminium_for_oxygen_pct(400) == pytest.approx(0.04497, abs=5e-6)
    assert aluminium_for_oxygen_pct(400) * 10 == pytest.approx(0.450, abs=5e-4)  # wt % -> kg/t
    assert aluminium_for_oxygen_pct(0) == 0.0


def test_the_debt_applies_only_with_a_reading_and_an_al_window() -> None:
    grade = shop([0.020, 0.060]).grade("Killed")
    assert aluminium_owed_pct(heat(400), grade) == {"Al": pytest.approx(0.04497, abs=5e-6)}
    assert aluminium_owed_pct(heat(None), grade) == {}
    assert aluminium_owed_pct(heat(0), grade) == {}
    assert aluminium_owed_pct(heat(400), shop(None).grade("Killed")) == {}


# --------------------------------------------------------------------------------------------
# The planner pays the debt

def test_400_ppm_oxygen_needs_0_450_kg_per_t_more_recovered_aluminium() -> None:
    # Hand check at r_Al = 0.5: the cheapest plan lands Al on its 0.020 % minimum with or without
    # the reading; with it, 0.450 kg/t more Al must dissolve first (worked above) - plus a hair
    # for the extra bath the extra bar makes, c_min * g * dx, 0.0002 kg/t here.
    book = shop([0.020, 0.060])
    planner = Planner(book)
    without = planner.plan(heat(None), NO_AIM)
    with_o = planner.plan(heat(400), NO_AIM)
    assert without.status == with_o.status == "optimal"
    recovered_per_t = (al_kg(with_o) - al_kg(without)) * 0.995 * R_AL / (W / 1000)
    assert recovered_per_t == pytest.approx(0.450, abs=5e-4)
    # Exactly the one-element closed form (meltfix.plan.massbalance) with the start lowered by the debt:
    # x = W (c_min - c0 + 0.04497 %) / (r a - g c_min), g = 0.995 r + 0.005 (iron balance at 1).
    g = 0.995 * R_AL + 0.005
    for plan, debt in ((without, 0.0), (with_o, 1.1243 * 0.0400 / 100)):
        expected = W * (0.00020 - 0.00005 + debt) / (R_AL * 0.995 - g * 0.00020)
        assert al_kg(plan) == pytest.approx(expected, rel=1e-4)
        assert plan.predicted_pct["Al"] == pytest.approx(0.020, abs=1e-9)
    assert any("22.5 kg of Al goes to deoxidation" in note for note in with_o.notes)


def test_the_plan_rechecks_exactly_with_the_plain_mass_balance() -> None:
    book = shop([0.020, 0.060])
    plan = Planner(book).plan(heat(400))
    used = [(book.material(a.material), a.kg) for a in plan.additions]
    owed = aluminium_owed_pct(heat(400), book.grade("Killed"))
    final_kg, predicted = bath_after(W, heat(400).analysis.pct, used, owed)
    assert final_kg == pytest.approx(plan.final_kg, rel=1e-12)
    assert predicted["Al"] == pytest.approx(plan.predicted_pct["Al"], rel=1e-12)
    # Without the debt the same additions would read the debt higher, diluted by the additions
    # (the bath mass is the same either way).
    plain = bath_after(W, heat(400).analysis.pct, used)[1]
    assert plain["Al"] - predicted["Al"] == pytest.approx(owed["Al"] * W / final_kg, rel=1e-9)


def test_a_zero_al_minimum_still_makes_the_plan_pay_the_whole_debt() -> None:
    # A grade with Al at most 0.050 % (52100-like): its 0 % floor is no limit on a plain heat, but
    # with oxygen to bind, the additions must at least bind all of it.
    book = shop([0.0, 0.050])
    plan = Planner(book).plan(heat(400, al_pct=0.0), NO_AIM)
    assert plan.status == "optimal"
    assert plan.predicted_pct["Al"] == pytest.approx(0.0, abs=1e-9)
    assert al_kg(plan) * 0.995 * R_AL == pytest.approx(W * 0.04497 / 100, rel=2e-3)
    assert [c.limit_pct for c in plan.checks if c.element == "Al" and c.limit == "min"] == [0.0]
    plain = Planner(book).plan(heat(None, al_pct=0.0), NO_AIM)
    assert al_kg(plain) == 0 and not any(c.element == "Al" and c.limit == "min" for c in plain.checks)


def test_no_aluminium_in_stock_gives_a_closest_plan_naming_al() -> None:
    plan = Planner(shop([0.0, 0.050], with_aluminium=False)).plan(heat(400, al_pct=0.0))
    assert plan.status == "closest"
    assert [(v.element, v.limit) for v in plan.violations] == [("Al", "min")]
    assert plan.predicted_pct["Al"] < 0  # oxygen left unbound, shown as what is still owed


def test_a_reading_on_a_grade_without_an_al_window_is_noted_and_changes_nothing() -> None:
    planner = Planner(shop(None))
    plain, with_o = planner.plan(heat(None)), planner.plan(heat(400))
    assert with_o.additions == plain.additions
    assert any("dissolved O reading is not used" in note for note in with_o.notes)


# --------------------------------------------------------------------------------------------
# The basis of the aluminium recovery: killed steel (the oxygen owed on top) or from tap (inside it)

def _closed_form_al_kg(debt_pct: float) -> float:
    """x = W (c_min - c0 + debt) / (r a - g c_min) for Al 0.005 -> 0.020 % with the bar above."""
    g = 0.995 * R_AL + 0.005
    return W * (0.00020 - 0.00005 + debt_pct / 100) / (R_AL * 0.995 - g * 0.00020)


def test_the_recipe_book_says_what_its_aluminium_recovery_is_measured_on(tmp_path: Path) -> None:
    book = load_recipes()
    assert book.settings.aluminium_recovery_basis == "killed"
    assert {g.aluminium_recovery_basis for g in book.grades.values()} == {"killed"}
    # A shop whose figures come from tap says so, and every grade follows.
    folder = tmp_path / "recipes"
    shutil.copytree(default_recipes_dir(), folder)
    shop_toml = folder / "shop.toml"
    shop_toml.write_text(shop_toml.read_text(encoding="utf-8").replace(
        'aluminium_recovery_basis = "killed"', 'aluminium_recovery_basis = "tap"'), encoding="utf-8")
    assert {g.aluminium_recovery_basis for g in load_recipes(folder).grades.values()} == {"tap"}


def test_on_killed_steel_recoveries_the_reading_is_owed_on_top() -> None:
    plan = Planner(shop([0.020, 0.060])).plan(heat(400), NO_AIM)
    assert al_kg(plan) == pytest.approx(_closed_form_al_kg(AL_PER_O * 0.0400), rel=1e-4)


def test_from_tap_the_reading_is_inside_the_recovery_and_not_counted_again() -> None:
    book = shop([0.020, 0.060], basis="tap")
    planner = Planner(book)
    without, with_o = planner.plan(heat(None), NO_AIM), planner.plan(heat(400), NO_AIM)
    assert aluminium_owed_pct(heat(400), book.grade("Killed")) == {}
    # The hand closed form with no debt, reading or not.
    assert al_kg(with_o) == pytest.approx(al_kg(without), rel=1e-9)
    assert al_kg(with_o) == pytest.approx(_closed_form_al_kg(0.0), rel=1e-4)
    assert with_o.predicted_pct["Al"] == pytest.approx(0.020, abs=1e-9)
    assert any("not counted again" in note and "from tap" in note for note in with_o.notes)
    # The re-check follows the same basis: the plain mass balance with nothing owed.
    used = [(book.material(a.material), a.kg) for a in with_o.additions]
    assert bath_after(W, heat(400).analysis.pct, used)[1]["Al"] == pytest.approx(with_o.predicted_pct["Al"],
                                                                                    rel=1e-9)


def test_counting_the_oxygen_twice_is_caught() -> None:
    # The deliberately wrong arithmetic for a tap basis: subtracting the reading anyway, as the
    # killed-steel planner does. It asks 0.450 kg/t more recovered aluminium (22.5 kg at 50 t), which
    # the tap check above (the closed form with no debt, rel 1e-4) would fail.
    twice = al_kg(Planner(shop([0.020, 0.060], basis="killed")).plan(heat(400), NO_AIM))
    assert twice != pytest.approx(_closed_form_al_kg(0.0), rel=1e-4)
    assert (twice - _closed_form_al_kg(0.0)) * 0.995 * R_AL == pytest.approx(22.49, abs=0.05)


# --------------------------------------------------------------------------------------------
# HEAT.toml

def test_heat_toml_reads_and_writes_the_oxygen_reading() -> None:
    data = {"grade": "Killed", "bath_kg": W, "dissolved_o_ppm": 412.5, "analysis": {"Mn": 0.85, "Al": 0.005}}
    read = parse_heat(data, "D1.toml", "D1")
    assert read.dissolved_o_ppm == 412.5
    again = parse_heat(tomllib.loads(heat_to_toml(read)), "again", "x")
    assert again == read
    assert "dissolved_o_ppm" not in heat_to_toml(heat(None))


@pytest.mark.parametrize(("value", "message"), [(-5, "must not be negative"), ("400 ppm", "expected a number"),
                                                 (4000, "outside 0..2500 ppm")])
def test_a_bad_oxygen_reading_is_one_clear_message(value: object, message: str) -> None:
    data = {"grade": "Killed", "bath_kg": W, "dissolved_o_ppm": value, "analysis": {"Mn": 0.85}}
    with pytest.raises(InputError) as caught:
        validate_heat(parse_heat(data, "D1.toml", "D1"), shop([0.02, 0.06]), "D1.toml")
    assert caught.value.field == "dissolved_o_ppm" and message in caught.value.message
    assert "D1.toml" in str(caught.value)
