"""The addition planner: the cheapest additions that bring a heat into its grade (DESIGN §2).

The problem is built once as NumPy matrices and solved with SciPy's HiGHS. The decision per
material is its mass [kg], or its number of packs when it comes in bags, bales or coils. Windows
are linear once multiplied out by the final bath mass, so the optimum is exact, not approximated:

    m_i = W c_i + sum_j Y_ij x_j,   M = W + sum_j g_j x_j,   lo_i M <= m_i <= hi_i M

When no plan meets every window, an elastic version finds the plan with the least violation
(weighted relative to each limit), then the cheapest such plan.
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy.optimize import Bounds, LinearConstraint, OptimizeResult, linprog, milp

from meltfix.cautions import plan_cautions
from meltfix.deoxidation import aluminium_owed_pct
from meltfix.elements import element_sort_key
from meltfix.errors import InputError
from meltfix.heat import Heat, usable_materials, validate_heat
from meltfix.massbalance import bath_after, temperature_drop_c
from meltfix.reasons import explain_violation
from meltfix.recipes import Grade, Material, RecipeBook

# Kilograms of element off aim -> penalty: 0.01 wt % of a bath of M kg is M/10000 kg, per tonne
# of bath that is M/1000 t, so w currency per (0.01 % x t) is exactly 10 w per kg off aim.
_AIM_PENALTY_PER_KG = 10.0
# HiGHS without its presolve: on these small models it saves nothing, its LP presolve once called a
# feasible elastic model infeasible, and its MIP presolve makes HiGHS 1.12 print a debug line
# straight to file descriptor 1 when it repairs a presolved solution, which would corrupt a running
# terminal screen (DESIGN §7). "disp" off keeps its log quiet too.
_HIGHS_OPTIONS = {"disp": False, "presolve": False}
# HiGHS's neighbourhood heuristics (RINS, RENS) and its root reduced-cost heuristic each run a
# sub-MIP; on these 20-40 column models they take about a third of the time and find nothing branch
# and bound does not (bench/plan_speed.py: 1,000 demo heats 22 s -> 15 s, the same costs). milp
# passes HiGHS options it does not list on to HiGHS verbatim, with a warning that says so.
_MIP_OPTIONS = {"mip_heuristic_run_rins": False, "mip_heuristic_run_rens": False,
                "mip_heuristic_run_root_reduced_cost": False}
# A relaxed solution this close to whole packs (and to zero or the minimum) counts as integer,
# as HiGHS's own MIP feasibility tolerance does.
_INTEGRALITY_TOL = 1e-6
LIMIT_TOL_PCT = 1e-9
"""A limit is missed only beyond float noise [wt %]: a content equal to its limit is inside. Every
module that judges a limit (plans, the hand method, replays, the odds) counts it this way."""


@dataclass(frozen=True)
class PlanOptions:
    """How to plan: the defaults are what a melt shop wants on a normal heat."""

    use_aim: bool = True
    """Pull the heat towards the grade's aims; False gives the cheapest plan inside the windows."""
    continuous: bool = False
    """Treat materials sold in packs as loose (any amount)."""
    aim_penalty: float | None = None
    """Aim weight [currency per 0.01 wt % off aim per tonne of bath]; None = the shop's setting."""
    mip_rel_gap: float = 1e-6
    """Relative optimality gap for plans with whole packs."""
    time_limit_s: float = 20.0
    closest_tolerance: float = 0.02
    """When no plan meets the grade: how much more than the least possible violation (relative)
    the closest plan may keep, when that saves cost."""


@dataclass(frozen=True)
class Addition:
    """One line of the plan."""

    material: str
    kg: float
    """Mass to add [kg]."""
    cost: float
    """kg x price [currency]."""
    packs: int | None = None
    """Number of whole packs, when the material comes in packs."""
    pack_kg: float | None = None


@dataclass(frozen=True)
class LimitCheck:
    """The predicted content against one limit of the grade."""

    element: str
    """Element symbol, or an index name such as "CEV"."""
    limit: str
    """"min" or "max"."""
    limit_pct: float
    predicted_pct: float
    margin_pct: float
    """How far inside the limit [wt %]; negative when outside."""


