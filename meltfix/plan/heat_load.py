"""What one heat writes into a model (meltfix.plan.plan_model): bounds, costs, integrality and the few
coefficients that move with the heat, worked out from the heat, the recipe book and the model's shape.

Read top to bottom: the analysis as the rows see it, the row bounds, each material on this heat,
the column bounds, the on/off rows, and last the materials no cheapest plan needs (meltfix.plan.dominance),
shut before solving.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from meltfix.plan.deoxidation import oxygen_notes
from meltfix.plan.dominance import HeatMaterials, dominated, most_kg
from meltfix.plan.numbers import content_text, degrees_text, mass_text, temperature_text
from meltfix.plan.plan_model import AIM_PENALTY_PER_KG, ModelShape
from meltfix.plan.result import Addition
from meltfix.plan.treatment import (contents_owed_pct, magnesium_fade_pct, magnesium_for_sulphur_pct, nodulariser_kg,
                                    unbound_sulphur_pct)
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material

_INF = math.inf
Line = tuple[Material, float, float, bool, bool, float, float]
"""One material on one heat in plain Python values: (material, kg per column unit, locked kg or
NaN, counted in packs, switched, minimum kg, price): a plan's lines read these material by material,
where converting the arrays each heat took a NumPy call apiece right after the solve."""


# Built once per heat: its __init__ writes the instance's __dict__ directly, where the generated
# one calls object.__setattr__ per field (about 4 -> 1.5 us for these 19). eq=False: it holds arrays,
# whose == has no single truth value.
@dataclass(frozen=True, eq=False, init=False)
class HeatLoad:
    """What one heat writes into a model: bounds, costs, integrality and the few moving coefficients."""

    col_lower: np.ndarray
    col_upper: np.ndarray
    """With the dominated materials shut (meltfix.plan.dominance): for the model with its windows kept."""
    col_upper_all: np.ndarray
    """Every usable material open: for the closest-plan phases, whose windows are elastic."""
    cost: np.ndarray
    row_lower: np.ndarray
    row_upper: np.ndarray
    integrality: np.ndarray
    """1 for an integer column, 0 for a continuous one."""
    coefficients: tuple[tuple[int, int, float], ...]
    """(row, column, value) changes on top of the shape's fixed matrix."""
    integer: bool
    """Whether this heat has any whole packs or on/off choice at all (else its plan is one LP)."""
    packed: np.ndarray
    """Per material: counted in whole packs on this heat (not locked, not --continuous)."""
    switched: np.ndarray
    """Per material: has an on/off choice on this heat (a minimum addition, not locked)."""
    lines: tuple[Line, ...]
    """Per material, what reading a solver point back takes (meltfix.plan.planner's plan lines): its
    lock and price among them."""
    active: np.ndarray
    """Per window row: the limit applies on this heat (a 0 % floor applies only to a deoxidation debt)."""
    can_use: np.ndarray
    """Per material: this heat may receive it (allowed at the stage, not switched off, not forbidden)."""
    pruned: np.ndarray
    """Per material: dominated on this heat, so shut in ``col_upper``."""
    grade: Grade
    """The grade planned to: the model's own, or one with its limits moved (the odds search's insets)."""
    limit_pct: np.ndarray
    """Per window row: the limit in ``grade``."""
    mass_coefficients: np.ndarray
    """Per window row: its coefficient of the final bath mass M, the limit as a fraction (signed)."""
    notes: tuple[str, ...]

    def __init__(self, col_lower: np.ndarray, col_upper: np.ndarray, col_upper_all: np.ndarray, cost: np.ndarray,
                 row_lower: np.ndarray, row_upper: np.ndarray, integrality: np.ndarray,
                 coefficients: tuple[tuple[int, int, float], ...], integer: bool, packed: np.ndarray,
                 switched: np.ndarray, lines: tuple[Line, ...], active: np.ndarray, can_use: np.ndarray,
                 pruned: np.ndarray, grade: Grade, limit_pct: np.ndarray, mass_coefficients: np.ndarray,
                 notes: tuple[str, ...]) -> None:
        fields = self.__dict__
        fields["col_lower"], fields["col_upper"], fields["col_upper_all"], fields["cost"] = (
            col_lower, col_upper, col_upper_all, cost)
        fields["row_lower"], fields["row_upper"], fields["integrality"], fields["coefficients"] = (
            row_lower, row_upper, integrality, coefficients)
        fields["integer"], fields["packed"], fields["switched"] = integer, packed, switched
        fields["lines"], fields["active"], fields["can_use"], fields["pruned"], fields["grade"] = (
            lines, active, can_use, pruned, grade)
        fields["limit_pct"], fields["mass_coefficients"], fields["notes"] = limit_pct, mass_coefficients, notes


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
class _Columns:
    """One heat's view of the book's materials, one entry per material column, and the column
    bounds, costs and integrality that follow from it: the same for every heat with the same
    overrides (prices, stock, locks, materials switched off), so worked out once for them
    (``_columns_of``) and shared, read only."""

    prices: np.ndarray
    stock: np.ndarray
    """[kg], inf = unlimited."""
    locked_kg: np.ndarray
    """NaN where not locked."""
    can_use: np.ndarray
    packed: np.ndarray
    switched: np.ndarray
    col_lower: np.ndarray
    col_upper: np.ndarray
    """Every usable material open (see ``HeatLoad.col_upper_all``)."""
    cost: np.ndarray
    """The arc heating's aside (it moves with the bath)."""
    integrality: np.ndarray
    integer: bool
    """Any whole packs or on/off choice (``HeatLoad.integer``)."""
    lines: tuple[Line, ...]


