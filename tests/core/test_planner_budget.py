"""The time budget is per plan (shop.toml plan_time_limit_s): past it the best plan found is
returned, marked as not proven cheapest, with its gap; never an error, never a broken pack."""

from __future__ import annotations

import json
import shutil
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType

import pytest

from meltfix.base.errors import InputError
from meltfix.base.paths import default_recipes_dir, demo_dir
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, PlanOptions
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import RecipeBook, load_recipes


def crowded(book: RecipeBook, count: int) -> RecipeBook:
    """The demo book with its materials repeated, prices and contents shaken a little, to ``count``."""
    materials = list(book.materials)
    k = 0
    while len(materials) < count:
        m = book.materials[k % len(book.materials)]
        factor = 1 + 0.01 * (k % 7 - 3)
        composition = {s: v * min(factor, 100.0 / sum(m.composition_pct.values())) for s, v in m.composition_pct.items()}
        materials.append(replace(m, name=f"{m.name} #{k}", price_per_kg=m.price_per_kg * (1 + 0.013 * (k % 11 - 5)),
                                 composition_pct=MappingProxyType(composition)))
        k += 1
    return replace(book, materials=tuple(materials))


def test_a_plan_past_its_budget_is_marked_and_still_whole() -> None:
    book = crowded(load_recipes(), 150)
    planner = Planner(book)
    for path in sorted((demo_dir() / "heats").glob("*.toml")):
        heat = load_heat(path, book)
        plan = planner.plan(heat, PlanOptions(time_limit_s=1e-6))  # far too little to prove anything
        missed = any(c.margin_pct < -LIMIT_TOL_PCT for c in plan.checks)
        assert plan.status == ("closest" if missed else "optimal")
        data = json.loads(json.dumps(plan.to_json(), allow_nan=False))  # gap is a number or null
        assert data["proven"] is plan.proven
        if not plan.proven:
            assert any("planning budget" in note for note in plan.notes)
            assert data["gap"] is None or data["gap"] >= 0
        for line in plan.additions:
            material = book.material(line.material)
            assert line.kg >= material.min_kg
            if line.packs is not None:
                assert line.kg == line.packs * material.pack_kg


def test_the_shop_sets_the_budget(tmp_path: Path) -> None:
    folder = tmp_path / "recipes"
    shutil.copytree(default_recipes_dir(), folder)
    shop = folder / "shop.toml"
    lines = [line for line in shop.read_text(encoding="utf-8").splitlines() if not line.startswith("plan_time_limit_s")]
    shop.write_text("\n".join(lines) + "\n", encoding="utf-8")
    assert load_recipes(folder).settings.plan_time_limit_s == 2.0  # the default
    shop.write_text("plan_time_limit_s = 0.5\n" + shop.read_text(encoding="utf-8"), encoding="utf-8")
    assert load_recipes(folder).settings.plan_time_limit_s == 0.5
    shop.write_text(shop.read_text(encoding="utf-8").replace("plan_time_limit_s = 0.5", "plan_time_limit_s = 0"),
                    encoding="utf-8")
    with pytest.raises(InputError, match="plan_time_limit_s"):
        load_recipes(folder)
