"""Stages: where a material may go, its recovery there, the drop a stage allows, and the reasons a
closest plan gives when the remedy belongs to another stage.

The facts of the trade here (scrap and pig iron go to the furnace; a carbon raiser thrown into a
ladle recovers less than one charged into the furnace) are common practice; the property test checks
the planner's own promise: a plan at a stage never holds a material barred from it.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from meltfix.base.errors import InputError
from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner, plan_heat
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import parse_grade
from meltfix.shop.heat import Heat, load_heat, stage_material, usable_materials, validate_heat
from meltfix.shop.materials import parse_material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import DEFAULT_STAGES, ShopSettings, Stage

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "demo" / "heats"


@pytest.fixture(scope="module")
def book() -> RecipeBook:
    return load_recipes()


def test_demo_shop_lists_furnace_ladle_and_ladle_furnace(book: RecipeBook) -> None:
    stages = book.settings.stages
    assert list(stages) == ["furnace", "ladle", "lf"]
    assert stages["lf"].can_reheat and not stages["ladle"].can_reheat and not stages["furnace"].can_reheat
    # Clean scrap and pig iron belong to the furnace (common practice).
    for name in ("Clean plate scrap", "Clean bales", "Pig iron"):
        assert book.material(name).stages == frozenset({"furnace"})
    assert book.material("FeMo 65").stages is None  # no list: every stage


def test_a_book_without_stage_tables_has_furnace_and_ladle(tmp_path: Path, write_recipes: Callable[..., Path]) -> None:
    assert list(ShopSettings().stages) == ["furnace", "ladle"] == list(DEFAULT_STAGES)
    folder = write_recipes(tmp_path / "book", '[[material]]\nname = "A"\nprice_per_kg = 1\ncomposition = { Mn = 80 }\n',
                           'name = "G"\n[window]\nMn = [0.5, 1.0]\n')
    assert list(load_recipes(folder).settings.stages) == ["furnace", "ladle"]


def test_ladle_plan_never_proposes_furnace_only_materials(book: RecipeBook) -> None:
    heat = load_heat(DEMO / "KB-24105.toml", book)
    assert heat.stage == "furnace"
    furnace = plan_heat(heat, book)
    assert "Clean plate scrap" in {a.material for a in furnace.additions}
    ladle = plan_heat(heat.with_changes(stage="ladle"), book)
    assert not {"Clean plate scrap", "Clean bales", "Pig iron"} & {a.material for a in ladle.additions}
    assert ladle.status == "closest"
    (cu,) = [v for v in ladle.violations if v.element == "Cu"]
    assert "dilution needs the furnace" in cu.reason


def test_missing_carrier_at_this_stage_is_named(book: RecipeBook) -> None:
    # Magnesium comes only with the nodulariser, and that goes in the treatment ladle only.
    heat = load_heat(DEMO / "KB-24104.toml", book).with_changes(stage="furnace")
    plan = plan_heat(heat, book)
    (mg,) = [v for v in plan.violations if v.element == "Mg"]
    assert mg.reason == "No material that carries Mg may go in at the furnace: raising it needs the ladle."


def test_carbon_raiser_recovers_by_stage(book: RecipeBook) -> None:
    raiser = book.material("Carbon raiser (graphitised)")
    heat = load_heat(DEMO / "KB-24101.toml", book)
    assert stage_material(heat, book, raiser.name).recovery["C"] == 0.70
    assert stage_material(heat.with_changes(stage="furnace"), book, raiser.name).recovery["C"] == 0.50
    assert stage_material(heat.with_changes(stage="lf"), book, raiser.name).recovery["C"] == 0.90
    femo = book.material("FeMo 65")
    assert femo.at_stage("furnace") is femo  # nothing differs there
    # The plan's prediction uses the ladle's recovery: re-check it by the plain mass balance.
    plan = plan_heat(heat, book)
    used = [(stage_material(heat, book, a.material), a.kg) for a in plan.additions]
    final_kg, predicted = bath_after(heat.bath_kg, heat.analysis.pct, used)
    assert plan.final_kg == pytest.approx(final_kg, rel=1e-12)
    assert plan.predicted_pct["C"] == pytest.approx(predicted["C"], rel=1e-12)
    assert {m.name: m for m in usable_materials(heat, book)}[raiser.name].recovery["C"] == 0.70


def test_drop_limit_comes_from_the_heat_then_the_stage_then_the_shop(book: RecipeBook) -> None:
    heat = load_heat(DEMO / "KB-24101.toml", book)
    assert heat.drop_limit_c(book.settings) == book.settings.max_temp_drop_c == 25.0  # the ladle sets none
    assert heat.with_changes(stage="furnace").drop_limit_c(book.settings) == 40.0
    assert heat.with_changes(stage="furnace", max_temp_drop_c=10.0).drop_limit_c(book.settings) == 10.0


def test_heat_at_a_stage_the_shop_does_not_list(book: RecipeBook) -> None:
    heat = load_heat(DEMO / "KB-24101.toml", book).with_changes(stage="tundish")
    with pytest.raises(InputError) as caught:
        validate_heat(heat, book, "KB.toml")
    assert (caught.value.field, caught.value.message) == (
        "stage", "'tundish' is not a stage of this shop (shop.toml lists: furnace, ladle, lf)")


def test_lock_of_a_material_barred_at_the_stage(book: RecipeBook) -> None:
    heat = load_heat(DEMO / "KB-24101.toml", book).with_changes(locked_kg=MappingProxyType({"Pig iron": 500.0}))
    with pytest.raises(InputError) as caught:
        validate_heat(heat, book, "KB.toml")
    assert (caught.value.field, caught.value.message) == ("lock_kg.Pig iron", "is not added at the ladle (its stages: furnace)")


# --------------------------------------------------------------------------------------------
# Property: over random books and stages, no plan holds a material barred from its stage.

STAGES = ("furnace", "ladle", "lf")
ELEMENTS = ("C", "Mn", "Si", "Cr")


@st.composite
def book_and_heat(draw: st.DrawFn) -> tuple[RecipeBook, Heat]:
    elements = draw(st.permutations(ELEMENTS))[: draw(st.integers(1, 3))]
    window = {s: [lo, lo + draw(st.floats(0.05, 0.5))] for s in elements for lo in [draw(st.floats(0.05, 1.0))]}
    entries: list[dict[str, Any]] = []
    for j in range(draw(st.integers(1, 6))):
        main = draw(st.sampled_from(elements))
        entry: dict[str, Any] = {"name": f"M{j}", "price_per_kg": draw(st.floats(0.2, 20.0)),
                                 "composition": {main: draw(st.floats(20.0, 90.0))}}
        if draw(st.booleans()):
            entry["stages"] = sorted(draw(st.sets(st.sampled_from(STAGES), min_size=1)))
        if draw(st.booleans()):
            entry["recovery_by_stage"] = {draw(st.sampled_from(STAGES)): {main: draw(st.floats(0.3, 1.0))}}
        entries.append(entry)
    stages = MappingProxyType({s: Stage(s) for s in STAGES})
    materials = tuple(parse_material(e, "drawn", f"material #{k}.", STAGES) for k, e in enumerate(entries, 1))
    grade = parse_grade({"name": "G", "window": window}, "grades/G.toml")
    book = RecipeBook(materials, MappingProxyType({"G": grade}), ShopSettings(stages=stages))
    pct = {s: max(0.0, lo - draw(st.floats(0.0, 0.3))) for s, (lo, _) in window.items()}
    heat = Heat(heat_id="H", grade="G", bath_kg=draw(st.floats(5_000.0, 100_000.0)), analysis=Analysis(pct),
                stage=draw(st.sampled_from(STAGES)))
    return book, heat


@settings(derandomize=True, database=None, max_examples=80, deadline=None,
          suppress_health_check=[HealthCheck.too_slow])
@given(book_and_heat())
def test_no_plan_holds_a_material_barred_from_its_stage(drawn: tuple[RecipeBook, Heat]) -> None:
    book, heat = drawn
    plan = Planner(book).plan(heat, PlanOptions(continuous=True))
    for addition in plan.additions:
        assert book.material(addition.material).allowed_at(heat.stage), (addition.material, heat.stage)
    # And the recoveries it planned with are the stage's: its prediction matches the plain balance.
    used = [(stage_material(heat, book, a.material), a.kg) for a in plan.additions]
    assert plan.final_kg == pytest.approx(bath_after(heat.bath_kg, heat.analysis.pct, used)[0], rel=1e-9)


def test_stage_replace_keeps_the_material_frozen(book: RecipeBook) -> None:
    raiser = book.material("Carbon raiser (graphitised)")
    ladle = raiser.at_stage("ladle")
    assert ladle == replace(raiser, recovery=ladle.recovery) and ladle.recovery["Si"] == raiser.recovery["Si"]


def test_command_line_names_the_heat_file_and_its_stage(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    from meltfix.cli import main

    heat = tmp_path / "KB-x.toml"
    heat.write_text((DEMO / "KB-24101.toml").read_text(encoding="utf-8").replace('grade = ', 'stage = "tundish"\ngrade = '),
                    encoding="utf-8")
    assert main(["solve", str(heat)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and f"{heat}: stage: 'tundish' is not a stage of this shop" in err


def test_a_heat_without_a_stage_is_at_the_shops_default_stage(book: RecipeBook, tmp_path: Path) -> None:
    # A heat file that names no stage: the demo shop's `default_stage` (the ladle) ...
    assert book.settings.default_stage == "ladle" and book.settings.heat_stage == "ladle"
    text = (DEMO / "KB-24101.toml").read_text(encoding="utf-8")
    assert "stage" not in text
    assert load_heat(DEMO / "KB-24101.toml", book).stage == "ladle"
    # ... and without that setting the shop's first stage, where its heats are first sampled.
    first = replace(book, settings=replace(book.settings, default_stage=None))
    assert first.settings.heat_stage == "furnace" == next(iter(first.settings.stages))
    assert load_heat(DEMO / "KB-24101.toml", first).stage == "furnace"
    assert load_heat(DEMO / "KB-24103.toml", first).stage == "lf"  # a stage the file names wins
    assert ShopSettings().heat_stage == "furnace"  # no [stage.*]: furnace, then ladle
    # The recorded heats of `meltfix replay` read the same default.
    from meltfix.records.heat_record import load_record

    record = tmp_path / "R1.toml"
    record.write_text((ROOT / "demo" / "records" / "KB-24211.toml").read_text(encoding="utf-8")
                      .replace('stage = "ladle"\n', ""), encoding="utf-8")
    assert load_record(record, book).stage == "ladle" and load_record(record, first).stage == "furnace"
