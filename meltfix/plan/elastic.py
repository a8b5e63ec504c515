"""The closest plan's two problems, when no plan meets every window: the windows made elastic on the
planner's hot model (meltfix.plan.plan_model's slack columns), the least total violation found first,
then the cheapest plan that violates hardly more. The planner solves them with its own solve
(meltfix.plan.planner); the speed benchmark's floor hands them to HiGHS alone.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np

from meltfix.plan.heat_load import HeatLoad
from meltfix.plan.hot_model import HotModel, Solution


def elastic_phases(model: HotModel, load: HeatLoad, bath_kg: float, tolerance: float,
                   solve: Callable[[np.ndarray], Solution | None]) -> tuple[Solution | None, Solution | None]:
    """The closest plan's two problems on a loaded model, each handed to ``solve`` (which solves the
    model within the columns' upper bounds it is given): the least total violation, then the
    cheapest plan within ``tolerance`` of it. Returns both solutions (None: no plan at all)."""
    shape = model.shape
    # Every usable material open: the dominated ones were shut on the rows with their limits kept.
    upper = load.col_upper_all.copy()
    upper[shape.col_slack] = np.where(load.active, math.inf, 0.0)
    # Violation weight: kilograms outside a limit relative to the limit's own mass in the bath.
    # The solver minimises it multiplied by the bath: the weights per kg of a 50 t bath are so
    # small (1e-5) that reduced costs would fall under HiGHS's dual tolerance and stop it early.
    weights = 1.0 / (shape.limit_fraction() * bath_kg)
    first = np.zeros(shape.n_cols)
    first[shape.col_slack] = weights * bath_kg
    model.set_cost(first)
    phase1 = solve(upper)
    if phase1 is None:
        return None, None
    violation = weights * phase1.x[shape.col_slack]
    least = float(violation.sum())
    # Slack on the least violation keeps phase 2 from buying alloys and scrap by the tonne only
    # to shave a hopeless excess (S at 0.56 % against 0.050 %) by a hundredth of a per cent:
    # the closest plan may miss by ``tolerance`` more than the least possible
    # (plus 1e-4 = 0.01 % of a limit's mass, so a near-zero least is not chased either).
    # The cap row is the weighted sum multiplied by the bath, so its coefficients stay fixed.
    model.set_row_upper(shape.violation_cap.first, bath_kg * (least * (1 + tolerance) + 1e-4))
    # The hair is for the limits that cannot be met: one that phase 1 met stays met, or the
    # cheaper plan would miss it by a hair and blame it on a reason that is not true.
    upper[shape.col_slack] = np.where(violation <= 1e-9, 0.0, upper[shape.col_slack])
    model.set_cost(load.cost)
    return phase1, solve(upper)
