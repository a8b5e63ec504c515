"""The addition planner: the cheapest additions that bring a heat into its grade (meltfix.plan.massbalance).

The model (``meltfix.plan.plan_model``) is linear and exact once each window is multiplied out by the
final bath mass; it is built once per recipe book, grade and mode and kept hot in HiGHS, and each
heat only writes its own bounds and costs into it. A plan is the LP when its optimum already has
whole packs and every addition at zero or above its minimum, else branch and bound, within a time
budget per plan. When no plan meets every window, an elastic version finds the plan with the least
violation (weighted relative to each limit), then the cheapest such plan. Whatever the solver says,
the plan's status comes from its own re-check by the plain mass balance.
"""

from __future__ import annotations

import math
import threading
import time
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from typing import cast

import numpy as np

from meltfix.base.errors import InputError
from meltfix.plan.cautions import BathState, plan_cautions
from meltfix.plan.elastic import elastic_phases
from meltfix.plan.heat_load import HeatLoad, integer_choices, load_of
from meltfix.plan.hot_model import HotModel, Solution
from meltfix.plan.massbalance import recheck, temperature_drop_c
from meltfix.plan.numbers import degrees_text, temperature_text
from meltfix.plan.plan_model import ModelShape
from meltfix.plan.reasons import explain_violation
from meltfix.plan.result import (LIMIT_TOL_PCT, Addition, Binding, Later, LimitCheck, Plan, PlanOptions, Violation,
                                 addition)
from meltfix.plan.sequence import class_rank, sequence_additions
from meltfix.plan.starts import best_start, roundings, with_integers_fixed
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, checked_grade, unchecked_caution, validate_heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook

# A relaxed solution this close to whole packs (and to zero or the minimum) counts as integer,
# as HiGHS's own MIP feasibility tolerance does.
_INTEGRALITY_TOL = 1e-6
# An addition this close under its minimum [relative] is the minimum, read back through the
# solver's tolerances; further under, it is an artefact of them (a binary at 1e-6 lets a few
# grams in) and is dropped. Either way the plan's own re-check then judges it.
_MINIMUM_SNAP = 1e-6
# Branch and bound may use this share of a plan's time budget; the rest is kept for the LPs that
# polish the plan and give its duals, the closest-plan phases and the re-check (at 400 materials on
# a busy 2-core machine these took up to 0.3 s after a search that used the whole budget).
_SEARCH_SHARE = 0.8


@dataclass(frozen=True, eq=False)  # compared by identity: one pool per model shape
class _Pool:
    """The hot models of one model shape that no thread is planning on."""

    shape: ModelShape
    idle: list[HotModel]


