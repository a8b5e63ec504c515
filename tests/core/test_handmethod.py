"""The hand method (the baseline of the benchmark) against the single-addition mass balance."""

from __future__ import annotations

import math
from collections.abc import Callable
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from meltfix.plan.handmethod import HandRules, hand_plan, sheet_order, usual_materials
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook, load_recipes

BookOf = Callable[[str, str], RecipeBook]
EXACT = HandRules(loose_step_kg=0.0, scrap_step_kg=0.0)


@pytest.fixture()
def book_of(tmp_path: Path, write_recipes: Callable[..., Path]) -> Callable[[str, str], RecipeBook]:
    """A recipe book of this test's own materials and one grade (tests/conftest.py writes the folder)."""
    made = iter(range(1000))
    return lambda materials, grade: load_recipes(write_recipes(tmp_path / f"book{next(made)}", materials, grade))


def _amount(plan, name: str) -> float:
    return sum(a.kg for a in plan.additions if a.material == name)


FEMN = """
[[material]]
name = "FeMn 78"
price_per_kg = 1.4
composition = { Mn = 78.0 }
recovery = { Mn = 0.90 }
"""
MN_GRADE = """
name = "Mn trim"
[window]
Mn = [0.70, 0.90]
C = [0, 1.0]
[aim]
Mn = 0.80
"""
MN_HEAT = Heat("h", "Mn trim", 100_000.0, Analysis({"Mn": 0.50, "C": 0.0}))


def test_one_element_equals_the_closed_form(book_of: BookOf) -> None:
    # Single-addition mass balance, our reference sheet §4.4: W = 100 t, Mn 0.50 -> 0.80 %, a = 0.78,
    # r = 0.90. Its "brief's form" x = W (c* - c0) / (r (a - c*)) = 431.78 kg holds when the bath
    # grows by r x, i.e. when the alloy's iron is lost in the same proportion as its Mn. The closed
    # form is the textbook one; the 431.78 kg figure is computed there (no published numeric example
    # was found), so it is recomputed here by hand too.
    book = book_of(FEMN.replace("{ Mn = 0.90 }", "{ Mn = 0.90, Fe = 0.90 }"), MN_GRADE)
    closed_form = 100_000.0 * (0.0080 - 0.0050) / (0.90 * (0.78 - 0.0080))
    assert closed_form == pytest.approx(431.78, abs=0.005)
    plan = hand_plan(MN_HEAT, book, EXACT)
    assert [a.material for a in plan.additions] == ["FeMn 78"]
    assert plan.additions[0].kg == pytest.approx(closed_form, rel=1e-9)
    assert plan.predicted_pct["Mn"] == pytest.approx(0.800, abs=1e-9)  # back-substitution, §4.4
    assert plan.in_spec and plan.passes == 2  # one pass adds it all, the next finds nothing to add
    # Weighed out as a melter does, to the next whole kilogram.
    assert _amount(hand_plan(MN_HEAT, book), "FeMn 78") == 432.0


def test_iron_fully_recovered_lies_between_the_reference_forms(book_of: BookOf) -> None:
    # With the alloy's iron all dissolving, the bath grows by g x with g = 0.78 x 0.90 + 0.22 = 0.922,
    # and x = W (c* - c0) / (r a - g c*) (the general closed form of meltfix.plan.massbalance) = 431.89 kg by hand:
    # between §4.4's "brief's form" (g = r, 431.78 kg) and its "alternative" (g = 1, 432.28 kg).
    book = book_of(FEMN, MN_GRADE)
    plan = hand_plan(MN_HEAT, book, EXACT)
    expected = 100_000.0 * 0.0030 / (0.90 * 0.78 - 0.922 * 0.0080)
    assert plan.additions[0].kg == pytest.approx(expected, rel=1e-9)
    assert 431.78 < plan.additions[0].kg < 432.28


def test_carried_carbon_is_tracked(book_of: BookOf) -> None:
    carbon_femn = FEMN.replace("{ Mn = 78.0 }", "{ Mn = 78.0, C = 7.0 }")
    book = book_of(carbon_femn.replace("{ Mn = 0.90 }", "{ Mn = 0.90, C = 0.90, Fe = 0.90 }"), MN_GRADE)
    plan = hand_plan(MN_HEAT, book, EXACT)
    # Reference sheet §4.4 (computed there): the same 431.78 kg of FeMn at 7 % C, r_C = 0.90, adds
    # 0.0271 % C. The amount is unchanged because g stays r: Mn, C and iron all dissolve at 0.90.
    assert plan.additions[0].kg == pytest.approx(431.78, abs=0.005)
    assert plan.predicted_pct["C"] == pytest.approx(0.0271, abs=5e-5)


