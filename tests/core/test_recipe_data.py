"""The built-in recipe book of the demo shop, checked against published standards.

Every literal below is copied from the source named beside it, not from our own files. Rows
marked "from memory" were not re-checked against the standard's text; "secondary" rows come from a
supplier or handbook summary and are plausibility checks, not conformance oracles.

Each check is a function returning the problems it finds, so the same check runs on the built-in
book (no problems) and on a copy with one deliberately wrong value (the problem is named): a check
that cannot fail shows up there.
"""

from __future__ import annotations

import math
import re
import shutil
from collections.abc import Callable
from pathlib import Path

import pytest

from meltfix.base.paths import default_recipes_dir, demo_dir
from meltfix.plan.planner import Planner
from meltfix.shop.analysis import Analysis, analysis_from_table
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.toml_values import read_toml

Problems = list[str]

# ---------------------------------------------------------------------------------------------
# Grade windows [wt %] as published; a max-only limit is (0, max).

PUBLISHED_WINDOWS: dict[str, dict[str, tuple[float, float]]] = {
    # SAE J403, 1020, bars and long products (flat products: P 0.030, S 0.035)
    "SAE 1020": {"C": (0.18, 0.23), "Mn": (0.30, 0.60), "P": (0, 0.040), "S": (0, 0.050)},
    # SAE J403, 1045, bars and long products
    "SAE 1045": {"C": (0.43, 0.50), "Mn": (0.60, 0.90), "P": (0, 0.040), "S": (0, 0.050)},
    # ASTM A29 / SAE J404, 4140
    "SAE 4140": {"C": (0.38, 0.43), "Mn": (0.75, 1.00), "Si": (0.15, 0.35), "P": (0, 0.035), "S": (0, 0.040),
                 "Cr": (0.80, 1.10), "Mo": (0.15, 0.25)},
    # SAE J404, 4340
    "SAE 4340": {"C": (0.38, 0.43), "Mn": (0.60, 0.80), "Si": (0.15, 0.35), "P": (0, 0.035), "S": (0, 0.040),
                 "Cr": (0.70, 0.90), "Ni": (1.65, 2.00), "Mo": (0.20, 0.30)},
    # ASTM A29, 8620
    "SAE 8620": {"C": (0.18, 0.23), "Mn": (0.70, 0.90), "Si": (0.15, 0.35), "P": (0, 0.035), "S": (0, 0.040),
                 "Cr": (0.40, 0.60), "Ni": (0.40, 0.70), "Mo": (0.15, 0.25)},
    # EN 10025-2:2004 Table 2, S355J2, nominal thickness <= 40 mm
    "S355J2": {"C": (0, 0.20), "Mn": (0, 1.60), "Si": (0, 0.55), "P": (0, 0.025), "S": (0, 0.025),
               "Cu": (0, 0.55)},
    # ASTM A295-98 Table 1, 52100
    "52100": {"C": (0.93, 1.05), "Mn": (0.25, 0.45), "Si": (0.15, 0.35), "P": (0, 0.025), "S": (0, 0.015),
              "Cr": (1.35, 1.60), "Ni": (0, 0.25), "Mo": (0, 0.10), "Cu": (0, 0.30), "Al": (0, 0.050)},
    # ASTM A240-04, type 304 (S30400)
    "304": {"C": (0, 0.08), "Mn": (0, 2.00), "Si": (0, 0.75), "P": (0, 0.045), "S": (0, 0.030),
            "Cr": (18.0, 20.0), "Ni": (8.0, 10.5), "N": (0, 0.10)},
    # ASTM A36-14, plates <= 20 mm (no Mn requirement at this thickness)
    "A36 plate to 20 mm": {"C": (0, 0.25), "Si": (0, 0.40), "P": (0, 0.04), "S": (0, 0.05)},
    # Secondary: typical foundry data for ductile iron 65-45-12 (ASTM A536 sets no chemistry)
    "Ductile 65-45-12": {"C": (3.4, 3.8), "Mn": (0, 0.4), "Si": (2.35, 2.75), "Cr": (0, 0.08), "Ni": (0, 0.5),
                         "Mg": (0.025, 0.055)},
}

# Window limits the standard does not set, each marked in the grade file as the shop's own:
# "shop limit (common practice)", S355J2's Al from the FF footnote (from memory), ductile iron's
# Cu, P and S "shop practice (from memory)". Values: the shop's, so only their presence is checked.
SHOP_LIMITS: dict[str, set[str]] = {
    "SAE 1020": {"Cu", "Ni", "Cr", "Mo"},
    "SAE 1045": {"Cu", "Ni", "Cr", "Mo"},
    "SAE 4140": {"Cu", "Ni"},
    "SAE 4340": {"Cu"},
    "SAE 8620": {"Cu"},
    "S355J2": {"Al"},
    "Ductile 65-45-12": {"Cu", "P", "S"},
}