class Planner:
    """Plans heats against one recipe book. Build once, plan many heats, from any number of threads.

    Each (grade, stage, mode) has one model shape; each thread planning at a time takes a
    hot HiGHS model of that shape from a pool (building one when all are busy) and gives it back.
    """

    def __init__(self, book: RecipeBook, prune: bool = True) -> None:
        self.book = book
        self.prune = prune
        """Shut the materials no cheapest plan needs before solving (meltfix.plan.dominance); off only
        in the test that pruning changes no plan's cost."""
        self._lock = threading.Lock()
        # Keyed by grade, stage, mode and the elements declared not measured (their limits are no rows).
        self._pools: dict[tuple[str, str, bool, bool, bool, frozenset[str]], _Pool] = {}

    def _take(self, heat: Heat, options: PlanOptions) -> tuple[_Pool, HotModel]:
        """A hot model of this heat's shape, taken from its pool (built when all are busy); the
        caller gives it back to the pool's ``idle`` list (a plain call and one dictionary look-up,
        where a context manager and two look-ups cost a few microseconds more per plan)."""
        key = (heat.grade, heat.stage, options.continuous, options.use_aim, options.relaxed, heat.not_measured)
        with self._lock:
            pool = self._pools.get(key)
            if pool is None:
                pool = self._pools[key] = _Pool(ModelShape(self.book, checked_grade(heat, self.book.grade(heat.grade)),
                                                           heat.stage, options.continuous or options.relaxed,
                                                           options.use_aim, minimums=not options.relaxed), [])
            model = pool.idle.pop() if pool.idle else None
        return pool, HotModel(pool.shape) if model is None else model

    def plan(self, heat: Heat, options: PlanOptions = PlanOptions(), grade: Grade | None = None,
             start: Plan | None = None) -> Plan:
        """Plan one heat. Raises InputError when the heat does not fit the recipe book.

        ``grade``: plan to the heat's grade with its limits moved (the same limits of the same
        elements, each at another value) instead of the book's; the hot model is the same.
        ``start``: a plan of this heat that still meets these windows (one planned before a limit
        was loosened): branch and bound starts from its packs and on/off choices."""
        return cast(Plan, self._plan(heat, options, True, grade, start))  # a closest plan always exists

    def plan_inside(self, heat: Heat, options: PlanOptions = PlanOptions(), grade: Grade | None = None) -> Plan | None:
        """The plan when the solver finds one inside every window; None, without the closest-plan
        phases, when it finds none (the odds search asks this of windows it has moved in)."""
        return self._plan(heat, options, False, grade)

    def _plan(self, heat: Heat, options: PlanOptions, closest: bool, grade: Grade | None,
              start: Plan | None = None) -> Plan | None:
        validate_heat(heat, self.book)
        settings = self.book.settings
        penalty = options.aim_penalty if options.aim_penalty is not None else settings.aim_penalty
        budget_s = options.time_limit_s if options.time_limit_s is not None else settings.plan_time_limit_s
        deadline = time.monotonic() + _SEARCH_SHARE * budget_s
        pool, model = self._take(heat, options)
        try:
            load = load_of(model.shape, heat, penalty, self.prune, grade)
            model.load(load)
            hint = None if start is None else integer_choices(model.shape, load, start.additions)
            solution = _solve(model, load, load.col_lower, load.col_upper, deadline, options, hint)
            if solution is None and not closest:
                return None
            least = None
            if solution is None:
                solution, least = _closest(model, load, heat.bath_kg, deadline, options)
            return self._result(heat, model, load, solution, least, budget_s)
        finally:  # every heat rewrites all bounds, costs and moving coefficients: no state carries over
            with self._lock:
                pool.idle.append(model)

    def _result(self, heat: Heat, model: HotModel, load: HeatLoad, solution: Solution,
                least: Solution | None, budget_s: float) -> Plan:
        book, shape = self.book, model.shape
        grade = load.grade
        additions, used = _additions(shape, load, solution.x)
        settings = book.settings
        final_kg, predicted, checks = recheck(heat, grade, used, settings)
        drop = temperature_drop_c(heat.bath_kg, used) if used else 0.0
        # The status is the re-check's, on every path: a solver's "optimal" at a bath so small that
        # its tolerances matter, or after the minimums are cleaned, is judged like any other plan.
        missed = [check for check in checks if check.margin_pct < -LIMIT_TOL_PCT]
        violations = self._violations(heat, shape, load, missed, least.x if least is not None else None, used)
        duals = None if missed else _duals(model, load, solution)
        notes = load.notes
        units = book.settings.units  # notes are read by people: in the shop's units
        temperature = _temperature(heat, book, shape, solution.x, drop, predicted)
        if temperature.reheat_c > 0:
            notes = (f"arc heating about {degrees_text(temperature.reheat_c, units)} ({temperature.reheat_min:.0f} min) "
                     f"at the {heat.stage}, {temperature.reheat_cost:,.2f} {book.settings.currency}",) + notes
        if temperature.short_c > 0.5 and temperature.after_c is not None:
            notes += (f"temperature after about {temperature_text(temperature.after_c, units)} is "
                      f"{degrees_text(temperature.short_c, units)} short of liquidus "
                      f"{temperature_text(temperature.liquidus_c, units)} + superheat "
                      f"{degrees_text(book.settings.superheat_c, units)}",)
        if not solution.proven:
            notes += ((f"best plan found within the {budget_s:g} s planning budget: the cheapest possible plan "
                       f"may cost up to {100 * solution.gap:.2g} % less",) if math.isfinite(solution.gap) else
                      (f"no plan in whole packs was found within the {budget_s:g} s planning budget: these are the "
                       "loose amounts rounded to whole packs and minimums, checked as shown",))
        # The lines in the shop's order of classes, as their steps list them (meltfix.plan.sequence).
        ranked = sorted(zip(additions, used), key=lambda line: class_rank(settings, line[1][0].addition_class))
        # What a plan shows but the odds search and a batch never read is worked out when first read.
        return Plan(
            heat_id=heat.heat_id,
            grade=heat.grade,
            status="closest" if missed else "optimal",
            additions=tuple(a for a, _ in ranked),
            total_cost=float(math.fsum([a.cost for a in additions] + [temperature.reheat_cost])),
            bath_kg=heat.bath_kg,
            final_kg=final_kg,
            predicted_pct=predicted,
            checks=checks,
            violations=tuple(violations),
            binding=Later(lambda: () if duals is None else _bindings(shape, load, duals, final_kg, heat.bath_kg)),
            cautions=Later(lambda: unchecked_caution(heat) + plan_cautions(
                used, heat.bath_kg, drop, heat.temperature_c, settings,
                BathState(heat.dissolved_o_ppm, heat.capacity_kg, final_kg, temperature.after_c, temperature.liquidus_c))),
            temperature_drop_c=drop,
            notes=notes,
            currency=book.settings.currency,
            proven=solution.proven,
            gap=solution.gap,
            steps=Later(lambda: sequence_additions([u for _, u in ranked], settings)),
            liquidus_c=temperature.liquidus_c,
            temperature_after_c=temperature.after_c,
            superheat_c=book.settings.superheat_c,
            reheat_c=temperature.reheat_c,
            reheat_min=temperature.reheat_min,
            reheat_cost=temperature.reheat_cost,
        )


    def _violations(self, heat: Heat, shape: ModelShape, load: HeatLoad, missed: Sequence[LimitCheck],
                    least_x: np.ndarray | None, used: list[tuple[Material, float]]) -> list[Violation]:
        """Each missed limit with its reason, read from the least-violation plan (``least_x``, when
        the closest-plan phases ran): it shows which limit stops the heat getting closer."""
        if not missed:
            return []
        book = self.book
        least_used = _additions(shape, load, least_x)[1] if least_x is not None else used
        least_final_kg = recheck(heat, load.grade, least_used, book.settings)[0]
        least_drop = temperature_drop_c(heat.bath_kg, least_used) if least_used else 0.0
        usable = tuple(shape.materials[j] for j in load.can_use.nonzero()[0])
        violations = []
        for check in missed:
            reason = explain_violation(check.element, check.limit, heat, book, usable, least_used,
                                       least_final_kg, bool(load.packed.any()), least_drop,
                                       heat.drop_limit_c(book.settings))
            violations.append(Violation(check.element, check.limit, check.limit_pct,
                                        check.predicted_pct, -check.margin_pct, reason))
        return violations


