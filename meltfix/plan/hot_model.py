"""The planner's model kept hot in HiGHS (``highspy``): one instance per model shape, reloaded heat
by heat (see meltfix.plan.plan_model for the model and meltfix.plan.heat_load for what a heat writes).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import highspy
import numpy as np
from highspy._core import _Highs

from meltfix.plan.heat_load import HeatLoad
from meltfix.plan.plan_model import ModelShape

_INF = math.inf
# HiGHS options, set once per model. Presolve off: on these small models it saves nothing, its LP presolve
# once called a feasible elastic model infeasible, and its MIP presolve makes HiGHS print a debug line
# straight to file descriptor 1 when it repairs a presolved solution, which would corrupt a running terminal
# screen and a --json stream (seen with HiGHS 1.12). The neighbourhood heuristics (RINS, RENS) and the root
# reduced-cost heuristic each run a sub-MIP; on these models they take about a third of the time and find
# nothing branch and bound does not; so does the feasibility jump heuristic, next to the start the planner
# hands over (meltfix.plan.starts). Cuts leave the LP relaxation after 3 rounds unused instead of 10
# (mip_lp_age_limit): the root's cut rounds are most of a search's time here. Both measured together on the
# same plans, CPU time, best of two: 9.9 -> 8.9 s for 40 heats at 200 materials, 6.2 -> 5.1 s for 200 on the
# demo book, the same at 400; costs equal but one heat at 200 and one at 400, within 5e-6 relative (the
# search stops at a 1e-6 gap). One thread per model: threads plan heats side by side, each on its own model.
# No simplex scaling: HiGHS keeps the scale factors of a model's first solve, so with them a heat's plan
# would differ in its last digits depending on which heat that model met first. A primal feasibility
# tolerance of 1e-9 kg (100 times tighter than HiGHS's default) keeps a plan the solver calls feasible
# inside its own re-check by the mass balance (a miss beyond 1e-9 wt %) from a 100 kg bath up.
_OPTIONS: dict[str, bool | float | str] = {
    "output_flag": False, "log_to_console": False, "presolve": "off", "threads": 1,
    "primal_feasibility_tolerance": 1e-9, "simplex_scale_strategy": 0,
    "mip_heuristic_run_rins": False, "mip_heuristic_run_rens": False,
    "mip_heuristic_run_root_reduced_cost": False, "mip_heuristic_run_feasibility_jump": False,
    "mip_lp_age_limit": 3,
}


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
class Solution:
    """A solver point, with the LP duals when it came from a linear programme."""

    x: np.ndarray
    row_dual: np.ndarray | None = None
    """d(objective) / d(row bound) [currency per unit of the row]."""
    col_dual: np.ndarray | None = None
    """Reduced costs: d(objective) / d(column bound) at a bound."""
    proven: bool = True
    """False when the time ran out before the integer optimum was proven."""
    gap: float = 0.0
    """Relative gap between the point's cost and the best bound [fraction]."""
    objective: float = math.nan
    """The point's cost as the model weighs it (an LP's; NaN for a branch and bound's point)."""