# Ductile iron's shop-practice limits, remembered typical values for a ferritic grade (from memory):
# Cu 0.10-0.20 (the data sheet's 0.4 suits pearlitic grades), P at most 0.05, S after treatment at
# most 0.015-0.02. The file's maxima must lie in these ranges.
DUCTILE_SHOP_PRACTICE: dict[str, tuple[float, float]] = {"Cu": (0.10, 0.20), "P": (0.03, 0.05), "S": (0.010, 0.020)}

# ASTM A295-98 Table 1 lists these elements for 52100; A295 bars elements the table does not list
# and intentional calcium without the purchaser's approval (from memory, the clause was not re-read).
A295_TABLE_1 = {"C", "Mn", "Si", "P", "S", "Cr", "Ni", "Mo", "Cu", "Al", "O"}
# A content at or above this [wt % of the material] is an intentional carrier, not a trace.
INTENTIONAL_PCT = 0.5


def window_problems(book: RecipeBook) -> Problems:
    problems = []
    unchecked = set(book.grades) - set(PUBLISHED_WINDOWS)
    if unchecked:
        problems.append(f"grades without published values in this test: {sorted(unchecked)}")
    for name, published in PUBLISHED_WINDOWS.items():
        grade = book.grade(name)
        for symbol, (low, high) in published.items():
            if symbol not in grade.window_pct or not (math.isclose(grade.window_pct[symbol][0], low, abs_tol=1e-12)
                                                      and math.isclose(grade.window_pct[symbol][1], high,
                                                                       abs_tol=1e-12)):
                problems.append(f"{name} {symbol}: {grade.window_pct.get(symbol)} is not the published {(low, high)}")
        extra = set(grade.window_pct) - set(published)
        if extra != SHOP_LIMITS.get(name, set()):
            problems.append(f"{name}: limits beyond the standard {sorted(extra)} are not the marked shop limits")
        if not grade.standard:
            problems.append(f"{name}: no standard named")
    ductile = book.grade("Ductile 65-45-12").window_pct
    for symbol, (low, high) in DUCTILE_SHOP_PRACTICE.items():
        if not low <= ductile.get(symbol, (0, math.inf))[1] <= high:
            problems.append(f"Ductile 65-45-12 {symbol} max {ductile.get(symbol)} outside typical {low}-{high}")
    return problems


def forbid_problems(book: RecipeBook) -> Problems:
    carriers = {m.name for m in book.materials
                if any(s not in A295_TABLE_1 | {"Fe"} and pct >= INTENTIONAL_PCT for s, pct in m.composition_pct.items())}
    missing = carriers - book.grade("52100").forbidden
    return [f"52100 may receive {sorted(missing)}, which carry elements ASTM A295 Table 1 does not list"] if missing else []


def test_every_grade_window_matches_its_standard() -> None:
    assert window_problems(load_recipes()) == []


def test_52100_gets_no_element_its_standard_does_not_list() -> None:
    book = load_recipes()
    assert forbid_problems(book) == []
    # The inoculant (Ca), FeTi, FeNb and FeV are named by the issue that found them allowed.
    assert {"FeSi 75 inoculant", "FeTi 70", "FeNb 65", "FeV 80"} <= book.grade("52100").forbidden
    # The case that found it: silicon short with FeSi 75 and SiMn switched off once drew 150 kg of the
    # Ca-bearing inoculant; now silicon must come from something A295 allows.
    heat = Heat("X", "52100", 60_000.0, Analysis({"C": 0.97, "Mn": 0.33, "Si": 0.05, "P": 0.010, "S": 0.008,
                                                  "Cr": 1.45, "Ni": 0.10, "Mo": 0.02, "Cu": 0.10, "Al": 0.020}),
                capacity_kg=65_000.0, switched_off=frozenset({"FeSi 75", "SiMn"}))
    plan = Planner(book).plan(heat)
    assert not {a.material for a in plan.additions} & book.grade("52100").forbidden


@pytest.mark.parametrize("grade_name", ["SAE 1020", "SAE 1045"])
def test_plain_carbon_grades_have_no_invented_si_window(grade_name: str) -> None:
    # SAE J403 sets no Si range for 1020/1045 unless the order asks for one.
    assert "Si" not in load_recipes().grade(grade_name).window_pct


