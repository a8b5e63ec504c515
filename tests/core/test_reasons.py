"""The remedy a closest plan gives for an element over its maximum, per element and stage, against
a table of the right remedies.

The table below is steelmaking practice recalled from memory (the refining reactions as taught in
texts such as Turkdogan, Fundamentals of Steelmaking, 1996, and The Making, Shaping and Treating of
Steel, AISE, 11th ed., 1998; neither re-read for this test):

- carbon, silicon, manganese (and Cr, Al, Ti, V, Nb, B) are oxidised out by oxygen in the furnace;
  a ladle has no oxygen blow, so there only dilution, the furnace again or a new grade help;
- phosphorus leaves only under a basic, oxidising slag (furnace); a ladle's reducing slag gives it back;
- sulphur leaves under a basic, reducing slag with stirring (ladle desulphurisation) or with
  calcium treatment, never by oxidation;
- copper, nickel, molybdenum, tin (and As, Sb, Co, W) are less oxidisable than iron: only dilution;
- nitrogen and hydrogen: a carbon boil in the furnace, vacuum degassing after it;
- magnesium in treated iron fades with time.
"""

from __future__ import annotations

from collections.abc import Mapping
from types import MappingProxyType

import pytest

from meltfix.plan.planner import Planner
from meltfix.plan.reasons import REMEDIES, ROUTES, Remedy, remedy
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import parse_material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ShopSettings

STAGES = ("furnace", "ladle", "lf")
OXIDISABLE = ("C", "Si", "Mn", "Cr", "Al", "Ti", "V", "Nb", "B")
RESIDUALS = ("Cu", "Ni", "Mo", "Sn", "As", "Sb", "Co", "W")

RIGHT_ROUTES: dict[tuple[str, str], set[str]] = {
    **{(s, "furnace"): {"oxidation", "dilution"} for s in OXIDISABLE},
    **{(s, stage): {"dilution", "back to the furnace"} for s in OXIDISABLE for stage in ("ladle", "lf")},
    ("P", "furnace"): {"basic oxidising slag", "dilution"},
    ("P", "ladle"): {"dilution", "back to the furnace"},
    ("P", "lf"): {"dilution", "back to the furnace"},
    # Not oxidation at any stage; in the furnace the advice is to desulphurise at the ladle.
    **{("S", stage): {"basic reducing slag", "stirring", "calcium treatment", "dilution"} for stage in STAGES},
    **{(s, "furnace"): {"carbon boil", "dilution"} for s in ("N", "H")},
    **{(s, stage): {"vacuum degassing", "dilution"} for s in ("N", "H") for stage in ("ladle", "lf")},
    **{("Mg", stage): {"fade", "dilution"} for stage in STAGES},
    **{(s, stage): {"dilution"} for s in RESIDUALS for stage in STAGES},
}

# The words that carry each route in the advice a melter reads.
WORDS = {"oxidation": "oxygen blow", "basic oxidising slag": "basic, oxidising slag",
         "basic reducing slag": "basic, reducing slag", "stirring": "stirring", "calcium treatment": "calcium treatment",
         "carbon boil": "carbon boil", "vacuum degassing": "vacuum degassing", "fade": "fades", "dilution": "dilut",
         "back to the furnace": "back to the furnace"}


def remedy_problems(table: Mapping[str, Mapping[str, Remedy]]) -> list[str]:
    problems = []
    for (element, stage), right in RIGHT_ROUTES.items():
        found = table.get(element, {}).get(stage)
        if found is None:
            problems.append(f"{element} at the {stage}: no remedy")
            continue
        if found.routes != right:
            problems.append(f"{element} at the {stage}: routes {sorted(found.routes)}, right: {sorted(right)}")
        for route in ROUTES:
            if (WORDS[route] in found.text) != (route in found.routes):
                problems.append(f"{element} at the {stage}: the text and the route '{route}' disagree: {found.text!r}")
    listed = {(element, stage) for element, by_stage in table.items() for stage in by_stage}
    problems += [f"{element} at the {stage}: not in the table of right remedies"
                 for element, stage in sorted(listed - set(RIGHT_ROUTES))]
    return problems


def test_every_remedy_is_the_right_one() -> None:
    assert set(WORDS) == set(ROUTES)
    assert remedy_problems(REMEDIES) == []


def test_sulphur_is_never_oxidised_out() -> None:
    for stage in STAGES:
        advice = remedy("S", stage)
        assert "oxidation" not in advice.routes
        assert {"basic reducing slag", "calcium treatment"} <= advice.routes
    assert "ladle" in remedy("S", "furnace").text  # desulphurise at the ladle, not in the furnace


def test_a_wrong_remedy_is_caught() -> None:
    # The deliberately wrong table: sulphur "oxidised out" in the furnace, as the first version said.
    wrong = {**REMEDIES, "S": {**REMEDIES["S"], "furnace": Remedy(frozenset({"oxidation", "dilution"}),
                                                                  "additions can only dilute it; in the furnace, "
                                                                  "an oxygen blow is the remedy")}}
    problems = remedy_problems(MappingProxyType(wrong))
    assert any(problem.startswith("S at the furnace: routes") for problem in problems), problems


def test_a_stage_the_table_does_not_know_gets_both_remedies() -> None:
    # A shop's own stage name (say "converter"): the melter reads both and knows which applies.
    advice = remedy("C", "converter")
    assert advice.routes == RIGHT_ROUTES[("C", "furnace")] | RIGHT_ROUTES[("C", "ladle")]
    assert advice.text.startswith("in a furnace, ") and "; in a ladle, " in advice.text
    assert remedy("Cu", "converter") == remedy("Cu", "ladle")
    assert remedy("Zr", "ladle").routes == {"dilution"}  # an element the table does not list


def _shop() -> RecipeBook:
    materials = [parse_material({"name": "Clean iron", "kind": "dilution", "price_per_kg": 0.4,
                                 "composition": {"C": 0.05, "S": 0.005}}, "materials.toml", "material #1.")]
    grade = parse_grade({"name": "Low S", "window": {"S": [0, 0.015], "C": [0, 0.25]}}, "grades/low-s.toml")
    return RecipeBook(tuple(materials), MappingProxyType({"Low S": grade}), ShopSettings())


@pytest.mark.parametrize(("stage", "words"), [("ladle", "basic, reducing slag"),
                                              ("furnace", "desulphurise at the ladle")])
def test_the_closest_plan_gives_the_sulphur_remedy_of_its_stage(stage: str, words: str) -> None:
    # 30 t at S 0.030 % against 0.015 % needs 30 t of clean iron; the vessel holds 1 t more.
    heat = Heat("S1", "Low S", 30_000.0, Analysis({"S": 0.030, "C": 0.10}), capacity_kg=31_000.0, stage=stage)
    plan = Planner(_shop()).plan(heat, PlanOptions(use_aim=False))
    assert plan.status == "closest"
    (violation,) = plan.violations
    assert violation.element == "S" and words in violation.reason
    assert "oxygen blow" not in violation.reason