SCRAP = """
[[material]]
name = "Clean plate"
kind = "dilution"
price_per_kg = 0.36
composition = { Cu = 0.03 }
stock_kg = 20000
"""
CU_GRADE = """
name = "Cu limited"
[window]
Cu = [0, 0.30]
"""


def test_copper_over_its_maximum_is_diluted_with_clean_material(book_of: BookOf) -> None:
    book = book_of(SCRAP, CU_GRADE)
    plan = hand_plan(Heat("h", "Cu limited", 45_000.0, Analysis({"Cu": 0.34}), capacity_kg=60_000.0), book, EXACT)
    # Copper cannot be refined out of steel, only diluted (common practice). The melter dilutes to
    # 10 % of the window below the maximum: 0.27 %. Single-addition balance with the whole
    # addition joining the bath (reference sheet §4.4, "alternative" form, r = 1, a = 0.03 %):
    # x = W (c* - c0) / (a - c*) = 45 000 (0.0027 - 0.0034) / (0.0003 - 0.0027) = 13 125 kg (by hand).
    assert _amount(plan, "Clean plate") == pytest.approx(13_125.0, rel=1e-9)
    assert plan.predicted_pct["Cu"] == pytest.approx(0.27, abs=1e-9)
    assert plan.in_spec


def test_dilution_stops_at_the_vessel_capacity(book_of: BookOf) -> None:
    book = book_of(SCRAP, CU_GRADE)
    plan = hand_plan(Heat("h", "Cu limited", 45_000.0, Analysis({"Cu": 0.34}), capacity_kg=50_000.0), book)
    assert _amount(plan, "Clean plate") == pytest.approx(5_000.0)
    assert plan.final_kg <= 50_000.0 + 1e-6
    # (45 000 x 0.34 % + 5 000 x 0.03 %) / 50 000 = 0.309 % Cu, still over 0.30 (by hand).
    assert plan.predicted_pct["Cu"] == pytest.approx(0.309, abs=1e-9)
    assert not plan.in_spec
    assert any("capacity" in note for note in plan.notes)


MIXED = """
[[material]]
name = "HC FeMn"
price_per_kg = 1.35
composition = { Mn = 79.0, C = 6.8 }
recovery = { Mn = 0.90, C = 0.90 }
stock_kg = 400
min_kg = 20

[[material]]
name = "LC FeMn"
price_per_kg = 2.55
composition = { Mn = 86.5, C = 0.35 }
recovery = { Mn = 0.90, C = 0.90 }
stock_kg = 300

[[material]]
name = "Raiser"
kind = "carbon"
price_per_kg = 0.80
composition = { C = 98.5 }
recovery = { C = 0.90 }
stock_kg = 100
pack_kg = 25

[[material]]
name = "Nickel"
kind = "metal"
price_per_kg = 17.5
composition = { Ni = 99.9 }
recovery = { Ni = 0.99 }
stock_kg = 250
min_kg = 10

[[material]]
name = "Clean bales"
kind = "dilution"
price_per_kg = 0.40
composition = { C = 0.04, Mn = 0.20, Cu = 0.02, Ni = 0.02 }
stock_kg = 3000
pack_kg = 1000
"""
MIXED_GRADE = """
name = "Low-alloy"
[window]
C = [0.30, 0.40]
Mn = [0.60, 0.90]
Ni = [0.40, 0.70]
Cu = [0, 0.30]
[aim]
C = 0.35
Mn = 0.75
Ni = 0.55
"""


@pytest.fixture(scope="module")
def mixed_book(tmp_path_factory: pytest.TempPathFactory, write_recipes: Callable[..., Path]) -> RecipeBook:
    return load_recipes(write_recipes(tmp_path_factory.mktemp("mixed") / "recipes", MIXED, MIXED_GRADE))