def test_s355j2_cev_is_the_iiw_formula() -> None:
    # IIW carbon equivalent C + Mn/6 + (Cr + Mo + V)/5 + (Ni + Cu)/15, the formula EN 10025-2 §7.2.3
    # takes from EN 10025-1.
    (cev,) = [index for index in load_recipes().grade("S355J2").indices if index.name == "CEV"]
    iiw = {"C": 1.0, "Mn": 1 / 6, "Cr": 1 / 5, "Mo": 1 / 5, "V": 1 / 5, "Ni": 1 / 15, "Cu": 1 / 15}
    assert dict(cev.terms) == pytest.approx(iiw, rel=1e-12)
    # Maximum for the thinnest band, <= 30 mm (exact band from memory).
    assert cev.max_value == 0.45 and cev.min_value is None
    # A hand calculation with the IIW formula (worked here):
    # 0.18 + 1.40/6 + (0.05 + 0.02 + 0.01)/5 + (0.05 + 0.10)/15 = 0.18 + 0.23333 + 0.016 + 0.01 = 0.43933.
    s355_like = {"C": 0.18, "Mn": 1.40, "Si": 0.30, "Cr": 0.05, "Mo": 0.02, "V": 0.01, "Ni": 0.05, "Cu": 0.10}
    assert cev.value(s355_like) == pytest.approx(0.43933, abs=5e-6)


def test_ductile_iron_ce_is_the_cast_iron_formula() -> None:
    # Cast-iron carbon equivalent C + (Si + P)/3, eutectic at 4.3 (common foundry formula; the check
    # value below is a published table's as reproduced by a secondary page, recomputed here:
    # 3.5 + (2.95 + 0.08)/3 = 3.5 + 1.01 = 4.51).
    grade = load_recipes().grade("Ductile 65-45-12")
    assert grade.family == "cast iron"
    (ce,) = [index for index in grade.indices if index.name == "CE"]
    assert dict(ce.terms) == pytest.approx({"C": 1.0, "Si": 1 / 3, "P": 1 / 3}, rel=1e-12)
    assert ce.value({"C": 3.5, "Si": 2.95, "P": 0.08}) == pytest.approx(4.51)


def test_every_grade_aims_at_its_main_elements() -> None:
    # A grade with a two-sided window on an element should tell the planner where in it to land.
    for grade in load_recipes().grades.values():
        two_sided = {symbol for symbol, (low, _) in grade.window_pct.items() if low > 0}
        missing = two_sided - set(grade.aim_pct)
        assert not missing, (grade.name, missing)


# ---------------------------------------------------------------------------------------------
# Materials: main element and impurity limits [wt %] as published (lo, hi).