class HotModel:
    """One HiGHS instance holding a ``ModelShape``, reloaded heat by heat.

    Built on HiGHS's core class rather than highspy's ``Highs`` wrapper: the wrapper registers a
    Python logging callback as it is constructed, which prints HiGHS's banner straight to file
    descriptor 1 before any option can be set (a running screen or a --json stream would carry it)
    and takes the interpreter lock at every log event. The core class is the same solver, silent
    from its first option on, and lets other threads run while it solves.
    """

    def __init__(self, shape: ModelShape) -> None:
        self.shape = shape
        self.highs = _Highs()  # the core class, see above
        for name, value in _OPTIONS.items():
            self.highs.setOptionValue(name, value)
        lp = highspy.HighsLp()
        lp.num_col_, lp.num_row_ = shape.n_cols, shape.n_rows
        lp.col_cost_ = np.zeros(shape.n_cols)
        lp.col_lower_ = np.zeros(shape.n_cols)
        lp.col_upper_ = np.full(shape.n_cols, _INF)
        lp.row_lower_ = np.full(shape.n_rows, -_INF)
        lp.row_upper_ = np.full(shape.n_rows, _INF)
        columns = np.asarray(shape.matrix).T
        nonzero = columns != 0
        lp.a_matrix_.format_ = highspy.MatrixFormat.kColwise
        lp.a_matrix_.start_ = np.concatenate([[0], np.cumsum(nonzero.sum(axis=1))]).astype(np.int32)
        lp.a_matrix_.index_ = np.nonzero(nonzero)[1].astype(np.int32)
        lp.a_matrix_.value_ = columns[nonzero]
        self.highs.passModel(lp)
        self._all_cols = np.arange(shape.n_cols, dtype=np.int32)
        self._all_rows = np.arange(shape.n_rows, dtype=np.int32)
        self._mass_coefficients = shape.own_mass_coefficients  # as passed
        self._continuous = np.zeros(shape.n_cols, dtype=np.uint8)
        self._integrality = self._continuous  # as passed: no integrality at all

    def load(self, heat: HeatLoad) -> None:
        """Write one heat's bounds, costs and moving coefficients over the previous heat's."""
        highs = self.highs
        highs.changeColsBounds(self.shape.n_cols, self._all_cols, heat.col_lower, heat.col_upper)
        highs.changeColsCost(self.shape.n_cols, self._all_cols, heat.cost)
        # In the binding, not in its type stubs:
        highs.changeRowsBounds(self.shape.n_rows, self._all_rows, heat.row_lower, heat.row_upper)  # type: ignore[attr-defined]
        for row, col, value in heat.coefficients:
            highs.changeCoeff(row, col, value)
        # The window rows' limits, written only where they differ from the last heat's (a heat
        # planned to its own grade changes none; an inset of the odds search changes a few).
        moved = np.flatnonzero(heat.mass_coefficients != self._mass_coefficients)
        for k in moved.tolist():
            highs.changeCoeff(self.shape.windows.first + k, self.shape.col_mass, float(heat.mass_coefficients[k]))
        if moved.size:
            self._mass_coefficients = heat.mass_coefficients

    def set_bounds(self, lower: np.ndarray, upper: np.ndarray) -> None:
        self.highs.changeColsBounds(self.shape.n_cols, self._all_cols, lower, upper)

    def set_cost(self, cost: np.ndarray) -> None:
        self.highs.changeColsCost(self.shape.n_cols, self._all_cols, cost)

    def set_row_upper(self, row: int, upper: float) -> None:
        self.highs.changeRowBounds(row, -_INF, upper)

    def solve_lp(self) -> Solution | None:
        """The linear programme (integrality ignored), duals included; None = infeasible."""
        self._integers(None)
        if not self._run():
            return None
        solution = self.highs.getSolution()
        return Solution(np.array(solution.col_value), np.array(solution.row_dual), np.array(solution.col_dual),
                        objective=self.highs.getObjectiveValue())

    def solve_mip(self, time_limit_s: float, rel_gap: float, integer: np.ndarray,
                  start: np.ndarray | None = None) -> tuple[Solution | None, bool]:
        """Branch and bound on the columns marked in ``integer`` within ``time_limit_s``: (the best
        integer point or None, whether the time ran out). ``start``: a feasible point, every
        column's value, that the search starts from (meltfix.plan.starts)."""
        self._integers(integer)
        highs = self.highs
        highs.setOptionValue("time_limit", max(time_limit_s, 1e-3))
        highs.setOptionValue("mip_rel_gap", rel_gap)
        self._run(start)
        highs.setOptionValue("time_limit", _INF)  # the LPs have no budget of their own
        status = highs.getModelStatus()
        info = highs.getInfo()
        timed_out = status == highspy.HighsModelStatus.kTimeLimit
        if info.primal_solution_status != highspy.kSolutionStatusFeasible:
            return None, timed_out
        proven = status == highspy.HighsModelStatus.kOptimal
        return Solution(np.array(highs.getSolution().col_value), proven=proven,
                        gap=0.0 if proven else float(info.mip_gap)), timed_out

    def _integers(self, integer: np.ndarray | None) -> None:
        # HighsVarType as bytes: 0 continuous, 1 integer; written only when they change (a plan's
        # LPs and a run of LP-only heats keep them all continuous).
        values = self._continuous if integer is None else integer.astype(np.uint8)
        if not np.array_equal(values, self._integrality):
            self.highs.changeColsIntegrality(self.shape.n_cols, self._all_cols, values)
            self._integrality = values

    def _run(self, start: np.ndarray | None = None) -> bool:
        # Each solve starts from no basis, so a heat's plan never depends on the heats planned
        # before it on this model (ties between equally cheap plans break the same way every time);
        # only a start given for this solve carries over.
        self.highs.clearSolver()
        if start is not None:
            self.highs.setSolution(self.shape.n_cols, self._all_cols, start)
        self.highs.run()
        return self.highs.getModelStatus() == highspy.HighsModelStatus.kOptimal
