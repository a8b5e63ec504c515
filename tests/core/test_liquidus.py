"""The temperature budget: liquidus formulas against points of the iron-carbon diagram, and plans
that keep the bath at liquidus + superheat, buying arc heating where the stage can reheat.

Formulas (meltfix.shop.liquidus): steel T_L = 1536 - (78 C + 7.6 Si + 4.9 Mn + 34.4 P + 38 S + 4.7 Cu +
3.1 Ni + 1.3 Cr + 3.6 Al + 2 Mo + 2 V + 18 Ti), a widely quoted linear form (coefficients from
memory; assessed against measurements by Presoly et al., Metall. Mater. Trans. B 52 (2021)
2821-2830); cast iron T_L = 1569 - 97.3 (C + Si/4 + P/2) (from memory).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.plan.planner import plan_heat
from meltfix.shop.heat import load_heat, stage_material, validate_heat
from meltfix.shop.liquidus import CAST_IRON, STEEL
from meltfix.shop.recipes import load_recipes

DEMO = Path(__file__).resolve().parents[2] / "demo" / "heats"


def test_steel_formula_meets_the_iron_carbon_diagram() -> None:
    # Pure iron melts at 1538 °C (CRC Handbook of Chemistry and Physics, from memory); the linear
    # form's intercept is 1536.
    assert STEEL.liquidus_c({}) == pytest.approx(1538.0, abs=2.0)
    # Peritectic of the Fe-C diagram: liquid of 0.53 wt % C at 1495 °C (ASM Handbook vol. 3, Alloy
    # Phase Diagrams, Fe-C; from memory).
    assert STEEL.liquidus_c({"C": 0.53}) == pytest.approx(1495.0, abs=2.0)
    # The formula itself, by hand: 0.45 C, 0.25 Si, 0.75 Mn, 0.02 P, 0.02 S.
    assert STEEL.liquidus_c({"C": 0.45, "Si": 0.25, "Mn": 0.75, "P": 0.02, "S": 0.02}) == pytest.approx(
        1536 - (78 * 0.45 + 7.6 * 0.25 + 4.9 * 0.75 + 34.4 * 0.02 + 38 * 0.02), abs=1e-9)


def test_cast_iron_formula_meets_the_eutectic() -> None:
    # Stable Fe-C(graphite) eutectic at 1153 °C and 4.26 wt % C (ASM Handbook vol. 3; from memory);
    # with the carbon equivalent at the eutectic 4.3 the formula should be within a few degrees.
    assert CAST_IRON.liquidus_c({"C": 4.3}) == pytest.approx(1153.0, abs=3.0)
    assert CAST_IRON.liquidus_c({"C": 3.6, "Si": 2.4, "P": 0.04}) == pytest.approx(
        1569 - 97.3 * (3.6 + 2.4 / 4 + 0.04 / 2), abs=1e-9)


def test_a_temperature_below_the_liquidus_of_the_analysis_is_bad_input() -> None:
    book = load_recipes()
    heat = load_heat(DEMO / "KB-24101.toml", book).with_changes(temperature_c=1450.0)
    with pytest.raises(InputError) as caught:
        validate_heat(heat, book, "KB-24101.toml")
    assert caught.value.field == "temperature_c"
    assert caught.value.message.startswith("1450 °C is below the liquidus of the measured analysis (149")


@pytest.mark.parametrize("name", ["KB-24103", "KB-24106", "KB-24107"])
def test_ladle_furnace_buys_heat_to_keep_liquidus_plus_superheat(name: str) -> None:
    book = load_recipes()
    heat = load_heat(DEMO / f"{name}.toml", book).with_changes(stage="lf")
    warm = plan_heat(heat, book)
    # Just above liquidus + superheat: every chilling addition needs heat bought back.
    cold = heat.with_changes(temperature_c=STEEL.liquidus_c(heat.analysis.lowest_pct) + book.settings.superheat_c + 1)
    plan = plan_heat(cold, book)
    assert plan.status == "optimal" and plan.reheat_c > 0
    # The temperature after by plain arithmetic: chill of each material at its stage, plus the heating.
    used = [(stage_material(cold, book, a.material), a.kg) for a in plan.additions]
    drop = sum(m.chill_per_kg_t * kg for m, kg in used) / (cold.bath_kg / 1000)
    after = cold.temperature_c - drop + plan.reheat_c
    assert plan.temperature_after_c == pytest.approx(after, abs=1e-9)
    assert plan.liquidus_c == pytest.approx(STEEL.liquidus_c(plan.predicted_pct), abs=1e-9)
    # Met, within the row's linearisation (chill x added mass / final mass: well under 1 °C).
    assert after >= plan.liquidus_c + plan.superheat_c - 0.5
    lf = book.settings.stages["lf"]
    assert plan.reheat_cost == pytest.approx(plan.reheat_c * lf.reheat_cost_per_c * cold.bath_kg / 1000)
    assert plan.total_cost == pytest.approx(sum(a.cost for a in plan.additions) + plan.reheat_cost)
    assert plan.reheat_min == pytest.approx(plan.reheat_c / lf.reheat_c_per_min)
    assert any(n.startswith(f"arc heating about {plan.reheat_c:.0f} °C") for n in plan.notes)
    assert plan.total_cost >= warm.total_cost - 1e-6  # heat costs money


def test_without_heating_the_plan_keeps_the_superheat_or_says_so() -> None:
    book = load_recipes()
    heat = load_heat(DEMO / "KB-24106.toml", book)  # the tapping ladle: no heating
    cold = heat.with_changes(temperature_c=STEEL.liquidus_c(heat.analysis.lowest_pct) + book.settings.superheat_c + 5)
    plan = plan_heat(cold, book)
    assert plan.reheat_c == 0.0
    if plan.status == "optimal":
        assert plan.temperature_after_c >= plan.liquidus_c + plan.superheat_c - 0.5
    json = plan.to_json()
    assert {"liquidus_c", "temperature_after_c", "superheat_c"} <= json.keys()