PUBLISHED_MATERIALS: dict[str, dict[str, tuple[float, float]]] = {
    # ASTM A99, standard ferromanganese Grade A (from memory)
    "HC FeMn": {"Mn": (78.0, 82.0), "C": (0, 7.5), "Si": (0, 1.2), "P": (0, 0.35), "S": (0, 0.050)},
    # ASTM A99, medium-carbon ferromanganese Grade A (from memory)
    "MC FeMn": {"Mn": (80.0, 85.0), "C": (0, 1.5), "Si": (0, 1.5), "P": (0, 0.30), "S": (0, 0.020)},
    # ASTM A99, low-carbon ferromanganese Grade A (from memory)
    "LC FeMn": {"Mn": (85.0, 90.0), "C": (0, 0.75), "Si": (0, 2.0), "P": (0, 0.20), "S": (0, 0.020)},
    # ASTM A483, silicomanganese Grade B (from memory)
    "SiMn": {"Mn": (65.0, 68.0), "Si": (16.0, 18.5), "C": (0, 2.0), "P": (0, 0.20), "S": (0, 0.04)},
    # 75 % ferrosilicon, a typical analysis (from memory; ASTM A100's grade table was not seen, so this
    # is a plausibility range, not A100's limits)
    "FeSi 75": {"Si": (72.0, 80.0), "Al": (1.4, 2.5)},
    "FeSi 75 inoculant": {"Si": (72.0, 80.0)},
    # 50 % ferrosilicon, a typical analysis (from memory)
    "FeSi 50": {"Si": (47.0, 51.0), "Al": (0, 1.25)},
    # GOST 4757-91 (table as reproduced by a supplier), high-carbon ferrochromium, the grade with C <= 8.0:
    # Cr >= 65, Si <= 2; P and S at the loosest high-carbon values (0.05, 0.08)
    "HC FeCr": {"Cr": (65.0, 100.0), "C": (0, 8.0), "Si": (0, 2.0), "P": (0, 0.05), "S": (0, 0.08)},
    # GOST 4757-91, low-carbon ferrochromium, the grade the recipe names (C <= 0.10); the row of that
    # grade was not seen, so Cr takes the strictest low-carbon minimum (68) and Si, P the loosest maxima
    "LC FeCr": {"Cr": (68.0, 100.0), "C": (0, 0.10), "Si": (0, 2.0), "P": (0, 0.05), "S": (0, 0.02), "Al": (0, 0.2)},
    # ASTM A132 ferromolybdenum (secondary summary of the standard)
    "FeMo 65": {"Mo": (60.0, 100.0), "C": (0, 0.10), "Si": (0, 1.0), "P": (0, 0.050), "Cu": (0, 0.20)},
    # ASTM A102-04 Table 1, ferrovanadium, single grade
    "FeV 80": {"V": (75.0, 85.0), "C": (0, 0.75), "Si": (0, 1.5), "P": (0, 0.08), "S": (0, 0.08), "Al": (0, 2.0)},
    # ASTM A550-06 Table 1, ferroniobium, low-alloy-steel grade
    "FeNb 65": {"Nb": (60.0, 70.0), "C": (0, 0.5), "Si": (0, 4.0), "P": (0, 0.10), "Ta": (0, 5.0), "Mn": (0, 3.0),
                "Al": (0, 3.0), "Sn": (0, 0.25)},
    # ASTM A324-73(R2000) Table 1, ferrotitanium Grade A
    "FeTi 70": {"Ti": (65.0, 75.0), "C": (0, 0.15), "Si": (0, 0.25), "Al": (0, 0.50)},
    # ASTM A323-05 Table 1, ferroboron Grade B1
    "FeB 18": {"B": (17.5, 19.0), "C": (0, 1.5), "Si": (0, 2.0), "Al": (0, 0.5)},
    # ASTM B39 nickel (from memory): Ni + Co >= 99.8 is checked in material_problems
    "Nickel": {"C": (0, 0.03), "S": (0, 0.01), "Cu": (0, 0.02), "Fe": (0, 0.02)},
    # ASTM B115 / EN 1978 copper cathode (from memory)
    "Copper": {"Cu": (99.9, 100.0)},
    # Aluminium shot, bar and wire: Al 95-99.7 by product (from memory)
    "Aluminium shot": {"Al": (95.0, 99.7)},
    "Aluminium wire": {"Al": (95.0, 99.7)},
    # Secondary: recarburiser supplier data, fixed C 90-99, S < 0.5
    "Carbon raiser (graphitised)": {"C": (90.0, 99.0), "S": (0, 0.5)},
}
# Materials with no standard at all: the shop's own purchase specifications (invented for the demo)
# and the nodulariser, whose `standard` field says so.
NO_STANDARD = {"MgFeSi 6", "Clean plate scrap", "Clean bales", "Pig iron"}


def material_problems(book: RecipeBook) -> Problems:
    problems = []
    unchecked = set(book.material_names) - set(PUBLISHED_MATERIALS) - NO_STANDARD
    if unchecked:
        problems.append(f"materials without published values in this test: {sorted(unchecked)}")
    for name, published in PUBLISHED_MATERIALS.items():
        material = book.material(name)
        for symbol, (low, high) in published.items():
            pct = material.composition_pct.get(symbol, 0.0)
            if not low <= pct <= high:
                problems.append(f"{name} {symbol} {pct} outside {low}-{high}")
        if not material.standard:
            problems.append(f"{name}: no standard named")
    # ASTM B39: Ni + Co >= 99.8 (from memory)
    nickel = book.material("Nickel").composition_pct
    if nickel["Ni"] + nickel.get("Co", 0.0) < 99.8:
        problems.append("Nickel: Ni + Co below 99.8")
    # ISO 8954-1:1990: a ferroalloy contains at least 4.0 % Fe.
    problems += [f"{m.name}: a ferroalloy with under 4 % Fe" for m in book.materials
                 if m.kind == "alloy" and m.composition_pct["Fe"] < 4.0]
    # Dilution only helps if the diluent is far below the residual maxima it fixes, e.g. 52100's
    # Cu 0.30 (ASTM A295-98 Table 1): residuals at most a sixth of that.
    problems += [f"{m.name}: {s} {m.composition_pct[s]} too high for a diluent" for m in book.materials
                 if m.kind == "dilution" for s in ("Cu", "Ni", "Mo", "Sn") if m.composition_pct.get(s, 0.0) > 0.05]
    return problems


def test_every_material_lies_within_its_standard() -> None:
    assert material_problems(load_recipes()) == []