@dataclass(frozen=True)
class Violation:
    """A limit the closest plan still misses, with the reason in plain words."""

    element: str
    limit: str
    limit_pct: float
    predicted_pct: float
    by_pct: float
    """How far outside [wt %], always positive."""
    reason: str


@dataclass(frozen=True)
class Binding:
    """A limit that holds the plan back, and what loosening it by one unit would save."""

    name: str
    """What binds, in words ("vessel capacity", "Mn max", "stock of FeV 80")."""
    saving: float
    """Saving [currency] from one more ``unit``."""
    unit: str
    """The unit of loosening, in words ("1 t more free capacity")."""


@dataclass(frozen=True)
class Plan:
    """The planner's answer for one heat. All masses [kg], contents [wt %], costs [currency]."""

    heat_id: str
    grade: str
    status: str
    """"optimal" when every window is met, "closest" otherwise."""
    additions: tuple[Addition, ...]
    total_cost: float
    """Cost of the additions [currency] (the aim penalty is not a cost and is left out)."""
    bath_kg: float
    final_kg: float
    """Bath mass after the additions dissolve [kg]."""
    predicted_pct: Mapping[str, float]
    checks: tuple[LimitCheck, ...]
    violations: tuple[Violation, ...]
    binding: tuple[Binding, ...]
    cautions: tuple[str, ...]
    temperature_drop_c: float
    """Predicted cooling by the additions [°C] (negative = the bath warms)."""
    notes: tuple[str, ...] = ()
    currency: str = "EUR"

    @property
    def cost_per_t(self) -> float:
        """Cost per tonne of final bath [currency/t]."""
        return self.total_cost / (self.final_kg / 1000.0)

    @property
    def added_kg(self) -> float:
        return math.fsum(a.kg for a in self.additions)

    def to_json(self) -> dict[str, object]:
        """The JSON object of DESIGN §6 (numbers unrounded), with a few extra fields."""
        return {
            "heat": self.heat_id,
            "grade": self.grade,
            "status": self.status,
            "additions": [
                {"material": a.material, "kg": a.kg, "cost": a.cost, "packs": a.packs} for a in self.additions
            ],
            "total_cost": self.total_cost,
            "cost_per_t": self.cost_per_t,
            "currency": self.currency,
            "bath_kg": self.bath_kg,
            "final_kg": self.final_kg,
            "predicted": dict(self.predicted_pct),
            "violations": [
                {"element": v.element, "limit": v.limit, "limit_pct": v.limit_pct,
                 "predicted_pct": v.predicted_pct, "by": v.by_pct, "reason": v.reason}
                for v in self.violations
            ],
            "checks": [
                {"element": c.element, "limit": c.limit, "limit_pct": c.limit_pct,
                 "predicted_pct": c.predicted_pct, "margin_pct": c.margin_pct}
                for c in self.checks
            ],
            "binding": [{"name": b.name, "saving": b.saving, "unit": b.unit} for b in self.binding],
            "temperature_drop_c": self.temperature_drop_c,
            "cautions": list(self.cautions),
            "notes": list(self.notes),
        }


@dataclass(frozen=True)
class _Row:
    """One window row of the LP: label, kind and limit, for reading duals and violations back."""

    element: str
    limit: str
    limit_pct: float


@dataclass
class _Model:
    """The LP/MILP for one heat, as matrices. Variables: v (per material), d+ d- (per aim), y (binaries)."""

    materials: list[Material]
    scale: np.ndarray  # kg per unit of v (pack mass, or 1)
    packed: np.ndarray  # bool per material
    c: np.ndarray
    a_ub: np.ndarray
    b_ub: np.ndarray
    a_eq: np.ndarray
    b_eq: np.ndarray
    lb: np.ndarray
    ub: np.ndarray
    integrality: np.ndarray
    window_rows: list[_Row]  # the first len(window_rows) rows of a_ub
    capacity_row: int | None
    temperature_row: int | None
    aim_elements: list[str]
    n_materials: int
    prices: np.ndarray
    bath_kg: float
    min_kg: np.ndarray
    switched: np.ndarray  # materials with an on/off binary (a minimum addition), in binary order
    notes: list[str] = field(default_factory=list)