def load_of(shape: ModelShape, heat: Heat, aim_penalty: float, prune: bool = True,
            grade: Grade | None = None) -> HeatLoad:
    """Bounds, costs and moving coefficients for ``heat``, planned to ``grade`` (the model's own when
    None; else one with the same limits moved); ``prune`` shuts the dominated materials (off only to
    check that pruning changes no plan's cost)."""
    notes: list[str] = []
    low, now, unlisted_now, owed = _analysis_now(shape, heat, notes)
    if grade is None:
        grade, limit_pct, mass_coefficients, active = (shape.grade, shape.limit_pct, shape.own_mass_coefficients,
                                                       shape.own_applies)
    else:
        limit_pct = shape.limits_pct(grade)
        mass_coefficients = shape.mass_coefficients(limit_pct)
        active = shape.applies(limit_pct)
    row_lower, row_upper = shape.open_rows[0].copy(), shape.open_rows[1].copy()
    if owed:  # a 0 % floor binds an element in debt
        active = active | np.array([row.element in owed for row in shape.window_rows], dtype=bool)
    upper = heat.bath_kg * shape.window_bounds.dot(np.array(low + now))  # dot: the same product, a step cheaper than @
    np.copyto(row_upper[shape.windows.span], upper, where=active)
    coefficients, reheat_cost = _row_bounds(shape, heat, now, unlisted_now, row_lower, row_upper, notes)
    columns = _columns_of(shape, heat, aim_penalty)
    col_lower, col_upper = columns.col_lower, columns.col_upper
    col_upper_all = col_upper
    pruned = shape.no_materials
    pruning = prune and not shape.pairs.empty
    if shape.switchable.size or pruning:  # else (no minimums, no materials alike) nothing reads the most
        most = _most_kg(shape, heat, columns)
        if shape.switchable.size:  # no minimums (loose amounts, the relaxation): no on/off rows
            _switch_rows(shape, columns, most, row_upper, coefficients)
        if pruning:
            # The room left on each window row, per the rows' coefficients with M's growth counted in.
            room = row_upper[shape.windows.span] - heat.bath_kg * mass_coefficients
            pruned = _dominated(shape, heat, columns, col_upper, shape.window_per_kg(mass_coefficients), room,
                                row_upper[shape.capacity.first], most)
            col_upper = col_upper.copy()
            col_upper[shape.col_mat][pruned] = 0.0
            col_upper[shape.col_switch][pruned[shape.switchable]] = 0.0
    cost = columns.cost
    if reheat_cost:  # the arc heating's cost moves with the bath; at a stage that cannot reheat it is 0, as shared
        cost = cost.copy()
        cost[shape.col_reheat] = reheat_cost
    return HeatLoad(col_lower, col_upper, col_upper_all, cost, row_lower, row_upper, columns.integrality,
                    tuple(coefficients), columns.integer, columns.packed, columns.switched, columns.lines, active,
                    columns.can_use, pruned, grade, limit_pct, mass_coefficients, tuple(notes))