def test_the_usual_material_is_the_cheapest_per_kg_of_recovered_element(mixed_book: RecipeBook) -> None:
    grade = mixed_book.grade("Low-alloy")
    # HC FeMn: 1.35 / (0.79 x 0.90) = 1.90 per kg Mn; LC FeMn: 2.55 / (0.865 x 0.90) = 3.28 (by hand).
    assert [m.name for m in usual_materials(grade, mixed_book.materials, "Mn")][:2] == ["HC FeMn", "LC FeMn"]
    # Ferromanganese as a carbon raiser would carry in ~1.2 % Mn per 0.1 % C: the wrong alloy for C.
    assert [m.name for m in usual_materials(grade, mixed_book.materials, "C")] == ["Raiser"]
    assert sheet_order(grade) == ("Ni", "Mn", "C")


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    bath_t=st.floats(5.0, 150.0),
    free=st.floats(0.0, 0.08),
    carbon=st.floats(0.05, 0.45),
    manganese=st.floats(0.05, 1.0),
    nickel=st.floats(0.0, 0.8),
    copper=st.floats(0.0, 0.5),
    stock=st.lists(st.floats(0.0, 5000.0), min_size=5, max_size=5),
)
def test_never_beyond_stock_or_capacity(mixed_book: RecipeBook, bath_t: float, free: float, carbon: float,
                                        manganese: float, nickel: float, copper: float, stock: list[float]) -> None:
    bath_kg = bath_t * 1000.0
    heat = Heat("h", "Low-alloy", bath_kg, Analysis({"C": carbon, "Mn": manganese, "Ni": nickel, "Cu": copper}),
                capacity_kg=bath_kg * (1.0 + free), stock_kg=dict(zip(mixed_book.material_names, stock)))
    plan = hand_plan(heat, mixed_book)
    assert plan.final_kg <= heat.capacity_kg + 1e-6
    for addition in plan.additions:
        material = mixed_book.material(addition.material)
        assert 0 < addition.kg <= heat.stock_kg[addition.material] + 1e-9
        assert addition.kg >= material.min_kg
        if material.pack_kg:
            assert addition.kg == addition.packs * material.pack_kg
    assert plan.total_cost == pytest.approx(math.fsum(a.kg * mixed_book.material(a.material).price_per_kg
                                                      for a in plan.additions))


def test_demo_heats_respect_the_grade_and_the_store() -> None:
    book = load_recipes()
    for grade in book.grades.values():
        for symbol in sheet_order(grade):
            usable = [m for m in book.materials if m.name not in grade.forbidden]
            assert all(m.name not in grade.forbidden for m in usual_materials(grade, usable, symbol))
    heat = Heat("h", "SAE 1045", 60_000.0, Analysis({"C": 0.30, "Mn": 0.40, "P": 0.012, "S": 0.015, "Cr": 0.05,
                                                      "Ni": 0.05, "Mo": 0.01, "Cu": 0.40}), capacity_kg=61_000.0,
                switched_off=frozenset({"HC FeMn"}))
    plan = hand_plan(heat, book)
    assert "HC FeMn" not in {a.material for a in plan.additions}
    assert plan.final_kg <= 61_000.0 + 1e-6


SIMN = FEMN + """
[[material]]
name = "SiMn"
price_per_kg = 1.6
composition = { Mn = 66.0, Si = 17.0 }
recovery = { Mn = 0.90, Si = 0.80 }

[[material]]
name = "FeSi 75"
price_per_kg = 1.5
composition = { Si = 75.0 }
recovery = { Si = 0.80 }
"""
SIMN_GRADE = """
name = "Mn trim"
[window]
Mn = [0.70, 0.90]
Si = [0.15, 0.35]
[aim]
Mn = 0.80
Si = 0.25
"""


def test_silicomanganese_goes_first_when_manganese_and_silicon_are_both_short(book_of: BookOf) -> None:
    # Common practice: with both short, one silicomanganese addition does the work of two.
    book = book_of(SIMN, SIMN_GRADE)
    both_short = hand_plan(Heat("h", "Mn trim", 100_000.0, Analysis({"Mn": 0.50, "Si": 0.05})), book, EXACT)
    assert _amount(both_short, "SiMn") > 0 and both_short.in_spec
    only_mn = hand_plan(Heat("h", "Mn trim", 100_000.0, Analysis({"Mn": 0.50, "Si": 0.25})), book, EXACT)
    assert _amount(only_mn, "SiMn") == 0 and _amount(only_mn, "FeMn 78") > 0