class Planner:
    """Plans heats against one recipe book. Build once, plan many heats."""

    def __init__(self, book: RecipeBook) -> None:
        self.book = book

    # -- building -------------------------------------------------------------------------
    def _build(self, heat: Heat, options: PlanOptions) -> _Model:
        book = self.book
        grade = book.grade(heat.grade)
        materials = usable_materials(heat, book)
        n = len(materials)
        bath = heat.bath_kg
        notes: list[str] = []

        index_terms = {s for index in grade.indices for s in index.terms}
        elements = sorted(set(grade.window_pct) | index_terms | set(grade.aim_pct), key=element_sort_key)
        row_of = {s: k for k, s in enumerate(elements)}
        # Y[i, j]: fraction of material j's mass that dissolves as element i; g[j]: total dissolving.
        yields = np.array([[m.yield_pct(s) / 100.0 for m in materials] for s in elements]).reshape(len(elements), n)
        g = np.array([m.mass_yield for m in materials])
        now = np.array([heat.analysis.get(s) / 100.0 for s in elements])
        # A value below the detection limit is at most the limit: take it at the limit against a
        # maximum and at zero against a minimum, so the plan is safe whatever the true value.
        below = np.array([s in heat.analysis.below_limit for s in elements])
        now_low = np.where(below, 0.0, now)
        # Aluminium the dissolved oxygen binds is gone before any stays in the bath: the Al row
        # starts lower by it (below 0 % is a debt the additions pay first), still linear.
        owed = aluminium_owed_pct(heat, grade)
        debt = np.array([owed.get(s, 0.0) / 100.0 for s in elements])
        now, now_low = now - debt, now_low - debt
        for s, pct in owed.items():
            notes.append(f"{bath * pct / 100.0:,.1f} kg of {s} goes to deoxidation ({heat.dissolved_o_ppm:g} ppm "
                         "dissolved O bound as Al2O3) before any stays in the bath; the heat of that reaction is "
                         "not credited to the temperature")
        if heat.dissolved_o_ppm and not owed:
            notes.append(f"the dissolved O reading is not used: grade {grade.name} sets no Al window")
        for s in grade.window_pct:
            if s not in heat.analysis.pct:
                notes.append(f"{s} is not in the analysis and is taken as 0 %")

        prices = np.array([heat.material_price_per_kg(m) for m in materials])
        stock = np.array([_or_inf(heat.material_stock_kg(m)) for m in materials])
        locked = np.array([m.name in heat.locked_kg for m in materials], dtype=bool)  # bool even when empty
        lock_kg = np.array([heat.locked_kg.get(m.name, 0.0) for m in materials])
        pack = np.array([m.pack_kg or 0.0 for m in materials])
        packed = (pack > 0) & ~locked & (not options.continuous)
        scale = np.where(packed, pack, 1.0)
        min_kg = np.array([m.min_kg for m in materials])
        needs_switch = (min_kg > 0) & ~locked
        chill = np.array([m.chill_per_kg_t for m in materials])

        rows: list[np.ndarray] = []
        rhs: list[float] = []
        window_rows: list[_Row] = []

        def add_limit(label: str, coeff: np.ndarray, level_low: float, level_high: float,
                      low: float | None, high: float | None) -> None:
            # coeff: dissolved fraction of the quantity per kg of each material; level: W-scaled now.
            if low is not None:
                rows.append(-(coeff - low / 100.0 * g))
                rhs.append(bath * (level_low - low / 100.0))
                window_rows.append(_Row(label, "min", low))
            if high is not None:
                rows.append(coeff - high / 100.0 * g)
                rhs.append(bath * (high / 100.0 - level_high))
                window_rows.append(_Row(label, "max", high))

        for symbol, (low, high) in grade.window_pct.items():
            k = row_of[symbol]
            # A content cannot go below 0 % or above 100 %: such a limit is no row. (An index can:
            # Mn - 20 S >= 0 is a real limit, so its limits are always rows.)
            # ... except an element that starts in debt to deoxidation: its 0 % floor must be reached.
            add_limit(symbol, yields[k], now_low[k], now[k], low if low > 0 or symbol in owed else None,
                      high if high < 100 else None)
        for index in grade.indices:
            weights = np.array([index.terms.get(s, 0.0) for s in elements])
            # A negative weight (a ratio such as Mn - 20 S) flips which end of a below-limit
            # reading is the safe one: the least index for its minimum, the most for its maximum.
            least = np.where(weights > 0, now_low, now)
            most = np.where(weights > 0, now, now_low)
            add_limit(index.name, weights @ yields, float(weights @ least), float(weights @ most),
                      index.min_value, index.max_value)

        capacity_row = temperature_row = None
        if heat.capacity_kg is not None:
            capacity_row = len(rows)
            rows.append(g.copy())
            rhs.append(heat.capacity_kg - bath)
        max_drop = heat.drop_limit_c(book.settings)
        if max_drop is not None:
            temperature_row = len(rows)
            rows.append(chill * 1000.0 / bath)
            rhs.append(max_drop)

        # An element the grade does not limit may still not be raised at will: without this guard
        # the optimiser would use aluminium, copper or ferrosilicon as a cheap diluent or heater.
        unlisted = sorted({s for m in materials for s in m.composition_pct if s != "Fe"} - set(grade.window_pct),
                          key=element_sort_key)
        rise = book.settings.max_unlisted_rise_pct / 100.0
        if unlisted:
            unlisted_yields = np.array([[m.yield_pct(s) / 100.0 for m in materials] for s in unlisted])
            unlisted_now = np.array([heat.analysis.get(s) / 100.0 for s in unlisted])
            rows.extend(unlisted_yields - (unlisted_now + rise)[:, None] * g)
            rhs.extend(np.full(len(unlisted), bath * rise))

        aim_elements = [s for s in grade.aim_pct if options.use_aim]
        n_aim = len(aim_elements)
        switch_idx = np.flatnonzero(needs_switch)
        n_y = len(switch_idx)
        n_vars = n + 2 * n_aim + n_y

        # Materials -> v columns (x = scale * v).
        a_ub = np.zeros((len(rows) + 2 * n_y, n_vars))
        if rows:
            a_ub[: len(rows), :n] = np.vstack(rows) * scale
        b_ub = np.zeros(len(rows) + 2 * n_y)
        b_ub[: len(rows)] = rhs
        # Minimum sensible addition: x = 0 or min <= x <= U, with a binary y per such material.
        upper_kg = np.minimum(stock, 10.0 * bath)
        if heat.capacity_kg is not None:
            upper_kg = np.minimum(upper_kg, (heat.capacity_kg - bath) / np.maximum(g, 1e-9))
        for t, j in enumerate(switch_idx):
            r0 = len(rows) + 2 * t
            col = n + 2 * n_aim + t
            a_ub[r0, j], a_ub[r0, col] = -scale[j], min_kg[j]
            a_ub[r0 + 1, j], a_ub[r0 + 1, col] = scale[j], -max(upper_kg[j], min_kg[j])

        a_eq = np.zeros((n_aim, n_vars))
        b_eq = np.zeros(n_aim)
        for t, symbol in enumerate(aim_elements):
            k = row_of[symbol]
            aim = grade.aim_pct[symbol] / 100.0
            a_eq[t, :n] = (yields[k] - aim * g) * scale
            a_eq[t, n + t] = -1.0
            a_eq[t, n + n_aim + t] = 1.0
            b_eq[t] = -bath * (now[k] - aim)

        penalty = options.aim_penalty if options.aim_penalty is not None else book.settings.aim_penalty
        c = np.concatenate([prices * scale, np.full(2 * n_aim, _AIM_PENALTY_PER_KG * penalty), np.zeros(n_y)])
        lb = np.zeros(n_vars)
        ub = np.full(n_vars, np.inf)
        ub[:n] = np.where(packed, np.floor(stock / np.where(packed, pack, 1.0) + 1e-9), stock)
        lb[:n] = np.where(locked, lock_kg, 0.0)
        ub[:n] = np.where(locked, lock_kg, ub[:n])
        ub[n + 2 * n_aim:] = 1.0
        integrality = np.zeros(n_vars)
        integrality[:n] = packed
        integrality[n + 2 * n_aim:] = 1

        return _Model(materials, scale, packed, c, a_ub, b_ub, a_eq, b_eq, lb, ub, integrality, window_rows,
                      capacity_row, temperature_row, aim_elements, n, prices, bath, min_kg, switch_idx, notes)

    # -- solving --------------------------------------------------------------------------
    def plan(self, heat: Heat, options: PlanOptions = PlanOptions()) -> Plan:
        """Plan one heat. Raises InputError when the heat does not fit the recipe book."""
        validate_heat(heat, self.book)
        model = self._build(heat, options)
        solution, duals = _solve_model(model, model.c, model.a_ub, model.b_ub, model.a_eq, model.b_eq,
                                       model.lb, model.ub, options)
        status, least = "optimal", None
        if solution is None:
            status = "closest"
            solution, least = self._closest(model, options)
        return self._result(heat, model, solution, status, options, duals, least)

    def _closest(self, model: _Model, options: PlanOptions) -> tuple[np.ndarray, np.ndarray]:
        """Elastic windows: least total violation first (relative to each limit), then cost.

        Returns the closest plan and the least-violation plan it started from (the reasons for a
        miss are read from the latter: it shows which limit stops the heat getting closer)."""
        n_rows = len(model.window_rows)
        n_vars = len(model.c)
        slack = np.zeros((model.a_ub.shape[0], n_rows))
        slack[np.arange(n_rows), np.arange(n_rows)] = -1.0
        a_ub = np.hstack([model.a_ub, slack])
        a_eq = np.hstack([model.a_eq, np.zeros((model.a_eq.shape[0], n_rows))])
        lb = np.concatenate([model.lb, np.zeros(n_rows)])
        ub = np.concatenate([model.ub, np.full(n_rows, np.inf)])
        # Violation weight: kilograms outside a limit relative to the limit's own mass in the bath,
        # so 0.01 % over a 0.02 % limit counts far more than 0.01 % over a 1.5 % one.
        limit_kg = np.array([max(row.limit_pct, 1e-3) / 100.0 for row in model.window_rows]) * model.bath_kg
        weights = 1.0 / limit_kg
        first = np.concatenate([np.zeros(n_vars), weights])
        phase1, _ = _solve_model(model, first, a_ub, model.b_ub, a_eq, model.b_eq, lb, ub, options)
        if phase1 is None:
            raise InputError("heat", "lock_kg",
                             "no plan is possible at all: the locked amounts alone break the vessel "
                             "capacity or the temperature limit")
        violation = weights * phase1[n_vars:]
        least = float(violation.sum())
        cap_row = np.concatenate([np.zeros(n_vars), weights])
        a_ub2 = np.vstack([a_ub, cap_row])
        # Slack on the least violation keeps phase 2 from buying alloys and scrap by the tonne only
        # to shave a hopeless excess (S at 0.56 % against 0.050 %) by a hundredth of a per cent:
        # the closest plan may miss by options.closest_tolerance more than the least possible
        # (plus 1e-4 = 0.01 % of a limit's mass, so a near-zero least is not chased either).
        b_ub2 = np.append(model.b_ub, least * (1 + options.closest_tolerance) + 1e-4)
        # The hair is for the limits that cannot be met: one that phase 1 met stays met, or the
        # cheaper plan would miss it by a hair and blame it on a reason that is not true.
        ub2 = ub.copy()
        ub2[n_vars:][violation <= 1e-9] = 0.0
        second = np.concatenate([model.c, np.zeros(n_rows)])
        phase2, _ = _solve_model(model, second, a_ub2, b_ub2, a_eq, model.b_eq, lb, ub2, options)
        return (phase2 if phase2 is not None else phase1)[:n_vars], phase1[:n_vars]

    def _result(self, heat: Heat, model: _Model, solution: np.ndarray, status: str,
                options: PlanOptions, duals: OptimizeResult | None, least: np.ndarray | None = None) -> Plan:
        book = self.book
        grade = book.grade(heat.grade)
        additions, used = _additions(model, solution)
        final_kg, predicted, checks = recheck(heat, grade, used)
        drop = temperature_drop_c(heat.bath_kg, used) if used else 0.0
        drop_limit = heat.drop_limit_c(book.settings)
        violations: list[Violation] = []
        if status == "closest":
            least_used = _additions(model, least)[1] if least is not None else used
            least_final_kg = recheck(heat, grade, least_used)[0]
            least_drop = temperature_drop_c(heat.bath_kg, least_used) if least_used else 0.0
            for check in checks:
                if check.margin_pct < -LIMIT_TOL_PCT:
                    reason = explain_violation(check.element, check.limit, heat, book, model.materials,
                                               least_used, least_final_kg, model.packed.any() and not options.continuous,
                                               least_drop, drop_limit)
                    violations.append(Violation(check.element, check.limit, check.limit_pct,
                                                check.predicted_pct, -check.margin_pct, reason))
            if not violations:
                status = "optimal"  # the elastic solution met every window after rounding
        binding = self._sensitivity(model, solution, final_kg, duals) if status == "optimal" else ()
        cautions = plan_cautions(used, heat.bath_kg, drop, heat.temperature_c, book.settings)
        return Plan(
            heat_id=heat.heat_id,
            grade=heat.grade,
            status=status,
            additions=tuple(additions),
            total_cost=float(math.fsum(a.cost for a in additions)),
            bath_kg=heat.bath_kg,
            final_kg=final_kg,
            predicted_pct=predicted,
            checks=checks,
            violations=tuple(violations),
            binding=binding,
            cautions=cautions,
            temperature_drop_c=drop,
            notes=tuple(model.notes),
            currency=book.settings.currency,
        )

    def _sensitivity(self, model: _Model, solution: np.ndarray, final_kg: float,
                     result: OptimizeResult | None) -> tuple[Binding, ...]:
        """Duals of the LP with the integer choices fixed: what one more unit of each limit is worth.

        ``result`` is the LP already solved when its optimum needed no integer choice; otherwise the
        LP is solved here with the packs and the on/off choices fixed at the plan's values.
        """
        fixed = model.integrality > 0
        if result is None:
            lb, ub = model.lb.copy(), model.ub.copy()
            lb[fixed] = ub[fixed] = np.round(solution[fixed])
            result = _solve_lp(model.c, model.a_ub, model.b_ub, model.a_eq, model.b_eq, lb, ub)
            if result is None:
                return ()
        bindings: list[Binding] = []
        duals = -np.asarray(result.ineqlin.marginals)
        for k, row in enumerate(model.window_rows):
            # Loosening a limit by 0.01 wt % moves its right-hand side by final mass x 1e-4.
            worth = duals[k] * final_kg * 1e-4
            if worth > 1e-6:
                bindings.append(Binding(f"{row.element} {row.limit} {row.limit_pct:g} %", worth,
                                        f"0.01 % {'higher' if row.limit == 'max' else 'lower'} limit"))
        if model.capacity_row is not None and duals[model.capacity_row] * 1000 > 1e-6:
            bindings.append(Binding("vessel capacity", duals[model.capacity_row] * 1000.0, "1 t more free capacity"))
        if model.temperature_row is not None and duals[model.temperature_row] > 1e-6:
            bindings.append(Binding("temperature drop limit", duals[model.temperature_row], "1 °C more allowed drop"))
        upper = -np.asarray(result.upper.marginals)[: model.n_materials] / model.scale
        for j in np.flatnonzero(upper > 1e-6):
            # A lock is a choice, not a shortage; a pack count fixed for this LP is not the stock.
            if model.lb[j] != model.ub[j] and not fixed[j]:
                bindings.append(Binding(f"stock of {model.materials[j].name}", float(upper[j]), "1 kg more in stock"))
        if model.aim_elements and model.a_eq.size:
            eq_duals = np.asarray(result.eqlin.marginals)
            for t, symbol in enumerate(model.aim_elements):
                worth = -eq_duals[t] * final_kg * 1e-4  # saving from raising the aim by 0.01 %
                if abs(worth) > 1e-6:
                    direction = "higher" if worth > 0 else "lower"
                    bindings.append(Binding(f"{symbol} aim", abs(worth), f"0.01 % {direction} aim"))
        return tuple(sorted(bindings, key=lambda b: -b.saving))