# ---------------------------------------------------------------------------------------------
# Recoveries. Published recovery tables were not seen: these are ranges recalled from practice
# (from memory) for a killed ladle, except where a row says otherwise.

RECOVERY_RANGES: list[tuple[str, str, float, float]] = [
    ("HC FeMn", "Mn", 0.85, 0.95), ("MC FeMn", "Mn", 0.85, 0.95), ("LC FeMn", "Mn", 0.85, 0.95),
    ("SiMn", "Mn", 0.85, 0.95), ("SiMn", "Si", 0.75, 0.90), ("FeSi 75", "Si", 0.75, 0.90),
    ("FeSi 50", "Si", 0.75, 0.90), ("FeSi 75 inoculant", "Si", 0.75, 0.95), ("HC FeCr", "Cr", 0.90, 0.98),
    ("LC FeCr", "Cr", 0.90, 0.98), ("FeMo 65", "Mo", 0.95, 1.00), ("FeV 80", "V", 0.90, 1.00),
    ("FeNb 65", "Nb", 0.85, 1.00), ("FeTi 70", "Ti", 0.30, 0.80), ("FeB 18", "B", 0.30, 0.70),
    ("Nickel", "Ni", 0.98, 1.00), ("Copper", "Cu", 0.98, 1.00), ("Aluminium shot", "Al", 0.20, 0.60),
    ("Aluminium wire", "Al", 0.60, 0.90),
    # Magnesium in a covered-ladle or sandwich treatment, 0.35-0.55 (from memory); its silicon as a
    # ferrosilicon's.
    ("MgFeSi 6", "Mg", 0.35, 0.55), ("MgFeSi 6", "Si", 0.75, 0.90),
    # Pig iron's carbon is already dissolved in the iron: nearly all of it stays (from memory).
    ("Pig iron", "C", 0.90, 1.00),
    # The raiser's general figure is the open ladle's (below), thrown in on top: 0.60-0.85 (from memory).
    ("Carbon raiser (graphitised)", "C", 0.60, 0.85),
]
# Recoveries that differ by stage (stage, element), common practice (from memory): an oxidising arc
# furnace burns carbon and aluminium, the open tapping ladle loses some to air and slag, the ladle
# furnace's killed steel under a reducing slag keeps most. A raiser recovers 0.4-0.6 in the
# furnace, 0.60-0.85 in the ladle, 0.85-0.95 stirred in at the ladle furnace; aluminium shot nearly
# nothing in the furnace (at most 0.2) and 0.5-0.8 at the ladle furnace.
STAGE_RECOVERY_RANGES: list[tuple[str, str, str, float, float]] = [
    ("Carbon raiser (graphitised)", "furnace", "C", 0.40, 0.60),
    ("Carbon raiser (graphitised)", "ladle", "C", 0.60, 0.85),
    ("Carbon raiser (graphitised)", "lf", "C", 0.85, 0.95),
    ("Aluminium shot", "furnace", "Al", 0.00, 0.20),
    ("Aluminium shot", "lf", "Al", 0.50, 0.80),
]
# Both recover far less where the bath is oxidising: furnace < tapping ladle < ladle furnace.
OXIDISING_FIRST: list[tuple[str, str]] = [("Carbon raiser (graphitised)", "C"), ("Aluminium shot", "Al")]


def recovery_problems(book: RecipeBook) -> Problems:
    problems = [f"{name} {symbol} recovery {book.material(name).recovery[symbol]} outside {low}-{high}"
                for name, symbol, low, high in RECOVERY_RANGES
                if not low <= book.material(name).recovery[symbol] <= high]
    for name, stage, symbol, low, high in STAGE_RECOVERY_RANGES:
        value = book.material(name).at_stage(stage).recovery[symbol]
        if not low <= value <= high:
            problems.append(f"{name} {symbol} recovery at the {stage} {value} outside {low}-{high}")
    for name, symbol in OXIDISING_FIRST:
        furnace, ladle, lf = (book.material(name).at_stage(s).recovery[symbol] for s in ("furnace", "ladle", "lf"))
        if not furnace < ladle < lf:
            problems.append(f"{name} {symbol} recovery not furnace < ladle < lf: {furnace}, {ladle}, {lf}")
    return problems


def test_recoveries_typical_of_practice() -> None:
    book = load_recipes()
    assert recovery_problems(book) == []
    # Every material's main element has a row above (dilution materials bring iron, not an element).
    rows = {(name, symbol) for name, symbol, *_ in RECOVERY_RANGES}
    main = {(m.name, max((s for s in m.composition_pct if s != "Fe"), key=m.composition_pct.__getitem__))
            for m in book.materials if m.kind != "dilution"}
    assert main <= rows