def _analysis_now(shape: ModelShape, heat: Heat, notes: list[str]
                  ) -> tuple[list[float], list[float], list[float], dict[str, float]]:
    """The analysis as the rows read it, as fractions: over the model's elements with below-limit
    readings at 0 and as read, over the elements the grade does not limit, and the contents owed
    to deoxidation and treatment (notes say what these took). In Python floats: the same arithmetic
    as NumPy's, and on a few dozen values cheaper than a NumPy step each."""
    pct = heat.analysis.pct
    now = [pct.get(s, 0.0) / 100.0 for s in shape.elements]
    unlisted_now = [pct.get(s, 0.0) / 100.0 for s in shape.unlisted]
    # A value below the detection limit is at most the limit: take it at the limit against a
    # maximum and at zero against a minimum, so the plan is safe whatever the true value.
    low = now.copy()
    for symbol in heat.analysis.below_limit:
        if symbol in shape.row_of:
            low[shape.row_of[symbol]] = 0.0
    # Aluminium the dissolved oxygen binds, and magnesium the sulphur binds and fade takes, are
    # gone before any stays in the bath: the row starts lower by them (below 0 % is a debt the
    # additions pay first), still linear.
    owed = dict(contents_owed_pct(heat, shape.grade, shape.book.settings))
    if owed:
        debt = [owed.get(s, 0.0) / 100.0 for s in shape.elements]
        now, low = [v - d for v, d in zip(now, debt)], [v - d for v, d in zip(low, debt)]
        notes += oxygen_notes(heat, shape.grade, {s: pct for s, pct in owed.items() if s == "Al"}, shape.book.settings.units)
        if "Mg" in owed:
            notes.append(_treatment_note(shape, heat))
    elif heat.dissolved_o_ppm:
        notes += oxygen_notes(heat, shape.grade, {}, shape.book.settings.units)
    return low, now, unlisted_now, owed


def _row_bounds(shape: ModelShape, heat: Heat, now: list[float], unlisted_now: list[float], row_lower: np.ndarray,
                row_upper: np.ndarray, notes: list[str]) -> tuple[list[tuple[int, int, float]], float]:
    """The bounds of every row but the windows and the on/off rows; returns the moving coefficients
    and the arc heating's cost [currency per °C]."""
    settings, bath = shape.book.settings, heat.bath_kg
    if heat.capacity_kg is not None:
        row_upper[shape.capacity.first] = heat.capacity_kg - bath
    max_drop = heat.drop_limit_c(settings)
    if max_drop is not None:
        row_upper[shape.temperature.first] = max_drop * bath
    reheat_cost, superheat = _temperature_load(shape, heat, row_lower, notes)
    row_lower[shape.mass.first] = row_upper[shape.mass.first] = -bath
    row_upper[shape.unlisted_rows.span] = [-bath * fraction for fraction in unlisted_now]
    rise, col_mass = settings.max_unlisted_rise_pct / 100.0, shape.col_mass
    # Floored so that HiGHS, which deletes a coefficient set to 0, keeps the matrix's structure:
    # the same heat then gives the same plan to the last digit on a new model and a used one.
    # (max() written out: -max(x, 1e-8), a builtin call per row that cost more than the row.)
    coefficients = [(row, col_mass, -1e-8 if 1e-8 > fraction + rise else -(fraction + rise))
                    for row, fraction in zip(shape.unlisted_rows.rows, unlisted_now)]
    coefficients += [(shape.temperature.first, shape.col_reheat, -bath),
                     (shape.superheat.first, shape.col_reheat, bath),
                     (shape.superheat.first, shape.col_mass, superheat)]
    if shape.aim_fractions:
        aims = [-bath * (now[k] - aim) for k, aim in shape.aim_fractions]
        row_lower[shape.aims.span] = row_upper[shape.aims.span] = aims
    return coefficients, reheat_cost


def _temperature_load(shape: ModelShape, heat: Heat, row_lower: np.ndarray, notes: list[str]
                      ) -> tuple[float, float]:
    """The heat's arc heating cost [currency per °C] and the superheat row: its lower bound goes in
    ``row_lower``; returns also the row's coefficient of M (T0 - S - base)."""
    settings = shape.book.settings
    reheat_max_c, reheat_cost = _reheat_max_c(shape, heat.stage), 0.0
    if reheat_max_c > 0:
        reheat_cost = settings.stages[heat.stage].reheat_cost_per_c * heat.bath_kg / 1000.0
    if heat.temperature_c is None:
        return reheat_cost, 1.0  # no reading: the row stays open (a placeholder)
    superheat = settings.superheat_c
    # Below-limit readings at 0: the safe end for a liquidus (less solute, a higher liquidus).
    analysis = heat.analysis
    now_liquidus = shape.liquidus.liquidus_c(analysis.lowest_pct if analysis.below_limit else analysis.pct)
    lower = -heat.bath_kg * (shape.liquidus.base_c - now_liquidus)
    # A bath already short of liquidus + superheat may not get worse (nor is adding nothing made
    # impossible): what the heating cannot make up is forgiven, and said.
    short_c = now_liquidus + superheat - heat.temperature_c - reheat_max_c
    if short_c > 0:
        lower -= heat.bath_kg * short_c
        units = settings.units
        notes.append(f"the bath is {degrees_text(now_liquidus + superheat - heat.temperature_c, units)} short of "
                     f"liquidus {temperature_text(now_liquidus, units)} + superheat {degrees_text(superheat, units)} "
                     "already; the plan may not make it worse")
    row_lower[shape.superheat.first] = lower
    coefficient = heat.temperature_c - superheat - shape.liquidus.base_c
    # Floored away from 0 so HiGHS keeps the matrix's structure (it deletes a 0 coefficient).
    return reheat_cost, coefficient if abs(coefficient) > 1e-8 else 1e-8