def _additions(model: _Model, solution: np.ndarray) -> tuple[list[Addition], list[tuple[Material, float]]]:
    """The plan's lines from a solver point: masses [kg] (whole packs rounded exactly), costs."""
    n = model.n_materials
    kg = np.where(solution[:n] * model.scale > 1e-6, solution[:n] * model.scale, 0.0)
    if np.any(model.packed):
        kg = np.where(model.packed, np.round(solution[:n]) * model.scale, kg)
    additions = []
    used: list[tuple[Material, float]] = []
    for j in np.flatnonzero(kg > 0):
        material = model.materials[j]
        additions.append(addition(material, float(kg[j]), float(model.prices[j]), bool(model.packed[j])))
        used.append((material, float(kg[j])))
    return additions, used


def addition(material: Material, kg: float, price_per_kg: float, packed: bool) -> Addition:
    """A plan line for ``kg`` [kg] of ``material`` at ``price_per_kg`` [currency/kg]; ``packed``: the
    amount is counted in whole packs (a loose, locked or continuous amount is not)."""
    packs = int(round(kg / material.pack_kg)) if packed and material.pack_kg else None
    return Addition(material.name, kg, kg * price_per_kg, packs, material.pack_kg if packs is not None else None)


def _or_inf(value: float | None) -> float:
    return math.inf if value is None else value