def test_the_melter_keeps_the_margin_asked_inside_a_limit(book_of: BookOf) -> None:
    # An aim of 0.72 % sits 0.02 % inside the 0.70 % minimum; asked for a margin of 0.06 %, the
    # melter raises Mn to 0.76 % instead, by the same mass balance.
    book = book_of(FEMN, MN_GRADE.replace("Mn = 0.80", "Mn = 0.72"))
    plain = hand_plan(MN_HEAT, book, EXACT)
    kept = hand_plan(MN_HEAT, book, EXACT, margins_pct={"Mn min": 0.06})
    assert plain.predicted_pct["Mn"] == pytest.approx(0.72, abs=1e-6)
    assert kept.predicted_pct["Mn"] == pytest.approx(0.76, abs=1e-6)


MGFESI = """
[[material]]
name = "MgFeSi 6"
price_per_kg = 2.9
composition = { Mg = 6.0, Si = 45.0 }
recovery = { Mg = 0.45, Si = 0.80 }
"""
DUCTILE = """
name = "Ductile"
family = "cast iron"
[window]
Mg = [0.025, 0.055]
Si = [0, 3.5]
S = [0, 0.02]
[aim]
Mg = 0.040
"""


def test_the_treatment_pays_the_sulphur_and_the_fade_first(tmp_path: Path, write_recipes: Callable[..., Path]) -> None:
    book = load_recipes(write_recipes(tmp_path / "book", MGFESI, DUCTILE,
                                      "mg_fade_pct_per_min = 0.001\ntreatment_to_pour_min = 10.0\n"))
    heat = Heat("h", "Ductile", 20_000.0, Analysis({"Mg": 0.0, "Si": 1.8, "S": 0.010}))
    plan = hand_plan(heat, book, EXACT)
    kg = _amount(plan, "MgFeSi 6")
    # The foundry's treatment formula (common practice, from memory): alloy = W (0.76 S + Mg residual
    # + fade) / (Mg in the alloy x its recovery) = 20 000 x (0.0076 + 0.040 + 0.010) % / (6 % x 0.45)
    # = 426.7 kg by hand; it leaves out the growth of the bath, worth about 1 % here.
    assert kg == pytest.approx(20_000.0 * 0.000576 / (0.06 * 0.45), rel=0.02)
    # Exactly, by the single-addition balance with the debt taken off the start: 0.758 kg Mg per kg S
    # (24.305 / 32.06, IUPAC atomic weights), g = 0.06 x 0.45 + 0.45 x 0.80 + 0.49 = 0.877 (by hand).
    owed = 24.305 / 32.06 * 0.00010 + 0.00010
    assert kg == pytest.approx(20_000.0 * (0.00040 + owed) / (0.027 - 0.877 * 0.00040), rel=1e-3)
    assert plan.predicted_pct["Mg"] == pytest.approx(0.040, abs=1e-6) and plan.in_spec


FEMN_CLEAN = """
[[material]]
name = "FeMn"
price_per_kg = 1.4
composition = { Mn = 80.0 }
recovery = { Mn = 0.90 }
"""
CEV_GRADE = """
name = "Structural"
[window]
C = [0, 0.20]
Mn = [0, 1.60]
[aim]
C = 0.16
Mn = 1.40
[index.CEV]
terms = { C = 1.0, Mn = 0.16666666666666666, Cr = 0.2, Mo = 0.2, V = 0.2, Ni = 0.06666666666666667, Cu = 0.06666666666666667 }
max = 0.45
"""


def _cev(pct: dict[str, float]) -> float:
    # IIW carbon equivalent as published in EN 10025-2 (7.2.3, referring to EN 10025-1):
    # CEV = C + Mn/6 + (Cr + Mo + V)/5 + (Ni + Cu)/15.
    get = pct.get
    return (get("C", 0.0) + get("Mn", 0.0) / 6 + (get("Cr", 0.0) + get("Mo", 0.0) + get("V", 0.0)) / 5
            + (get("Ni", 0.0) + get("Cu", 0.0)) / 15)