def test_carbon_and_aluminium_recover_far_less_where_the_bath_is_oxidising() -> None:
    book = load_recipes()
    for name, symbol in OXIDISING_FIRST:
        furnace, ladle, lf = (book.material(name).at_stage(s).recovery[symbol] for s in ("furnace", "ladle", "lf"))
        assert furnace < ladle < lf  # common practice (from memory), see STAGE_RECOVERY_RANGES
        assert lf / furnace >= 1.5  # "far less", not a rounding difference
    text = (default_recipes_dir() / "materials.toml").read_text(encoding="utf-8")
    for name, _ in OXIDISING_FIRST:  # the book says why, beside the figures
        entry = text.split(f'name = "{name}"')[1].split("[[material]]")[0]
        assert "common practice" in entry and "oxidising" in entry


# ---------------------------------------------------------------------------------------------
# Chill factors [°C drop per kg/t]; negative heats the bath.

# Iron's enthalpy from 298 K solid to liquid at 1873 K, NIST-JANAF (Chase 1998) Shomate equation for
# liquid iron, H(T) - H_solid(298.15 K) = A t + F with t = T/1000 (B..E are negligible for the liquid):
# A = 46.02400 J/(mol K), F = -10.80543 kJ/mol (NIST Chemistry WebBook, iron, condensed phase).
FE_SHOMATE_A, FE_SHOMATE_F = 46.02400, -10.80543
FE_MOLAR_MASS = 55.845  # g/mol, IUPAC/CIAAW 2021
BATH_CP_KJ_PER_KG_K = FE_SHOMATE_A / FE_MOLAR_MASS  # the bath taken as liquid iron: 0.8241 kJ/(kg K)


def iron_enthalpy_kj_per_kg(temperature_c: float = 1600.0) -> float:
    t = (temperature_c + 273.15) / 1000.0
    return (FE_SHOMATE_A * t + FE_SHOMATE_F) * 1000.0 / FE_MOLAR_MASS


def chill_of(enthalpy_kj_per_kg: float) -> float:
    """°C per kg of material per tonne of bath from the heat [kJ/kg] the material takes from the bath."""
    return enthalpy_kj_per_kg / (1000.0 * BATH_CP_KJ_PER_KG_K)


# Ferrosilicon, an enthalpy balance worked here; the inputs are recalled (from memory), so the
# result is an estimate with a wide tolerance:
#   silicon from 25 °C to liquid at 1600 °C about +90 kJ/mol (heating ~35, fusion 50.2, liquid ~5);
#   solution of liquid Si in liquid iron about -131.5 kJ/mol (Sigworth & Elliott, Metal Science 8
#   (1974) 298-310, from memory); the iron silicide FeSi2 was formed at about -27 kJ per mol of atoms,
#   heat already spent at the alloy works that the bath must supply back.
SI_HEAT_TO_1600_KJ_PER_MOL, SI_SOLUTION_KJ_PER_MOL, FESI2_FORMATION_KJ_PER_MOL_ATOMS = 90.0, -131.5, -27.0
SI_MOLAR_MASS = 28.085  # g/mol, IUPAC/CIAAW 2021


def ferrosilicon_chill(si_pct: float) -> float:
    si_mol, fe_mol = si_pct * 10 / SI_MOLAR_MASS, (100 - si_pct) * 10 / FE_MOLAR_MASS  # per kg of alloy
    silicide_atoms = 3 * min(fe_mol, si_mol / 2)  # FeSi2 as far as the iron or the silicon goes
    enthalpy = ((100 - si_pct) / 100 * iron_enthalpy_kj_per_kg()
                + si_mol * (SI_HEAT_TO_1600_KJ_PER_MOL + SI_SOLUTION_KJ_PER_MOL)
                - silicide_atoms * FESI2_FORMATION_KJ_PER_MOL_ATOMS)
    return chill_of(enthalpy)