def _solve_lp(c: np.ndarray, a_ub: np.ndarray, b_ub: np.ndarray, a_eq: np.ndarray, b_eq: np.ndarray,
              lb: np.ndarray, ub: np.ndarray) -> OptimizeResult | None:
    """The LP (integrality ignored) with HiGHS, duals included. None = infeasible."""
    if not len(c):  # every material switched off and no aim: the plan is "add nothing", if that fits
        fits = bool(np.all(b_ub >= -1e-9) and np.all(np.abs(b_eq) <= 1e-9))
        none = OptimizeResult(marginals=np.zeros(0))
        return OptimizeResult(x=np.zeros(0), fun=0.0, ineqlin=OptimizeResult(marginals=np.zeros(len(b_ub))),
                              eqlin=OptimizeResult(marginals=np.zeros(len(b_eq))), upper=none) if fits else None
    result = linprog(c, A_ub=a_ub if a_ub.size else None, b_ub=b_ub if a_ub.size else None,
                     A_eq=a_eq if a_eq.size else None, b_eq=b_eq if a_eq.size else None,
                     bounds=np.column_stack([lb, ub]), method="highs", options=_HIGHS_OPTIONS)
    return result if result.status == 0 else None


def _solve_model(model: _Model, c: np.ndarray, a_ub: np.ndarray, b_ub: np.ndarray, a_eq: np.ndarray,
                 b_eq: np.ndarray, lb: np.ndarray, ub: np.ndarray,
                 options: PlanOptions) -> tuple[np.ndarray | None, OptimizeResult | None]:
    """Solve the model's problem (or its elastic version, with columns added after the model's).

    The LP relaxation comes first (DESIGN §7): it is a fraction of the integer solve's time, proves
    infeasibility on its own, and when its optimum already has whole packs and no addition under its
    minimum it is the integer optimum. Returns (solution, the LP result when the relaxation
    sufficed, for its duals); (None, None) when infeasible.
    """
    relaxed = _solve_lp(c, a_ub, b_ub, a_eq, b_eq, lb, ub)
    if relaxed is None:
        return None, None
    point = _integer_point(model, relaxed.x)
    if point is not None:
        return point, relaxed
    integrality = np.zeros(len(c))  # the elastic slacks, after the model's columns, are continuous
    integrality[: len(model.integrality)] = model.integrality
    return _solve_mip(c, a_ub, b_ub, a_eq, b_eq, lb, ub, integrality, options), None


