"""Magnesium treatment of ductile iron: sulphur binds magnesium as MgS, magnesium fades while the
treated iron waits, and the planner's nodulariser covers both before the grade's residual counts.

Contents in wt %, masses in kg, recoveries as fractions, fade in wt % per minute.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from types import MappingProxyType

import periodictable
import pytest

from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.plan.treatment import (MG_PER_S, contents_owed_pct, magnesium_fade_pct, magnesium_for_sulphur_pct,
                                    magnesium_owed_pct, nodulariser_kg)
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat, load_heat
from meltfix.shop.materials import parse_material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import ShopSettings

DEMO = Path(__file__).resolve().parents[2] / "demo" / "heats"
NO_AIM = PlanOptions(use_aim=False)
W = 10_000.0  # a 10 t iron ladle
FADE = ShopSettings(mg_fade_pct_per_min=0.001, treatment_to_pour_min=8.0)


def shop(settings: ShopSettings = FADE, family: str = "cast iron") -> RecipeBook:
    nodulariser = parse_material({"name": "Mg 6", "kind": "alloy", "price_per_kg": 3.0,
                                  "composition": {"Mg": 6.0}, "recovery": {"Mg": 0.45}},
                                 "materials.toml", "material #1.")
    grade = parse_grade({"name": "Ductile", "family": family, "window": {"Mg": [0.035, 0.060]}},
                        "grades/ductile.toml")
    return RecipeBook((nodulariser,), MappingProxyType({"Ductile": grade}), settings)


def heat(s_pct: float = 0.020) -> Heat:
    return Heat("T1", "Ductile", W, Analysis({"S": s_pct, "Mg": 0.0}))


def test_magnesium_per_sulphur_is_the_ratio_of_atomic_weights_in_periodictable() -> None:
    # Mg + S -> MgS: one atom each, so kg Mg per kg S = M(Mg) / M(S), with the standard atomic
    # weights the periodictable package carries (IUPAC/CIAAW); older tables differ in the 5th digit.
    assert MG_PER_S == pytest.approx(periodictable.Mg.mass / periodictable.S.mass, rel=1e-4)
    assert MG_PER_S == pytest.approx(0.758, abs=5e-4)
    sulphide = periodictable.formula("MgS")
    assert MG_PER_S == pytest.approx(periodictable.Mg.mass / (sulphide.mass - periodictable.Mg.mass), rel=1e-4)
    # 0.010 % S in 22 t of iron is 2.2 kg S, which ties up 2.2 x 0.758 = 1.668 kg Mg.
    assert 22_000 * magnesium_for_sulphur_pct(0.010) / 100 == pytest.approx(1.668, abs=1e-3)


def test_fade_is_the_rate_times_the_minutes_to_pour() -> None:
    assert magnesium_fade_pct(FADE) == pytest.approx(0.008)
    assert magnesium_fade_pct(ShopSettings()) == 0.0  # no minutes given: no fade counted


def test_the_debt_applies_to_a_cast_iron_grade_with_an_mg_window_only() -> None:
    grade = shop().grade("Ductile")
    assert magnesium_owed_pct(heat(), grade, FADE) == {"Mg": pytest.approx(0.7581 * 0.020 + 0.008, abs=5e-6)}
    assert magnesium_owed_pct(heat(), shop(family="steel").grade("Ductile"), FADE) == {}
    assert contents_owed_pct(heat(), grade, FADE) == magnesium_owed_pct(heat(), grade, FADE)


def test_nodulariser_divides_by_its_magnesium_content_and_recovery() -> None:
    # 1 kg of Mg from a 6 % Mg alloy recovered at 45 %: 1 / (0.06 x 0.45) = 37.04 kg.
    assert nodulariser_kg(1.0, shop().material("Mg 6")) == pytest.approx(37.037, abs=1e-3)


def test_worked_example_the_nodulariser_pays_sulphur_and_fade_first() -> None:
    # Worked by hand: 10 t of base iron at 0.020 % S and no Mg, residual Mg of at least 0.035 %,
    # poured 8 min after treatment at 0.001 % Mg per min fade.
    #   debt  = 0.758 x 0.020 + 8 x 0.001 = 0.01516 + 0.008 = 0.02316 % (2.316 kg Mg)
    #   a 6 % Mg alloy at 45 % recovery: Y = 0.06 x 0.45 = 0.027 kg Mg per kg, and the bath grows by
    #   g = 0.027 + 0.94 (the iron balance) = 0.967 kg per kg added, so with the Mg row
    #   W (0 - debt) + Y x >= 0.035 % (W + g x):
    #   x = W (0.00035 + 0.0002316) / (0.027 - 0.967 x 0.00035) = 10000 x 0.0005816 / 0.026662 = 218.1 kg
    #   (without the debt: 10000 x 0.00035 / 0.026662 = 131.3 kg).
    book = shop()
    plan = Planner(book).plan(heat(), NO_AIM)
    assert plan.status == "optimal"
    assert plan.additions[0].kg == pytest.approx(218.15, abs=0.05)
    assert plan.predicted_pct["Mg"] == pytest.approx(0.035, abs=1e-9)  # what is left at pouring
    bare = Planner(shop(ShopSettings(treatment_to_pour_min=0.0))).plan(heat(0.0), NO_AIM)
    assert bare.additions[0].kg == pytest.approx(131.27, abs=0.05)
    note = next(n for n in plan.notes if "MgS" in n)
    assert "1.5 kg of Mg goes to MgS" in note and "0.8 kg to fade" in note and "about 85.8 kg of Mg 6" in note


def test_a_sample_of_treated_iron_does_not_charge_its_bound_sulphur_again() -> None:
    # Mg + S -> MgS binds k = M(Mg) / M(S) kg Mg per kg S (atomic weights from periodictable:
    # 24.305 / 32.06 = 0.7581). Magnesium already in the iron has met the sulphur first, so only the
    # sulphur it has not bound takes new magnesium: owed = k x max(0, S - Mg / k) = max(0, k S - Mg).
    k = periodictable.Mg.mass / periodictable.S.mass
    book = shop()
    grade = book.grade("Ductile")
    # A sample after the treatment: 0.012 % S and 0.020 % Mg. Mg / k = 0.0264 % S >= 0.012 %: every
    # bit of the sulphur is bound already; only the fade (8 x 0.001 %) is owed.
    treated = Heat("T2", "Ductile", W, Analysis({"S": 0.012, "Mg": 0.020}))
    assert magnesium_owed_pct(treated, grade, FADE) == {"Mg": pytest.approx(0.008, abs=1e-12)}
    # Worked by hand as above: W (0.020 - 0.008) + 0.027 x >= 0.035 % (W + 0.967 x)
    #   x = 10000 x (0.00035 - 0.00012) / (0.027 - 0.967 x 0.00035) = 10000 x 0.00023 / 0.02666155 = 86.27 kg;
    # charging the 0.012 % S again (k x 0.012 = 0.009097 %) would ask 10000 x 0.00032097 / 0.02666155
    # = 120.39 kg, a third more magnesium than the iron needs.
    plan = Planner(book).plan(treated, NO_AIM)
    assert plan.additions[0].kg == pytest.approx(86.27, abs=0.05)
    assert plan.predicted_pct["Mg"] == pytest.approx(0.035, abs=1e-9)
    assert "0.0 kg of Mg goes to MgS" in next(n for n in plan.notes if "MgS" in n)
    # Partly bound (base iron with a little Mg from returns): 0.005 % Mg holds 0.005 / k = 0.006595 % S,
    # the other 0.005405 % S takes k x 0.005405 = 0.004097 % Mg, which is k x 0.012 - 0.005.
    partly = Heat("T3", "Ductile", W, Analysis({"S": 0.012, "Mg": 0.005}))
    owed = magnesium_owed_pct(partly, grade, FADE)["Mg"] - 0.008
    assert owed == pytest.approx(k * (0.012 - 0.005 / k), rel=1e-4)
    assert owed == pytest.approx(0.004097, abs=2e-6)
    # A magnesium reading below the detection limit binds nothing: the whole sulphur is owed (safe side).
    below = Heat("T4", "Ductile", W, Analysis({"S": 0.012, "Mg": 0.002}, below_limit=frozenset({"Mg"})))
    assert magnesium_owed_pct(below, grade, FADE)["Mg"] == pytest.approx(k * 0.012 + 0.008, rel=1e-4)


def test_the_demo_ductile_heat_covers_sulphur_and_fade() -> None:
    book = load_recipes()
    demo = load_heat(DEMO / "KB-24104.toml", book)
    grade = book.grade(demo.grade)
    owed = contents_owed_pct(demo, grade, book.settings)
    # Demo shop: 0.010 % S, 10 min to pour at 0.001 %/min (shop.toml): 0.00758 + 0.010 = 0.01758 %.
    assert owed["Mg"] == pytest.approx(0.01758, abs=1e-5)
    plan = Planner(book).plan(demo, NO_AIM)
    used = [(book.material(a.material).at_stage(demo.stage), a.kg) for a in plan.additions]
    final_kg, with_debt = bath_after(demo.bath_kg, demo.analysis.pct, used, owed)
    plain = bath_after(demo.bath_kg, demo.analysis.pct, used)[1]
    low, _ = grade.window_pct["Mg"]
    # The magnesium the plan brings covers the debt and still leaves the grade's minimum.
    assert with_debt["Mg"] >= low - 1e-9
    assert plain["Mg"] - with_debt["Mg"] == pytest.approx(owed["Mg"] * demo.bath_kg / final_kg, rel=1e-9)
    assert plan.predicted_pct["Mg"] == pytest.approx(with_debt["Mg"], abs=1e-9)
    assert any("kg of Mg goes to MgS" in n for n in plan.notes)
    # Without the debt the same heat needs less nodulariser.
    light = Planner(replace(book, settings=replace(book.settings, treatment_to_pour_min=0.0)))
    mg_kg = sum(a.kg for a in plan.additions if a.material.startswith("MgFeSi"))
    assert mg_kg >= sum(a.kg for a in light.plan(demo, NO_AIM).additions if a.material.startswith("MgFeSi"))
