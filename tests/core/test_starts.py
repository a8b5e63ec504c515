"""Branch and bound's start (meltfix.plan.starts): a feasible whole-pack point near the relaxation,
never cheaper than the proven optimum, and the model's bounds left as they were."""

from __future__ import annotations

import math

import numpy as np

from meltfix.base.paths import demo_dir
from meltfix.plan.heat_load import load_of
from meltfix.plan.hot_model import HotModel
from meltfix.plan.plan_model import ModelShape
from meltfix.plan.starts import best_start, roundings
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes


def test_the_start_is_a_feasible_whole_pack_point_no_cheaper_than_the_optimum() -> None:
    book = load_recipes()
    checked = 0
    for path in sorted((demo_dir() / "heats").glob("*.toml")):
        heat = load_heat(path, book)
        model = HotModel(ModelShape(book, book.grade(heat.grade), heat.stage, False, False))
        load = load_of(model.shape, heat, book.settings.aim_penalty)
        model.load(load)
        relaxed = model.solve_lp()
        if relaxed is None:
            continue
        integer = load.integrality > 0
        start = best_start(model, load.col_lower, load.col_upper, integer, roundings(model, load, relaxed.x))
        if start is None:
            continue
        checked += 1
        shape = model.shape
        np.testing.assert_array_equal(start[integer], np.rint(start[integer]))
        assert (start >= load.col_lower - 1e-9).all() and (start <= load.col_upper + 1e-9).all()
        on = start[shape.col_switch] > 0.5
        kg = start[shape.col_mat][shape.switchable] * shape.scale[shape.switchable]
        assert (kg[on] >= shape.min_kg[shape.switchable][on] * (1 - 1e-9)).all() and (kg[~on] <= 1e-9).all()
        # The bounds are the load's again: the relaxation solves to the same cost.
        again = model.solve_lp()
        assert again is not None and math.isclose(again.objective, relaxed.objective, rel_tol=1e-12)
        found, _ = model.solve_mip(60.0, 1e-9, integer)
        assert found is not None
        assert float(load.cost @ start) >= float(load.cost @ found.x) * (1 - 1e-9) - 1e-9
    assert checked >= 3  # most demo heats have packs or minimums the relaxation leaves fractional