def _integer_point(model: _Model, x: np.ndarray) -> np.ndarray | None:
    """An LP solution as an integer point when it already has whole packs and every addition at
    zero or at least its minimum (the on/off binaries then follow the masses); None otherwise."""
    packs = x[: model.n_materials][model.packed]
    if np.any(np.abs(packs - np.round(packs)) > _INTEGRALITY_TOL):
        return None
    kg = x[model.switched] * model.scale[model.switched]
    on = kg > _INTEGRALITY_TOL
    if np.any(on & (kg < model.min_kg[model.switched] - _INTEGRALITY_TOL)):
        return None
    point = x.copy()
    first = model.n_materials + 2 * len(model.aim_elements)
    point[first: first + len(on)] = on
    return point


def _solve_mip(c: np.ndarray, a_ub: np.ndarray, b_ub: np.ndarray, a_eq: np.ndarray, b_eq: np.ndarray,
               lb: np.ndarray, ub: np.ndarray, integrality: np.ndarray, options: PlanOptions) -> np.ndarray | None:
    """Solve with HiGHS's branch and bound (scipy.optimize.milp). None = infeasible or no solution in time."""
    constraints = []
    if a_ub.size:
        constraints.append(LinearConstraint(a_ub, -np.inf, b_ub))
    if a_eq.size:
        constraints.append(LinearConstraint(a_eq, b_eq, b_eq))
    # SciPy passes the heuristic switches on to HiGHS but warns that it does not know them.
    with warnings.catch_warnings():
        warnings.filterwarnings("ignore", message=r"Unrecognized options detected: \{'mip_heuristic_run_")
        result = milp(c, constraints=constraints, integrality=integrality, bounds=Bounds(lb, ub),
                      options={**_HIGHS_OPTIONS, **_MIP_OPTIONS, "mip_rel_gap": options.mip_rel_gap,
                               "time_limit": options.time_limit_s})
    return result.x if result.x is not None and result.status in (0, 1) else None


