"""Where branch and bound starts: whole-pack points near the LP relaxation, each completed by the LP
over the loose amounts with its packs and on/off choices fixed.

HiGHS's own first integer point on these models is often far off: a plan at 200 materials began
from one 30 % dearer than the optimum and spent most of its search improving it, strong branching
node after node. The relaxation's pack counts rounded up, to the nearest and down, with every
material the relaxation uses switched on, cost three LPs, and the cheapest of them that is feasible
lets branch and bound prune from its first node (bench/plan_speed.py; over 40 heats at 200
materials the CPU time of the plans fell by about a fifth, and a slow plan inside every window
from 0.55 s to 0.33 s). The points depend on the heat alone, so a heat's plan still never depends
on the heats planned before it.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

from meltfix.plan.heat_load import HeatLoad
from meltfix.plan.hot_model import HotModel, Solution

# A material the relaxation adds less of than this [kg] is taken as not used.
_USED_KG = 1e-6


def with_integers_fixed(model: HotModel, lower: np.ndarray, upper: np.ndarray, integer: np.ndarray,
                        values: np.ndarray) -> Solution | None:
    """The LP with the columns marked in ``integer`` fixed at ``values`` (within their bounds
    ``lower``..``upper``), the others free within theirs: None = infeasible. Leaves those bounds
    in the model."""
    lower, upper = lower.copy(), upper.copy()
    lower[integer] = upper[integer] = np.clip(values[integer], lower[integer], upper[integer])
    model.set_bounds(lower, upper)
    return model.solve_lp()


def roundings(model: HotModel, load: HeatLoad, relaxed_x: np.ndarray) -> list[np.ndarray]:
    """The relaxation's integer columns three ways: pack counts rounded up, to the nearest and down,
    each with the on/off choices of the materials it uses switched on and the others off. Each point
    once: without packs, or with every fraction under a half, two or three ways agree, and each
    point costs best_start an LP."""
    shape = model.shape
    packs = relaxed_x[shape.col_mat]
    used = packs * shape.scale > _USED_KG
    points: list[np.ndarray] = []
    for rounded in (np.ceil(packs - _USED_KG), np.rint(packs), np.floor(packs + _USED_KG)):
        values = np.zeros(shape.n_cols)
        values[shape.col_mat] = np.where(load.packed, rounded, 0.0)
        values[shape.col_switch] = used[shape.switchable] & load.switched[shape.switchable]
        if not any(np.array_equal(values, point) for point in points):
            points.append(values)
    return points


def best_start(model: HotModel, lower: np.ndarray, upper: np.ndarray, integer: np.ndarray,
               candidates: Sequence[np.ndarray]) -> np.ndarray | None:
    """The cheapest feasible completion of the ``candidates`` (values of the ``integer`` columns),
    every column's value; None when none is feasible. The model's column bounds are ``lower`` and
    ``upper`` again on return."""
    cheapest: Solution | None = None
    for values in candidates:
        completed = with_integers_fixed(model, lower, upper, integer, values)
        if completed is not None and (cheapest is None or completed.objective < cheapest.objective):
            cheapest = completed
    model.set_bounds(lower, upper)
    return None if cheapest is None else cheapest.x