def test_the_melter_keeps_the_carbon_equivalent_inside(book_of: BookOf) -> None:
    heat = Heat("h", "Structural", 100_000.0, Analysis({"C": 0.18, "Mn": 0.80, "Cr": 0.10, "Mo": 0.02, "V": 0.0,
                                                        "Ni": 0.10, "Cu": 0.30}))
    book = book_of(FEMN_CLEAN, CEV_GRADE)
    plan = hand_plan(heat, book, EXACT)
    # At the Mn aim the CEV would be 0.18 + 1.40/6 + 0.12/5 + 0.40/15 = 0.464 > 0.45 (by hand), so
    # Mn is aimed lower: about 6 x (0.45 - 0.18 - 0.024 - 0.0267) = 1.316 %, a little more as the
    # addition dilutes the rest.
    assert _cev(plan.predicted_pct) <= 0.45 + 1e-4
    assert 1.30 < plan.predicted_pct["Mn"] < 1.33
    assert plan.in_spec and any("carbon equivalent" in note for note in plan.notes)
    # Without the index the melter goes to the aim.
    free = book_of(FEMN_CLEAN, CEV_GRADE.split("[index.CEV]")[0])
    assert hand_plan(heat, free, EXACT).predicted_pct["Mn"] == pytest.approx(1.40, abs=1e-6)


CHILLERS = """
[[material]]
name = "Graphite"
kind = "carbon"
price_per_kg = 0.9
composition = { C = 99.0 }
recovery = { C = 0.85 }
chill_per_kg_t = 5.3

[[material]]
name = "FeNi 30"
price_per_kg = 6.0
composition = { Ni = 30.0 }
recovery = { Ni = 0.98 }
chill_per_kg_t = 1.4
"""


def _one_element_grade(name: str, symbol: str, low: float, high: float, aim: float) -> str:
    return f'name = "{name}"\n[window]\n{symbol} = [{low}, {high}]\n[aim]\n{symbol} = {aim}\n'


def test_a_trim_that_chills_too_much_is_cut_to_the_allowed_drop(book_of: BookOf) -> None:
    book = book_of(CHILLERS, _one_element_grade("Carbon", "C", 0.30, 0.40, 0.35))
    heat = Heat("h", "Carbon", 20_000.0, Analysis({"C": 0.10}), max_temp_drop_c=10.0)
    plan = hand_plan(heat, book, EXACT)
    # The chill factor is in degrees per kg of material per tonne of bath (common practice): a drop of
    # 10 °C on 20 t allows 10 x 20 / 5.3 = 37.7 kg of graphite (by hand), short of the ~60 kg to the aim.
    assert _amount(plan, "Graphite") == pytest.approx(200.0 / 5.3)
    assert plan.temperature_drop_c == pytest.approx(10.0)
    assert not plan.in_spec and any("split" in note for note in plan.notes)
    # With room to spare nothing is cut.
    roomy = hand_plan(heat.with_changes(max_temp_drop_c=30.0), book, EXACT)
    assert roomy.predicted_pct["C"] == pytest.approx(0.35, abs=1e-6) and not roomy.notes


def test_the_bath_stays_above_its_liquidus_and_the_superheat(book_of: BookOf) -> None:
    book = book_of(CHILLERS, _one_element_grade("Nickel steel", "Ni", 1.0, 2.0, 1.5))
    heat = Heat("h", "Nickel steel", 20_000.0, Analysis({"C": 0.10, "Ni": 0.50}), temperature_c=1590.0,
                max_temp_drop_c=60.0)
    plan = hand_plan(heat, book)
    # Steel liquidus, the widely quoted linear form T_L = 1536 - 78 C - 3.1 Ni - ... (coefficients from
    # memory; H. Presoly et al., Metall. Mater. Trans. B 52 (2021) 2821, compare such equations), plus
    # the shop's 30 °C superheat (common practice). To the aim (about 717 kg of FeNi 30, 50 °C of chill)
    # the bath would end near 1540 °C against 1523.8 + 30 (by hand), so the ferronickel is cut.
    liquidus = 1536.0 - 78.0 * plan.predicted_pct["C"] - 3.1 * plan.predicted_pct["Ni"]
    assert heat.temperature_c - plan.temperature_drop_c >= liquidus + 30.0 - 1e-6
    assert heat.temperature_c - plan.temperature_drop_c < liquidus + 30.0 + 0.2  # cut no more than a kilogram's worth
    assert 1.0 < plan.predicted_pct["Ni"] < 1.45 and plan.in_spec
