"""Order and lots of additions: the shop's order of classes, lots no larger than max_portion_kg in
whole packs, wire in metres. The order of classes and the lot size are shop settings (common
practice), so these tests check the arithmetic and that every output lists the same order."""

from __future__ import annotations

import math
from dataclasses import replace
from pathlib import Path

import pytest

from meltfix.plan.planner import plan_heat
from meltfix.plan.sequence import portions_kg, sequence_additions
from meltfix.shop.heat import load_heat
from meltfix.shop.materials import Material, parse_material
from meltfix.shop.recipes import load_recipes
from meltfix.shop.settings import ADDITION_CLASSES, ShopSettings

DEMO = Path(__file__).resolve().parents[2] / "demo" / "heats"


def material(name: str, **extra: object) -> Material:
    return parse_material({"name": name, "price_per_kg": 1.0, "composition": {"Mn": 80.0}, **extra}, "test", "")


def test_classes_go_in_the_shops_order_and_keep_the_plan_order_within_a_class() -> None:
    trim, bulk, deox, wire, late = (material("FeV", addition_class="trim"), material("FeMn"),
                                    material("Al", kind="deoxidiser"), material("Al wire", kg_per_m=0.19),
                                    material("FeB", addition_class="late"))
    second_bulk = material("SiMn")
    steps = sequence_additions([(trim, 10), (wire, 19), (bulk, 100), (late, 5), (deox, 25), (second_bulk, 50)],
                               ShopSettings())
    assert [s.material for s in steps] == ["Al", "FeMn", "SiMn", "FeV", "FeB", "Al wire"]
    # A shop that adds carbon and trims before the deoxidiser says so; unlisted classes follow.
    shop = ShopSettings(addition_order=("trim", "late") + tuple(c for c in ADDITION_CLASSES if c not in ("trim", "late")))
    steps = sequence_additions([(trim, 10), (bulk, 100), (late, 5), (deox, 25)], shop)
    assert [s.material for s in steps] == ["FeV", "FeB", "Al", "FeMn"]


def test_lots_in_whole_packs_never_over_the_limit() -> None:
    bags = material("FeSi", pack_kg=25.0)
    assert portions_kg(bags, 500.0, 300.0) == (250.0, 250.0)  # 20 bags, at most 12 a lot -> 10 + 10
    assert portions_kg(bags, 325.0, 300.0) == (175.0, 150.0)  # 13 bags -> 7 + 6
    bales = material("Bales", pack_kg=1000.0)
    assert portions_kg(bales, 3000.0, 300.0) == (1000.0, 1000.0, 1000.0)  # a bale is a lot of its own
    assert portions_kg(bags, 200.0, 300.0) == (200.0,)
    assert portions_kg(bags, 500.0, None) == (500.0,)


def test_loose_lots_are_even_and_add_up() -> None:
    loose = material("SiMn")
    lots = portions_kg(loose, 631.8, 300.0)
    assert len(lots) == 3 and max(lots) <= 300.0 and math.fsum(lots) == pytest.approx(631.8, rel=1e-12)
    assert portions_kg(loose, 600.0, 300.0) == (300.0, 300.0)


def test_wire_is_given_in_metres() -> None:
    wire = material("Al wire", kg_per_m=0.19)
    (step,) = sequence_additions([(wire, 21.3)], ShopSettings(max_portion_kg=10.0))
    assert step.portions_kg == (21.3,) and step.stir_min == 0.0  # fed in one run
    assert step.metres == pytest.approx(21.3 / 0.19, rel=1e-12)
    assert step.text() == "112 m of wire"


def test_demo_wire_mass_per_metre_matches_its_diameter() -> None:
    # Solid aluminium wire of 9.5 mm: pi/4 d^2 x density; 2.70 g/cm3 for aluminium (from memory).
    assert load_recipes().material("Aluminium wire").kg_per_m == pytest.approx(math.pi / 4 * 0.0095**2 * 2700, rel=0.01)


def test_plans_json_and_ticket_list_the_same_order() -> None:
    from datetime import datetime

    from meltfix.tui.ticket import ticket_text

    book = load_recipes()
    heat = load_heat(DEMO / "KB-24103.toml", book)
    plan = plan_heat(heat, book)
    names = [a.material for a in plan.additions]
    assert names == [s.material for s in plan.steps]
    ranks = [book.settings.addition_order.index(book.material(n).addition_class) for n in names]
    assert ranks == sorted(ranks)
    entries = plan.to_json()["additions"]
    assert [e["material"] for e in entries] == names
    wire = next(e for e in entries if e["material"] == "Aluminium wire")
    assert wire["metres"] == pytest.approx(wire["kg"] / 0.19) and wire["addition_class"] == "wire"
    for entry in entries:
        assert math.fsum(entry["portions_kg"]) == pytest.approx(entry["kg"], rel=1e-12)
        assert max(entry["portions_kg"]) <= book.settings.max_portion_kg or len(entry["portions_kg"]) == 1
    text = ticket_text(heat, plan, book, datetime(2026, 3, 14, 10, 5))
    positions = [text.index(f" {n} ") for n in names]
    assert positions == sorted(positions)


def test_plans_with_no_steps_still_write_json() -> None:
    book = load_recipes()
    plan = plan_heat(load_heat(DEMO / "KB-24101.toml", book), book)
    assert replace(plan, steps=()).to_json()["additions"][0].keys() >= {"material", "kg", "cost"}