def recheck(heat: Heat, grade: Grade, used: Sequence[tuple[Material, float]]
            ) -> tuple[float, dict[str, float], tuple[LimitCheck, ...]]:
    """Final bath [kg], predicted analysis [wt %] and the grade's checks after ``used`` (material, kg),
    by the plain mass balance: the plan's own re-check, also against a grade other than the one
    planned for (robust mode plans to tightened windows and reports against the real ones)."""
    owed = aluminium_owed_pct(heat, grade)
    final_kg, predicted = bath_after(heat.bath_kg, heat.analysis.pct, used, owed)
    # Against a minimum a below-limit reading counts as 0, as in the plan's own rows, so a
    # closest plan reports the shortfall it was planned against.
    lowest = predicted
    if heat.analysis.below_limit:
        lowest = bath_after(heat.bath_kg, heat.analysis.lowest_pct, used, owed)[1]
    return final_kg, predicted, limit_checks(grade, predicted, lowest, floors=frozenset(owed))


def limit_checks(grade: Grade, predicted: Mapping[str, float],
                  lowest: Mapping[str, float] | None = None, floors: frozenset[str] = frozenset()
                  ) -> tuple[LimitCheck, ...]:
    """Every limit of the grade against the predicted analysis; ``lowest`` (default: the same) has
    below-limit readings at 0 and is used wherever the low end is the safe one (minimums, negative
    weights). A window minimum of 0 is checked only for the elements in ``floors`` (those in debt to
    deoxidation, which can end below 0 %)."""
    lowest = predicted if lowest is None else lowest
    checks = []
    for symbol, (low, high) in grade.window_pct.items():
        if low > 0 or symbol in floors:
            value = lowest.get(symbol, 0.0)
            checks.append(LimitCheck(symbol, "min", low, value, value - low))
        value = predicted.get(symbol, 0.0)
        checks.append(LimitCheck(symbol, "max", high, value, high - value))
    for index in grade.indices:
        if index.min_value is not None:
            value = index.value({s: (lowest if w > 0 else predicted).get(s, 0.0) for s, w in index.terms.items()})
            checks.append(LimitCheck(index.name, "min", index.min_value, value, value - index.min_value))
        if index.max_value is not None:
            value = index.value({s: (predicted if w > 0 else lowest).get(s, 0.0) for s, w in index.terms.items()})
            checks.append(LimitCheck(index.name, "max", index.max_value, value, index.max_value - value))
    return tuple(checks)


def plan_heat(heat: Heat, book: RecipeBook, options: PlanOptions = PlanOptions()) -> Plan:
    """Plan one heat against a recipe book (see :class:`Planner` to plan many)."""
    return Planner(book).plan(heat, options)