def _reheat_max_c(shape: ModelShape, stage_name: str) -> float:
    """The most arc heating the stage can buy [°C]; 0 where it cannot reheat."""
    stage = shape.book.settings.stages.get(stage_name)
    return stage.reheat_max_c if stage is not None and stage.can_reheat else 0.0


def _treatment_note(shape: ModelShape, heat: Heat) -> str:
    """How many kg of magnesium go to MgS and to fade, and what that takes of the richest
    nodulariser in the book."""
    settings = shape.book.settings
    bath = heat.bath_kg
    s_pct = unbound_sulphur_pct(heat)  # the S the Mg read has bound already is not charged again
    to_sulphide = bath * magnesium_for_sulphur_pct(s_pct) / 100.0
    to_fade = bath * magnesium_fade_pct(settings) / 100.0
    unbound = "" if s_pct == heat.analysis.get("S") else " not yet bound by the Mg read"
    units = settings.units
    note = (f"{mass_text(to_sulphide, units)} of Mg goes to MgS (S {content_text('S', s_pct)} %{unbound}) and "
            f"{mass_text(to_fade, units)} to fade "
            f"({settings.treatment_to_pour_min:g} min to pour at {settings.mg_fade_pct_per_min:g} % per min) "
            "before any stays in the bath")
    carriers = [m for m in shape.materials if m.composition_pct.get("Mg", 0.0) > 0]
    if carriers:
        richest = max(carriers, key=lambda m: m.composition_pct["Mg"] * m.recovery.get("Mg", 1.0))
        note += f"; about {mass_text(nodulariser_kg(to_sulphide + to_fade, richest), units)} of {richest.name} for these"
    return note


def _columns_of(shape: ModelShape, heat: Heat, aim_penalty: float) -> _Columns:
    """This heat's view of every material: the book's values with the heat's overrides."""
    return _overridden(shape, heat.stage, tuple(heat.price_per_kg.items()), tuple(heat.stock_kg.items()),
                       tuple(heat.locked_kg.items()), heat.switched_off, aim_penalty)


@lru_cache(maxsize=64)
def _overridden(shape: ModelShape, stage: str, prices_of: tuple[tuple[str, float], ...],
                stock_of: tuple[tuple[str, float], ...], locked_of: tuple[tuple[str, float], ...],
                switched_off: frozenset[str], aim_penalty: float) -> _Columns:
    """_Columns for these overrides (name, value), worked out once for every heat that has them."""
    prices, stock = shape.book_prices.copy(), shape.book_stock.copy()
    for name, value in prices_of:
        prices[shape.column_of[name]] = value
    for name, value in stock_of:
        stock[shape.column_of[name]] = value
    locked_kg = np.full(shape.n_materials, math.nan)
    for name, value in locked_of:
        locked_kg[shape.column_of[name]] = value
    locked = ~np.isnan(locked_kg)
    # Allowed at the stage, not switched off, and not forbidden by the grade unless locked (a
    # lock is the user's explicit choice): as meltfix.shop.heat.usable_materials says.
    can_use = shape.allowed & (~shape.forbidden | locked)
    for name in switched_off:
        can_use[shape.column_of[name]] = False
    packed, switched = shape.packable & ~locked, (shape.min_kg > 0) & ~locked
    col_lower, col_upper = _column_bounds(shape, stock, locked_kg, can_use, packed, switched, _reheat_max_c(shape, stage))
    cost = np.zeros(shape.n_cols)
    cost[shape.col_mat] = prices * shape.scale
    cost[shape.col_up] = cost[shape.col_down] = AIM_PENALTY_PER_KG * aim_penalty
    integrality = np.zeros(shape.n_cols)
    integrality[shape.col_mat] = packed
    integrality[shape.col_switch] = 1
    lines = tuple(zip(shape.materials, shape.scale.tolist(), locked_kg.tolist(), packed.tolist(), switched.tolist(),
                      shape.min_kg.tolist(), prices.tolist()))
    columns = _Columns(prices, stock, locked_kg, can_use, packed, switched, col_lower, col_upper, cost, integrality,
                       bool(packed.any() or switched.any()), lines)
    for array in (prices, stock, locked_kg, can_use, packed, switched, col_lower, col_upper, cost, integrality):
        array.flags.writeable = False  # shared by every heat with these overrides
    return columns