@dataclass(frozen=True, init=False)  # __init__ as meltfix.plan.result.Addition's, for the same reason
class _Temperature:
    liquidus_c: float
    after_c: float | None
    short_c: float
    reheat_c: float
    reheat_min: float
    reheat_cost: float

    def __init__(self, liquidus_c: float, after_c: float | None, short_c: float, reheat_c: float, reheat_min: float,
                 reheat_cost: float) -> None:
        fields = self.__dict__
        fields["liquidus_c"], fields["after_c"], fields["short_c"] = liquidus_c, after_c, short_c
        fields["reheat_c"], fields["reheat_min"], fields["reheat_cost"] = reheat_c, reheat_min, reheat_cost


def _temperature(heat: Heat, book: RecipeBook, shape: ModelShape, x: np.ndarray, drop_c: float,
                 predicted: Mapping[str, float]) -> _Temperature:
    """The plan's temperature budget, by plain arithmetic on its point: liquidus of the predicted
    analysis, arc heating bought, temperature after, and how far short of liquidus + superheat."""
    bought_c = float(x[shape.col_reheat])
    reheat_c = bought_c if bought_c > 0.05 else 0.0
    stage = book.settings.stages.get(heat.stage)
    rate = stage.reheat_c_per_min if stage is not None else 1.0
    cost = reheat_c * (stage.reheat_cost_per_c if stage is not None else 0.0) * heat.bath_kg / 1000.0
    liquidus = shape.liquidus.liquidus_c(predicted)
    after = None if heat.temperature_c is None else heat.temperature_c - drop_c + reheat_c
    short = 0.0 if after is None else liquidus + book.settings.superheat_c - after
    return _Temperature(liquidus, after, short, reheat_c, reheat_c / rate, cost)