def test_the_worked_chill_values() -> None:
    # NIST-JANAF: 75.40 kJ/mol = 1350 kJ/kg, so steel scrap at 25 °C into a 1600 °C bath of liquid
    # iron chills 1350 / 824.1 = 1.638 °C per kg/t; 10 kg/t takes 1600 °C to about 1583.6 °C.
    assert iron_enthalpy_kj_per_kg() == pytest.approx(1350.2, abs=0.5)
    assert chill_of(iron_enthalpy_kj_per_kg()) == pytest.approx(1.638, abs=0.002)
    # Ferrosilicon by the balance above, per kg of alloy:
    # 49 % Si: 17.447 mol Si, 9.132 mol Fe, FeSi2 of 3 x 8.723 = 26.17 mol of atoms;
    #   0.51 x 1350.2 + 17.447 x (90 - 131.5) + 26.17 x 27 = 688.6 - 724.1 + 706.6 = 671.1 kJ -> +0.814 °C per kg/t.
    # 75 % Si: 26.705 mol Si, 4.477 mol Fe, FeSi2 of 3 x 4.477 = 13.43 mol of atoms;
    #   0.25 x 1350.2 + 26.705 x (90 - 131.5) + 13.43 x 27 = 337.6 - 1108.3 + 362.6 = -408.1 kJ -> -0.495 (heats).
    assert ferrosilicon_chill(49.0) == pytest.approx(0.814, abs=0.001)
    assert ferrosilicon_chill(75.0) == pytest.approx(-0.495, abs=0.001)


SCRAP_CHILL = chill_of(iron_enthalpy_kj_per_kg())
# (material, low, high) and the basis of each range.
CHILL_RANGES: list[tuple[str, float, float]] = [
    # NIST-JANAF iron enthalpy (worked above), with 0.1 either side for the residuals and the
    # bath's heat capacity being steel's, not pure iron's.
    ("Clean plate scrap", SCRAP_CHILL - 0.1, SCRAP_CHILL + 0.1), ("Clean bales", SCRAP_CHILL - 0.1, SCRAP_CHILL + 0.1),
    # Pig iron: mostly iron; its lower melting point and the carbon already dissolved shift the
    # iron figure by a few per cent either way (from memory), hence 0.2 either side.
    ("Pig iron", SCRAP_CHILL - 0.2, SCRAP_CHILL + 0.2),
    # The ferrosilicon balance worked above, 0.3 either side for its recalled inputs; the rule of thumb
    # (from memory) agrees: FeSi 75 heats by 0 to 0.5, 45 % ferrosilicon cools by about 1.
    ("FeSi 50", ferrosilicon_chill(49.0) - 0.3, ferrosilicon_chill(49.0) + 0.3),
    ("FeSi 75", -0.5, 0.0), ("FeSi 75 inoculant", -0.5, 0.0),
    # The nodulariser is a 45 % ferrosilicon: the same rule of thumb, about 1 (from memory), with
    # 0.5 either side for its magnesium, which boils off (endothermic) and burns (exothermic).
    ("MgFeSi 6", 0.5, 1.5),
    # Rules of thumb recalled at about 1600 °C (from memory): cooling per kg/t.
    ("HC FeMn", 1.5, 2.0), ("MC FeMn", 1.5, 2.0), ("LC FeMn", 1.5, 2.0), ("SiMn", 1.3, 1.6), ("HC FeCr", 1.8, 2.2),
    ("LC FeCr", 1.8, 2.2), ("Nickel", 1.5, 1.7), ("FeMo 65", 1.3, 1.8), ("FeV 80", 1.3, 1.8), ("FeNb 65", 1.3, 1.8),
    # No row for these in the remembered table: the nearest rows are used, as materials.toml says
    # (FeTi and FeB: the FeMo/FeV/FeNb row; copper: the nickel row).
    ("FeTi 70", 1.3, 1.8), ("FeB 18", 1.3, 1.8), ("Copper", 1.5, 1.7),
    # Dissolving aluminium is about heat-neutral (from memory); the deoxidation heat is not credited.
    ("Aluminium shot", 0.0, 0.0), ("Aluminium wire", 0.0, 0.0),
    # Graphite: 5 to 6 °C per kg C/t (from memory), times the raiser's 98.5 % C.
    ("Carbon raiser (graphitised)", 5.0 * 0.985, 6.0 * 0.985),
]


def chill_problems(book: RecipeBook) -> Problems:
    problems = [f"{name} chill {book.material(name).chill_per_kg_t} outside {low:.2f}-{high:.2f}"
                for name, low, high in CHILL_RANGES if not low <= book.material(name).chill_per_kg_t <= high]
    unchecked = set(book.material_names) - {name for name, *_ in CHILL_RANGES}
    return problems + ([f"materials without a chill check: {sorted(unchecked)}"] if unchecked else [])


def test_every_chill_factor_has_a_basis() -> None:
    assert chill_problems(load_recipes()) == []