def _column_bounds(shape: ModelShape, stock_kg: np.ndarray, locked_kg: np.ndarray, can_use: np.ndarray,
                   packed: np.ndarray, switched: np.ndarray, reheat_max_c: float) -> tuple[np.ndarray, np.ndarray]:
    """Column bounds: materials within stock (whole packs where packed), locks fixed, the on/off
    binaries free where a minimum applies, slacks shut, arc heating up to the stage's most."""
    locked = ~np.isnan(locked_kg)
    col_lower = np.zeros(shape.n_cols)
    col_upper = np.full(shape.n_cols, _INF)
    stock = stock_kg / shape.scale
    usable = np.where(can_use, np.where(packed, np.floor(stock + 1e-9), stock), 0.0)
    if locked.any():  # most heats lock nothing
        fixed = locked_kg / shape.scale
        usable = np.where(locked, fixed, usable)
        col_lower[shape.col_mat] = np.where(locked, fixed, 0.0)
    col_upper[shape.col_mat] = usable
    col_upper[shape.col_switch] = np.where(switched[shape.switchable], 1.0, 0.0)
    col_upper[shape.col_slack] = 0.0
    col_upper[shape.col_reheat] = reheat_max_c
    return col_lower, col_upper


def _most_kg(shape: ModelShape, heat: Heat, columns: _Columns) -> np.ndarray:
    """The most of each material that could go in [kg]: its stock, ten times the bath, or what the
    vessel can take."""
    most = np.minimum(columns.stock, 10.0 * heat.bath_kg)
    if heat.capacity_kg is not None:
        most = np.minimum(most, (heat.capacity_kg - heat.bath_kg) / np.maximum(shape.g, 1e-9))
    return most


def _switch_rows(shape: ModelShape, columns: _Columns, most_kg: np.ndarray, row_upper: np.ndarray,
                 coefficients: list[tuple[int, int, float]]) -> None:
    """The on/off rows: closed where a minimum applies, and letting in at most ``most_kg`` once
    switched on."""
    switch_rows = shape.switch.first + 2 * np.arange(len(shape.switchable))
    on = switch_rows[columns.switched[shape.switchable]]
    row_upper[on] = row_upper[on + 1] = 0.0
    coefficients += zip((switch_rows + 1).tolist(), range(shape.col_switch.start, shape.col_switch.stop),
                        (-np.maximum(most_kg, shape.min_kg)[shape.switchable]).tolist())


def _dominated(shape: ModelShape, heat: Heat, columns: _Columns, col_upper: np.ndarray, window_per_kg: np.ndarray,
               window_room: np.ndarray, capacity_room: float, switch_most_kg: np.ndarray) -> np.ndarray:
    """Per material: dominated on this heat (meltfix.plan.dominance), judged on the rows that keep
    their limits: the windows (their change per kg and the room left on each) and the vessel's capacity."""
    coefficients = np.vstack((window_per_kg, shape.g[None, :]))
    upper = np.append(window_room, capacity_room)
    most = most_kg(coefficients, upper, col_upper[shape.col_mat] * shape.scale)
    materials = HeatMaterials(columns.prices, columns.stock, columns.can_use, ~np.isnan(columns.locked_kg),
                              columns.packed, columns.switched, shape.min_kg, shape.pack, most, switch_most_kg)
    return dominated(shape.pairs, materials)


def integer_choices(shape: ModelShape, load: HeatLoad, additions: Sequence[Addition]) -> np.ndarray:
    """A plan's packs and on/off choices as values of the model's integer columns (the others 0):
    where branch and bound may start when that plan is known to stay feasible."""
    kg = np.zeros(shape.n_materials)
    for a in additions:
        kg[shape.column_of[a.material]] = a.kg
    values = np.zeros(shape.n_cols)
    values[shape.col_mat] = np.where(load.packed, np.rint(kg / shape.scale), 0.0)
    values[shape.col_switch] = (kg[shape.switchable] > 0) & load.switched[shape.switchable]
    return values