def _solve(model: HotModel, load: HeatLoad, lower: np.ndarray, upper: np.ndarray, deadline: float,
           options: PlanOptions, hint: np.ndarray | None = None) -> Solution | None:
    """Solve the loaded problem (or its elastic version) within the column bounds ``lower`` and
    ``upper``: None = infeasible.

    The LP relaxation comes first (measured in bench/plan_speed.py): it is a fraction of the integer solve's time, proves
    infeasibility on its own, and when its optimum already has whole packs and no addition under its
    minimum it is the integer optimum, duals included. Otherwise branch and bound picks the packs and
    the on/off choices, starting from ``hint`` (the integer columns of a plan known to stay feasible)
    or else from the relaxation rounded (meltfix.plan.starts), and the LP with those fixed gives the
    masses: exact whole packs, minimums held exactly (not within the integrality tolerance), and the
    duals of the plan.

    (Branch and bound on the choices of only the materials the relaxation uses, widened whenever its
    answer used others, was tried and measured slower at 100 and 400 materials: with many near-alike
    materials it took more rounds than the smaller searches saved.)
    """
    shape = model.shape
    if lower is not load.col_lower or upper is not load.col_upper:  # model.load wrote the load's own
        model.set_bounds(lower, upper)
    relaxed = model.solve_lp()
    if relaxed is None:
        return None
    if not load.integer:  # nothing to round: the relaxation is the plan
        return relaxed
    point = _integer_point(shape, load, relaxed.x)
    if point is not None:
        return replace(relaxed, x=point)
    fixed = load.integrality > 0
    # A start near the relaxation (meltfix.plan.starts), or near the plan that still meets these windows.
    start = best_start(model, lower, upper, fixed, [hint] if hint is not None else roundings(model, load, relaxed.x))
    found, timed_out = model.solve_mip(deadline - time.monotonic(), options.mip_rel_gap, fixed, start)
    if found is None:
        if not timed_out:
            return None
        # No integer point in the budget: the relaxation's amounts, rounded to whole packs and
        # minimums by _additions and judged by the re-check like any plan.
        return Solution(relaxed.x, proven=False, gap=math.inf)
    point = _integer_point(shape, load, found.x)
    if point is None:  # off whole packs beyond the tolerance: _additions rounds it, the re-check judges
        return found
    polished = with_integers_fixed(model, lower, upper, fixed, np.rint(point))
    return replace(found, x=point) if polished is None else replace(polished, proven=found.proven, gap=found.gap)


def _integer_point(shape: ModelShape, load: HeatLoad, x: np.ndarray) -> np.ndarray | None:
    """``x`` as an integer point when it already has whole packs and every addition at zero or at
    least its minimum (the on/off binaries then follow the masses); None otherwise."""
    packs = x[shape.col_mat][load.packed]
    if (np.abs(packs - np.rint(packs)) > _INTEGRALITY_TOL).any():
        return None
    switchable = shape.switchable
    kg = x[shape.col_mat][switchable] * shape.scale[switchable]
    on = (kg > _INTEGRALITY_TOL) & load.switched[switchable]
    if (on & (kg < shape.min_kg[switchable] - _INTEGRALITY_TOL)).any():
        return None
    point = x.copy()
    point[shape.col_switch] = on
    return point


def _closest(model: HotModel, load: HeatLoad, bath_kg: float, deadline: float,
             options: PlanOptions) -> tuple[Solution, Solution]:
    """Elastic windows on the same hot model: least total violation first (relative to each
    limit), then cost. Returns the closest plan and the least-violation plan it started from."""
    phase1, phase2 = elastic_phases(model, load, bath_kg, options.closest_tolerance,
                                    lambda upper: _solve(model, load, load.col_lower, upper, deadline, options))
    if phase1 is None:
        raise InputError("heat", "lock_kg",
                         "no plan is possible at all: the locked amounts alone break the vessel "
                         "capacity or the temperature limit")
    # The duals of an elastic model are not the plan's: a closest plan that meets every window
    # after all has its duals from the plain model (see _duals).
    return replace(phase2 if phase2 is not None else phase1, row_dual=None, col_dual=None), phase1


