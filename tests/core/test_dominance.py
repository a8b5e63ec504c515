"""Materials pruned before solving never change what a plan costs.

A material is pruned on a heat when another can always take its place for less (meltfix.plan.dominance:
the same dissolved contents in the same proportions, no more chill, cheaper, loose, enough stock).
Checked two ways on seeded random recipe books with such near-twins in them: the plan with pruning
costs what the plan without it costs, and what PuLP / COIN-OR CBC (pulp's bundled PULP_CBC_CMD, an
independent solver on a model written from the contract in test_planner_pulp.py) finds.
"""

from __future__ import annotations

from dataclasses import replace
from types import MappingProxyType

import numpy as np
import pytest
from test_planner_pulp import cbc_model, planner_objective, random_book, random_heat

from meltfix.base.errors import InputError
from meltfix.base.paths import demo_dir
from meltfix.plan.heat_load import load_of
from meltfix.plan.plan_model import ModelShape
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.shop.heat import load_heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook, load_recipes

# pulp 3 announces that 4.0 will want a separately installed CBC; the bundled one is what we use.
pytestmark = pytest.mark.filterwarnings("ignore::DeprecationWarning:pulp")

BOOKS = 60


def with_twins(book: RecipeBook, rng: np.random.Generator) -> RecipeBook:
    """The book with a twin of each of several materials: the same analysis scaled by s (s = 1: the
    same alloy from another supplier; s < 1: a briquette whose binder does not dissolve), at another
    price, stock, pack and minimum, chilling as much or a little more. Some originals get unlimited
    stock, so that they can stand in for a twin whatever a plan needs."""
    materials = list(book.materials)
    for j, m in enumerate(book.materials):
        if rng.random() < 0.3:
            materials[j] = m = replace(m, stock_kg=None)
        for k in range(int(rng.integers(0, 3))):
            s = 1.0 if rng.random() < 0.5 else float(rng.uniform(0.8, 1.0))
            materials.append(replace(
                m, name=f"{m.name} twin {k}",
                composition_pct=MappingProxyType({e: v * s for e, v in m.composition_pct.items()}),
                price_per_kg=m.price_per_kg * s * float(rng.uniform(0.85, 1.4)),
                stock_kg=None if rng.random() < 0.3 else float(rng.uniform(50, 4000)),
                pack_kg=None if rng.random() < 0.6 else float(rng.choice([5, 25, 100])),
                min_kg=0.0 if rng.random() < 0.6 else float(rng.uniform(5, 60)),
                chill_per_kg_t=m.chill_per_kg_t * s * (1.0 if rng.random() < 0.5 else float(rng.uniform(1.0, 1.3)))))
    return replace(book, materials=tuple(materials))


def pruned_count(book: RecipeBook, heat, options: PlanOptions) -> int:
    shape = ModelShape(book, book.grade(heat.grade), heat.stage, options.continuous, options.use_aim)
    return int(load_of(shape, heat, book.settings.aim_penalty).pruned.sum())


@pytest.mark.parametrize("packs", [False, True], ids=["loose", "packs"])
def test_pruning_never_changes_the_cost(packs: bool) -> None:
    rng = np.random.default_rng(5150 + packs)
    pruned_heats = 0
    for k in range(BOOKS):
        base = random_book(rng, packs)
        heat = random_heat(rng, base, k)
        book = with_twins(base, rng)
        options = PlanOptions(use_aim=bool(rng.random() < 0.7), continuous=not packs, time_limit_s=120.0)
        try:
            plan = Planner(book).plan(heat, options)
        except InputError:  # the locked amounts alone break the capacity or the temperature limit
            continue
        whole = Planner(book, prune=False).plan(heat, options)
        where = f"book {k} ({plan.status})"
        assert plan.status == whole.status and plan.proven and whole.proven, where
        ours = planner_objective(book, heat, plan, options.use_aim)
        # Both are optimal to HiGHS's relative MIP gap (1e-6).
        assert ours == pytest.approx(planner_objective(book, heat, whole, options.use_aim), rel=3e-6, abs=1e-6), where
        if plan.status == "optimal":
            status, objective = cbc_model(book, heat, options.use_aim, continuous=not packs, elastic=False)
            assert status == "Optimal" and ours == pytest.approx(objective, rel=1e-5, abs=1e-6), where
        pruned_heats += pruned_count(book, heat, options) > 0
    # The comparison is not vacuous: pruning happened on many of the heats.
    assert pruned_heats >= BOOKS // 4


def test_a_dearer_twin_is_pruned_and_the_plan_is_the_same() -> None:
    book = load_recipes()
    heat = load_heat(demo_dir() / "heats" / "KB-24101.toml", book)
    alone = Planner(book).plan(heat)
    assert "SiMn" in {a.material for a in alone.additions}
    original = book.material("SiMn")
    twin: Material = replace(original, name="SiMn, second supplier", price_per_kg=original.price_per_kg * 1.05)
    twins = replace(book, materials=book.materials + (twin,))
    assert pruned_count(twins, heat, PlanOptions()) == 1
    assert Planner(twins).plan(heat).to_json() == alone.to_json()
    # A cheaper twin is the one that stays: the original is pruned and the twin does its work.
    cheaper = replace(twin, price_per_kg=original.price_per_kg * 0.95)
    plan = Planner(replace(book, materials=book.materials + (cheaper,))).plan(heat)
    used = {a.material for a in plan.additions}
    assert "SiMn" not in used and cheaper.name in used
    assert plan.total_cost < alone.total_cost