def test_a_large_addition_warns_before_the_temperature_limit_binds() -> None:
    # The shop warns above 10 kg/t; 10 kg/t of steel scrap chills 16.4 °C (NIST-JANAF iron enthalpy,
    # worked above), inside the 25 °C the shop lets a heat lose, so the warning comes first.
    settings = load_recipes().settings
    assert settings.max_temp_drop_c is not None
    assert settings.large_addition_kg_per_t * SCRAP_CHILL < settings.max_temp_drop_c


# ---------------------------------------------------------------------------------------------
# One deliberately wrong value per check: a copy of the built-in book with the value changed.

def mutated_book(tmp_path: Path, file: str, old: str, new: str) -> RecipeBook:
    folder = tmp_path / "recipes"
    shutil.copytree(default_recipes_dir(), folder)
    path = folder / file
    content = path.read_text(encoding="utf-8")
    assert content.count(old) == 1, f"{old!r} is not once in {file}"
    path.write_text(content.replace(old, new), encoding="utf-8")
    return load_recipes(folder)


MUTATIONS: list[tuple[str, str, str, str, Callable[[RecipeBook], Problems], str]] = [
    ("52100 Cr window", "grades/52100.toml", "Cr = [1.35, 1.60]", "Cr = [1.30, 1.60]", window_problems,
     "52100 Cr"),
    ("ductile Cu back at 0.4", "grades/ductile-65-45-12.toml", "Cu = [0, 0.15]", "Cu = [0, 0.4]", window_problems,
     "Ductile 65-45-12 Cu max"),
    ("52100 lets the inoculant in", "grades/52100.toml", '"FeSi 75 inoculant", ', "", forbid_problems,
     "FeSi 75 inoculant"),
    ("LC FeCr carbon above its grade", "materials.toml", "Cr = 70.0, C = 0.08,", "Cr = 70.0, C = 0.20,",
     material_problems, "LC FeCr C 0.2"),
    ("raiser in a ladle as in a furnace", "materials.toml", "ladle = { C = 0.70 }", "ladle = { C = 0.90 }",
     recovery_problems, "Carbon raiser (graphitised) C recovery at the ladle"),
    ("aluminium kept better in the furnace", "materials.toml", "furnace = { Al = 0.10 }", "furnace = { Al = 0.45 }",
     recovery_problems, "Aluminium shot Al recovery not furnace < ladle < lf"),
    ("FeSi 50 chill back at 2", "materials.toml", "chill_per_kg_t = 0.8\n", "chill_per_kg_t = 2.0\n", chill_problems,
     "FeSi 50 chill 2.0"),
]


@pytest.mark.parametrize(("file", "old", "new", "check", "named"), [m[1:] for m in MUTATIONS],
                         ids=[m[0] for m in MUTATIONS])
def test_a_wrong_recipe_value_is_caught(tmp_path: Path, file: str, old: str, new: str,
                                       check: Callable[[RecipeBook], Problems], named: str) -> None:
    problems = check(mutated_book(tmp_path, file, old, new))
    assert any(named in problem for problem in problems), problems


# ---------------------------------------------------------------------------------------------
# Sources a reader of the repository can open: no citation of a section of a document kept outside it.

OUTSIDE_DOCUMENT = re.compile("(REFERENCE|DESIGN)(\\.md)? ?\u00a7")


def test_no_citation_points_outside_the_repository() -> None:
    root = Path(__file__).resolve().parents[2]  # the repository, wherever meltfix is installed
    files = [p for folder in ("recipes", "meltfix", "tests") for p in (root / folder).rglob("*")
             if p.suffix in {".py", ".toml", ".md"}] + [root / "README.md", root / "DEVELOPERS.md"]
    cited = [f"{p.relative_to(root)}:{n}" for p in files if p.is_file()
             for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1) if OUTSIDE_DOCUMENT.search(line)]
    assert len(files) > 50 and cited == []


# ---------------------------------------------------------------------------------------------
# Demo heats: each names a grade of the book and reads as a bath analysis.

DEMO_HEATS = sorted((demo_dir() / "heats").glob("*.toml"))


@pytest.mark.parametrize("path", DEMO_HEATS, ids=lambda p: p.name)
def test_demo_heat_is_consistent(path: Path) -> None:
    book = load_recipes()
    data = read_toml(path)
    assert data["heat"] == path.stem
    assert data["grade"] in book.grades
    assert 20_000 <= data["bath_kg"] < data["capacity_kg"] <= data["bath_kg"] + 10_000
    analysis = analysis_from_table(data["analysis"], path, "analysis")
    grade = book.grade(data["grade"])
    # A first sample needs trimming: at least one element is outside its window.
    outside = [s for s, (low, high) in grade.window_pct.items() if not low <= analysis.get(s) <= high]
    assert outside, path.name