def _duals(model: HotModel, load: HeatLoad, solution: Solution) -> Solution | None:
    """The duals of the LP with the integer choices fixed (None when it has none).

    A plan carries the duals of its own LP (the relaxation, or the LP with its integers fixed);
    a closest plan that met every window after all gets them here, from the plain model with the
    packs and the on/off choices fixed at the plan's values.
    """
    if solution.row_dual is not None:
        return solution
    model.load(load)  # undo anything the closest-plan phases changed
    return with_integers_fixed(model, load.col_lower, load.col_upper_all, load.integrality > 0, np.rint(solution.x))


def _bindings(shape: ModelShape, load: HeatLoad, duals: Solution, final_kg: float,
              bath_kg: float) -> tuple[Binding, ...]:
    """What one more unit of each limit is worth, read from the duals of the plan's LP."""
    if duals.row_dual is None or duals.col_dual is None:
        return ()
    # HiGHS's duals are d(cost) / d(row bound); loosening a "<=" row raises its bound.
    saving = -duals.row_dual
    bindings: list[Binding] = []
    # Loosening a limit by 0.01 wt % moves its coefficient of M by 1e-4: its right-hand side by final mass x 1e-4.
    limit_worth = saving[shape.windows.span] * final_kg * 1e-4
    for k in (limit_worth > 1e-6).nonzero()[0]:
        row = shape.window_rows[k]
        bindings.append(Binding(f"{row.element} {row.limit} {load.limit_pct[k]:g} %", float(limit_worth[k]),
                                f"0.01 % {'higher' if row.limit == 'max' else 'lower'} limit"))
    capacity = saving[shape.capacity.first] * 1000.0
    if capacity > 1e-6:
        bindings.append(Binding("vessel capacity", capacity, "1 t more free capacity", "t"))
    temperature = saving[shape.temperature.first] * bath_kg  # the row is multiplied by the bath
    if temperature > 1e-6:
        bindings.append(Binding("temperature drop limit", temperature, "1 °C more allowed drop", "degC"))
    upper_saving = -duals.col_dual[shape.col_mat] / shape.scale
    for j in (upper_saving > 1e-6).nonzero()[0]:
        # A lock is a choice, not a shortage; a pack count fixed for this LP is not the stock.
        if load.col_lower[j] != load.col_upper[j] and not load.integrality[j] > 0:
            bindings.append(Binding(f"stock of {shape.materials[j].name}", float(upper_saving[j]), "1 kg more in stock",
                                    "kg"))
    aim_worth = saving[shape.aims.span] * final_kg * 1e-4  # saving from raising each aim by 0.01 %
    for symbol, worth in zip(shape.aim_elements, aim_worth.tolist()):
        if abs(worth) > 1e-6:
            bindings.append(Binding(f"{symbol} aim", abs(worth), f"0.01 % {'higher' if worth > 0 else 'lower'} aim"))
    return tuple(sorted(bindings, key=lambda b: -b.saving))


def _additions(shape: ModelShape, load: HeatLoad, x: np.ndarray) -> tuple[list[Addition], list[tuple[Material, float]]]:
    """The plan's lines from a solver point: masses [kg] (whole packs rounded exactly, locked amounts
    as locked, every minimum held exactly), costs."""
    # Material by material in plain Python: right after a solve the dozen NumPy calls on small arrays
    # this took cost more than the loop up to ~100 materials (at 400 the loop costs ~60 us more).
    additions = []
    used: list[tuple[Material, float]] = []
    points = x[shape.col_mat].tolist()
    for (material, scale, locked_kg, packed, switched, min_kg, price), point in zip(load.lines, points):
        if not math.isnan(locked_kg):
            kg = locked_kg
        else:
            kg = (round(point) if packed else point) * scale  # whole packs exactly
            if kg <= 1e-6:
                continue
            if switched and kg < min_kg:  # the minimum read back through the solver's tolerances, or none
                kg = min_kg if kg >= min_kg * (1 - _MINIMUM_SNAP) else 0.0
        if kg > 0:
            additions.append(addition(material, kg, price, packed))
            used.append((material, kg))
    return additions, used


def plan_heat(heat: Heat, book: RecipeBook, options: PlanOptions = PlanOptions()) -> Plan:
    """Plan one heat against a recipe book (see :class:`Planner` to plan many)."""
    return Planner(book).plan(heat, options)
