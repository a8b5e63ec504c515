"""The planner's linear model for one grade, built once and loaded with each heat (meltfix.plan.massbalance's mass balance as a linear programme).

The decision per material is its mass [kg], or its number of packs when it comes in bags, bales or
coils. Windows are linear once multiplied out by the final bath mass, so the optimum is exact:

    m_i = W c_i + sum_j Y_ij x_j,   M = W + sum_j g_j x_j,   lo_i M <= m_i <= hi_i M

Every row is written so that its coefficients depend on the recipe book and the grade only; what a
heat changes (the bath W, the analysis c, prices, stock, locks, the vessel) lands in bounds and costs,
plus one coefficient per row for the few families noted below. So the model is built once per
(book, grade, mode) and kept hot in HiGHS (``HotModel``); a heat only overwrites bounds and costs.

Columns, in this order: the materials (kg, or packs), the aim deviations d+ and d-, one on/off
binary per material with a minimum addition, one elastic slack per window row (fixed at 0 except in
the closest-plan phases), the final bath mass M, and the arc heating R [°C] a stage that can reheat
may buy. Rows come in families, one function each
(``_window_rows``, ``_capacity_row``, ...): a new family is one more function and one more line in
``ModelShape.build``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import highspy
import numpy as np
from highspy._core import _Highs

from meltfix.plan.deoxidation import oxygen_notes
from meltfix.plan.numbers import degrees_text, mass_text, temperature_text
from meltfix.plan.treatment import (contents_owed_pct, magnesium_fade_pct, magnesium_for_sulphur_pct, nodulariser_kg,
                                    unbound_sulphur_pct)
from meltfix.shop.elements import element_sort_key
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, usable_materials
from meltfix.shop.liquidus import formula_for
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook

# Kilograms of element off aim -> penalty: 0.01 wt % of a bath of M kg is M/10000 kg, per tonne
# of bath that is M/1000 t, so w currency per (0.01 % x t) is exactly 10 w per kg off aim.
AIM_PENALTY_PER_KG = 10.0
# A closest plan's violation weight floors each limit at 0.001 %, so a limit of 0 (a debt to
# deoxidation) still has a finite weight.
_LEAST_LIMIT_PCT = 1e-3
_INF = math.inf
# HiGHS options, set once per model. Presolve off: on these small models it saves nothing, its LP
# presolve once called a feasible elastic model infeasible, and its MIP presolve makes HiGHS print
# a debug line straight to file descriptor 1 when it repairs a presolved solution, which would
# corrupt a running terminal screen and a --json stream (seen with HiGHS 1.12). The neighbourhood heuristics
# (RINS, RENS) and the root reduced-cost heuristic each run a sub-MIP; on these models they take
# about a third of the time and find nothing branch and bound does not. One thread per model:
# threads plan heats side by side, each on its own model. No simplex scaling: HiGHS keeps the scale
# factors of a model's first solve, so with them a heat's plan would differ in its last digits
# depending on which heat that model met first. A primal feasibility tolerance of 1e-9 kg (100
# times tighter than HiGHS's default) keeps a plan the solver calls feasible inside its own re-check
# by the mass balance (a miss beyond 1e-9 wt %) from a 100 kg bath up.
_OPTIONS: dict[str, bool | float | str] = {
    "output_flag": False, "log_to_console": False, "presolve": "off", "threads": 1,
    "primal_feasibility_tolerance": 1e-9, "simplex_scale_strategy": 0,
    "mip_heuristic_run_rins": False, "mip_heuristic_run_rens": False,
    "mip_heuristic_run_root_reduced_cost": False,
}


@dataclass(frozen=True)
class WindowRow:
    """One limit row of the model: label and limit, for reading duals and violations back."""

    element: str
    """Element symbol, or an index name such as "CEV"."""
    limit: str
    """"min" or "max"."""
    limit_pct: float


@dataclass(frozen=True)
class Rows:
    """A family of rows: fixed coefficients over all columns; the heat sets the bounds."""

    matrix: np.ndarray
    """Coefficients [rows x columns]."""
    first: int = 0
    """Index of the family's first row in the model (set when the model is assembled)."""

    @property
    def count(self) -> int:
        return self.matrix.shape[0]

    @property
    def rows(self) -> range:
        return range(self.first, self.first + self.count)


@dataclass(frozen=True)
class HeatLoad:
    """What one heat writes into a model: bounds, costs, integrality and the few moving coefficients."""

    col_lower: np.ndarray
    col_upper: np.ndarray
    cost: np.ndarray
    row_lower: np.ndarray
    row_upper: np.ndarray
    integrality: np.ndarray
    """1 for an integer column, 0 for a continuous one."""
    coefficients: tuple[tuple[int, int, float], ...]
    """(row, column, value) changes on top of the shape's fixed matrix."""
    packed: np.ndarray
    """Per material: counted in whole packs on this heat (not locked, not --continuous)."""
    switched: np.ndarray
    """Per material: has an on/off choice on this heat (a minimum addition, not locked)."""
    locked_kg: np.ndarray
    """Per material: the locked amount [kg], NaN when not locked."""
    prices: np.ndarray
    """Per material: this heat's price [currency/kg]."""
    active: np.ndarray
    """Per window row: the limit applies on this heat (a 0 % floor applies only to a deoxidation debt)."""
    usable: tuple[Material, ...]
    notes: tuple[str, ...]


class ModelShape:
    """The fixed part of the model for one grade, stage and mode: columns, rows and their coefficients."""

    def __init__(self, book: RecipeBook, grade: Grade, stage: str, continuous: bool, use_aim: bool) -> None:
        self.book, self.grade = book, grade
        # Every material of the book, as it behaves at this stage (its recoveries there); a heat
        # bounds the ones it may not use at 0.
        self.materials = tuple(m.at_stage(stage) for m in book.materials)
        materials = self.materials
        n = self.n_materials = len(materials)
        index_terms = {s for index in grade.indices for s in index.terms}
        self.elements = sorted(set(grade.window_pct) | index_terms | set(grade.aim_pct), key=element_sort_key)
        self.row_of = {s: k for k, s in enumerate(self.elements)}
        # Y[i, j]: fraction of material j's mass that dissolves as element i; g[j]: total dissolving.
        # The composition x recovery matrix of the book, built once per model, never per heat.
        self.yields = _yields(materials, self.elements)
        self.g = np.array([m.mass_yield for m in materials])
        self.pack = np.array([m.pack_kg or 0.0 for m in materials])
        self.packable = (self.pack > 0) & (not continuous)
        self.scale = np.where(self.packable, self.pack, 1.0)
        """kg per unit of each material column (pack mass, or 1)."""
        self.min_kg = np.array([m.min_kg for m in materials])
        self.switchable = np.flatnonzero(self.min_kg > 0)
        """Materials with a minimum addition, in the order of their on/off columns."""
        self.chill = np.array([m.chill_per_kg_t for m in materials])
        self.liquidus = formula_for(grade.family)
        # How much each kg of a material lowers (liquidus x bath mass) [°C kg per kg]: the liquidus
        # is linear in the contents, so times the final mass it is linear in the additions.
        self.liquidus_lowering = np.array([math.fsum(k * m.yield_pct(s) for s, k in self.liquidus.slope_c_per_pct.items())
                                       for m in materials])
        self.aim_elements = [s for s in grade.aim_pct if use_aim]
        # An element the grade does not limit may still not be raised at will: without this guard
        # the optimiser would use aluminium, copper or ferrosilicon as a cheap diluent or heater.
        self.unlisted = sorted({s for m in materials for s in m.composition_pct if s != "Fe"} - set(grade.window_pct),
                               key=element_sort_key)
        self.window_rows: list[WindowRow] = []

        n_aim, n_switch = len(self.aim_elements), len(self.switchable)
        self.col_mat = slice(0, n)
        self.col_up = slice(n, n + n_aim)
        self.col_down = slice(n + n_aim, n + 2 * n_aim)
        self.col_switch = slice(n + 2 * n_aim, n + 2 * n_aim + n_switch)
        self.n_window = self._count_window_rows()
        self.col_slack = slice(self.col_switch.stop, self.col_switch.stop + self.n_window)
        self.col_mass = self.col_slack.stop
        self.col_reheat = self.col_mass + 1
        self.n_cols = self.col_reheat + 1

        # Row families, in model order. The window rows come first: their slacks are the elastic ones.
        self.windows = self._window_rows()
        self.capacity = self._capacity_row()
        self.temperature = self._temperature_row()
        self.superheat = self._superheat_row()
        self.mass = self._mass_row()
        self.unlisted_rows = self._unlisted_rows()
        self.switch = self._switch_rows()
        self.aims = self._aim_rows()
        self.violation_cap = self._violation_cap_row()
        first = 0
        families = []
        for name in ("windows", "capacity", "temperature", "superheat", "mass", "unlisted_rows", "switch", "aims",
                     "violation_cap"):
            family = getattr(self, name)
            family = Rows(family.matrix, first)
            setattr(self, name, family)
            families.append(family)
            first += family.count
        self.n_rows = first
        self.matrix = np.vstack([f.matrix for f in families]) if first else np.zeros((0, self.n_cols))

    # -- row families -----------------------------------------------------------------------------
    def _material_block(self, coefficients: np.ndarray) -> np.ndarray:
        """Rows over all columns with ``coefficients`` [per kg] on the material columns (x = scale v)."""
        block = np.zeros((coefficients.shape[0], self.n_cols))
        block[:, self.col_mat] = coefficients * self.scale
        return block

    def _count_window_rows(self) -> int:
        grade = self.grade
        return (2 * len(grade.window_pct) - sum(high >= 100 for _, high in grade.window_pct.values())
                + sum((i.min_value is not None) + (i.max_value is not None) for i in grade.indices))

    def _window_rows(self) -> Rows:
        """lo M <= m_i <= hi M per window, and a linear index likewise, each with its elastic slack.

        Every element gets its minimum row (a 0 % floor binds only an element in debt to
        deoxidation; on other heats it is left open); a maximum of 100 % is no row."""
        coefficients = []
        for symbol, (low, high) in self.grade.window_pct.items():
            y = self.yields[self.row_of[symbol]]
            coefficients.append(-(y - low / 100.0 * self.g))
            self.window_rows.append(WindowRow(symbol, "min", low))
            if high < 100:
                coefficients.append(y - high / 100.0 * self.g)
                self.window_rows.append(WindowRow(symbol, "max", high))
        for index in self.grade.indices:
            weights = np.array([index.terms.get(s, 0.0) for s in self.elements])
            if index.min_value is not None:
                coefficients.append(-(weights @ self.yields - index.min_value / 100.0 * self.g))
                self.window_rows.append(WindowRow(index.name, "min", index.min_value))
            if index.max_value is not None:
                coefficients.append(weights @ self.yields - index.max_value / 100.0 * self.g)
                self.window_rows.append(WindowRow(index.name, "max", index.max_value))
        block = self._material_block(np.array(coefficients).reshape(len(coefficients), self.n_materials))
        block[np.arange(self.n_window), self.col_slack.start + np.arange(self.n_window)] = -1.0
        return Rows(block)

    def _capacity_row(self) -> Rows:
        """M - W <= free capacity."""
        return Rows(self._material_block(self.g[None, :]))

    def _temperature_row(self) -> Rows:
        """sum chill_j x_j / (W / 1000) - R <= allowed drop, multiplied by W so its coefficients stay
        fixed but R's (the heat sets -W): arc heating offsets the chill where the stage can reheat."""
        block = self._material_block(1000.0 * self.chill[None, :])
        block[0, self.col_reheat] = -1.0  # a placeholder for -W
        return Rows(block)

    def _superheat_row(self) -> Rows:
        """Temperature after >= liquidus of the final analysis + superheat, multiplied by M:

            (T0 - S - base) M + sum_i k_i 100 m_i - 1000 sum_j chill_j x_j + W R >= 0

        with T_L = base - sum_i k_i wt %_i (meltfix.shop.liquidus). The chill and the heating enter as
        D W and R W instead of D M and R M: exact in W, short by D (M - W) / M, a few tenths of a
        degree for a 1 % addition (the plan's re-check reports the exact temperature). The heat
        sets the coefficients of M (its T0 - S - base) and R (its W)."""
        block = self._material_block((self.liquidus_lowering - 1000.0 * self.chill)[None, :])
        block[0, self.col_mass] = 1.0  # placeholders
        block[0, self.col_reheat] = 1.0
        return Rows(block)

    def _mass_row(self) -> Rows:
        """M = W + g x: the final bath mass as a column, for the rows whose limit moves with it."""
        block = self._material_block(self.g[None, :])
        block[0, self.col_mass] = -1.0
        return Rows(block)

    def _unlisted_rows(self) -> Rows:
        """m_s <= (c_s + rise) M for each element the grade does not limit; the heat sets the
        coefficient of M (its own c_s), one per row."""
        block = self._material_block(_yields(self.materials, self.unlisted))
        block[:, self.col_mass] = -1.0  # a placeholder, so a heat's value replaces an entry, never adds one
        return Rows(block)

    def _switch_rows(self) -> Rows:
        """x = 0 or min <= x <= U, with a binary y per material: min y - x <= 0 and x - U y <= 0
        (the heat sets U, the most that could be added)."""
        block = np.zeros((2 * len(self.switchable), self.n_cols))
        for t, j in enumerate(self.switchable):
            y = self.col_switch.start + t
            block[2 * t, j], block[2 * t, y] = -self.scale[j], self.min_kg[j]
            block[2 * t + 1, j], block[2 * t + 1, y] = self.scale[j], -1.0  # -U, a placeholder
        return Rows(block)

    def _aim_rows(self) -> Rows:
        """m_i - aim_i M = d+ - d- for each aim (the deviations carry the aim penalty)."""
        coefficients = np.array([self.yields[self.row_of[s]] - self.grade.aim_pct[s] / 100.0 * self.g
                                 for s in self.aim_elements]).reshape(len(self.aim_elements), self.n_materials)
        block = self._material_block(coefficients)
        for t in range(len(self.aim_elements)):
            block[t, self.col_up.start + t] = -1.0
            block[t, self.col_down.start + t] = 1.0
        return Rows(block)

    def _violation_cap_row(self) -> Rows:
        """Total weighted violation, capped in the closest plan's second phase (open otherwise).

        A violation [kg] is weighed against the limit's own mass in the bath, so 0.01 % over a
        0.02 % limit counts far more than 0.01 % over a 1.5 % one; the row is multiplied by W."""
        block = np.zeros((1, self.n_cols))
        block[0, self.col_slack] = 1.0 / self.limit_fraction()
        return Rows(block)

    def limit_fraction(self) -> np.ndarray:
        """Each window row's limit as a fraction, floored (the violation weights' scale)."""
        return np.array([max(row.limit_pct, _LEAST_LIMIT_PCT) / 100.0 for row in self.window_rows])

    # -- one heat ---------------------------------------------------------------------------------
    def _temperature_load(self, heat: Heat, row_lower: np.ndarray, notes: list[str]) -> tuple[float, float, float]:
        """The heat's arc heating (most [°C], cost [currency per °C]) and the superheat row: its lower
        bound goes in ``row_lower``; returns also the row's coefficient of M (T0 - S - base)."""
        stage = self.book.settings.stages.get(heat.stage)
        reheat_max_c, reheat_cost = 0.0, 0.0
        if stage is not None and stage.can_reheat:
            reheat_max_c, reheat_cost = stage.reheat_max_c, stage.reheat_cost_per_c * heat.bath_kg / 1000.0
        if heat.temperature_c is None:
            return reheat_max_c, reheat_cost, 1.0  # no reading: the row stays open (a placeholder)
        superheat = self.book.settings.superheat_c
        # Below-limit readings at 0: the safe end for a liquidus (less solute, a higher liquidus).
        now_liquidus = self.liquidus.liquidus_c(heat.analysis.lowest_pct)
        lower = -heat.bath_kg * (self.liquidus.base_c - now_liquidus)
        # A bath already short of liquidus + superheat may not get worse (nor is adding nothing made
        # impossible): what the heating cannot make up is forgiven, and said.
        short_c = now_liquidus + superheat - heat.temperature_c - reheat_max_c
        if short_c > 0:
            lower -= heat.bath_kg * short_c
            units = self.book.settings.units
            notes.append(f"the bath is {degrees_text(now_liquidus + superheat - heat.temperature_c, units)} short of "
                         f"liquidus {temperature_text(now_liquidus, units)} + superheat {degrees_text(superheat, units)} "
                         "already; the plan may not make it worse")
        row_lower[self.superheat.first] = lower
        coefficient = heat.temperature_c - superheat - self.liquidus.base_c
        # Floored away from 0 so HiGHS keeps the matrix's structure (it deletes a 0 coefficient).
        return reheat_max_c, reheat_cost, coefficient if abs(coefficient) > 1e-8 else 1e-8

    def _treatment_note(self, heat: Heat) -> str:
        """How many kg of magnesium go to MgS and to fade, and what that takes of the richest
        nodulariser in the book."""
        settings = self.book.settings
        bath = heat.bath_kg
        s_pct = unbound_sulphur_pct(heat)  # the S the Mg read has bound already is not charged again
        to_sulphide = bath * magnesium_for_sulphur_pct(s_pct) / 100.0
        to_fade = bath * magnesium_fade_pct(settings) / 100.0
        unbound = "" if s_pct == heat.analysis.get("S") else " not yet bound by the Mg read"
        units = settings.units
        note = (f"{mass_text(to_sulphide, units)} of Mg goes to MgS (S {s_pct:.4g} %{unbound}) and "
                f"{mass_text(to_fade, units)} to fade "
                f"({settings.treatment_to_pour_min:g} min to pour at {settings.mg_fade_pct_per_min:g} % per min) "
                "before any stays in the bath")
        carriers = [m for m in self.materials if m.composition_pct.get("Mg", 0.0) > 0]
        if carriers:
            richest = max(carriers, key=lambda m: m.composition_pct["Mg"] * m.recovery.get("Mg", 1.0))
            note += f"; about {mass_text(nodulariser_kg(to_sulphide + to_fade, richest), units)} of {richest.name} for these"
        return note

    def load(self, heat: Heat, aim_penalty: float) -> HeatLoad:
        """Bounds, costs and moving coefficients for ``heat``."""
        book, grade, n = self.book, self.grade, self.n_materials
        bath = heat.bath_kg
        notes: list[str] = []
        now = np.array([heat.analysis.get(s) / 100.0 for s in self.elements])
        # A value below the detection limit is at most the limit: take it at the limit against a
        # maximum and at zero against a minimum, so the plan is safe whatever the true value.
        below = np.array([s in heat.analysis.below_limit for s in self.elements], dtype=bool)
        now_low = np.where(below, 0.0, now)
        # Aluminium the dissolved oxygen binds, and magnesium the sulphur binds and fade takes, are
        # gone before any stays in the bath: the row starts lower by them (below 0 % is a debt the
        # additions pay first), still linear.
        owed = contents_owed_pct(heat, grade, book.settings)
        debt = np.array([owed.get(s, 0.0) / 100.0 for s in self.elements])
        now, now_low = now - debt, now_low - debt
        notes += oxygen_notes(heat, grade, {s: pct for s, pct in owed.items() if s == "Al"}, book.settings.units)
        if "Mg" in owed:
            notes.append(self._treatment_note(heat))

        row_lower = np.full(self.n_rows, -_INF)
        row_upper = np.full(self.n_rows, _INF)
        active = np.zeros(self.n_window, dtype=bool)
        upper = []
        for symbol, (low, high) in grade.window_pct.items():
            k = self.row_of[symbol]
            upper.append(bath * (now_low[k] - low / 100.0))
            active[len(upper) - 1] = low > 0 or symbol in owed
            if high < 100:
                upper.append(bath * (high / 100.0 - now[k]))
                active[len(upper) - 1] = True
        for index in grade.indices:
            weights = np.array([index.terms.get(s, 0.0) for s in self.elements])
            # A negative weight (a ratio such as Mn - 20 S) flips which end of a below-limit
            # reading is the safe one: the least index for its minimum, the most for its maximum.
            if index.min_value is not None:
                upper.append(bath * (float(weights @ np.where(weights > 0, now_low, now)) - index.min_value / 100.0))
                active[len(upper) - 1] = True
            if index.max_value is not None:
                upper.append(bath * (index.max_value / 100.0 - float(weights @ np.where(weights > 0, now, now_low))))
                active[len(upper) - 1] = True
        row_upper[self.windows.rows] = np.where(active, upper, _INF)
        if heat.capacity_kg is not None:
            row_upper[self.capacity.first] = heat.capacity_kg - bath
        max_drop = heat.drop_limit_c(book.settings)
        if max_drop is not None:
            row_upper[self.temperature.first] = max_drop * bath
        reheat_max_c, reheat_cost, superheat = self._temperature_load(heat, row_lower, notes)
        row_lower[self.mass.first] = row_upper[self.mass.first] = -bath
        unlisted_now = np.array([heat.analysis.get(s) / 100.0 for s in self.unlisted])
        row_upper[self.unlisted_rows.rows] = -bath * unlisted_now
        rise = book.settings.max_unlisted_rise_pct / 100.0
        # Floored so that HiGHS, which deletes a coefficient set to 0, keeps the matrix's structure:
        # the same heat then gives the same plan to the last digit on a new model and a used one.
        coefficients = [(row, self.col_mass, -max(c + rise, 1e-8))
                        for row, c in zip(self.unlisted_rows.rows, unlisted_now)]
        coefficients += [(self.temperature.first, self.col_reheat, -bath),
                         (self.superheat.first, self.col_reheat, bath),
                         (self.superheat.first, self.col_mass, superheat)]
        for t, symbol in enumerate(self.aim_elements):
            k = self.row_of[symbol]
            row_lower[self.aims.first + t] = row_upper[self.aims.first + t] = -bath * (now[k] - grade.aim_pct[symbol] / 100.0)

        usable = tuple(usable_materials(heat, book))
        usable_names = {m.name for m in usable}
        can_use = np.array([m.name in usable_names for m in self.materials], dtype=bool)
        prices = np.array([heat.material_price_per_kg(m) for m in self.materials])
        stock = np.array([_or_inf(heat.material_stock_kg(m)) for m in self.materials])
        locked_kg = np.array([heat.locked_kg.get(m.name, math.nan) for m in self.materials])
        locked = ~np.isnan(locked_kg)
        packed = self.packable & ~locked
        switched = (self.min_kg > 0) & ~locked

        col_lower = np.zeros(self.n_cols)
        col_upper = np.full(self.n_cols, _INF)
        col_upper[self.col_mat] = np.where(can_use, np.where(packed, np.floor(stock / self.scale + 1e-9), stock / self.scale),
                                           0.0)
        col_lower[self.col_mat] = np.where(locked, locked_kg / self.scale, 0.0)
        col_upper[self.col_mat] = np.where(locked, locked_kg / self.scale, col_upper[self.col_mat])
        col_upper[self.col_switch] = np.where(switched[self.switchable], 1.0, 0.0)
        col_upper[self.col_slack] = 0.0
        col_upper[self.col_reheat] = reheat_max_c
        # The most of a material with a minimum that could go in: its stock, ten times the bath, or
        # what the vessel can take.
        most_kg = np.minimum(stock, 10.0 * bath)
        if heat.capacity_kg is not None:
            most_kg = np.minimum(most_kg, (heat.capacity_kg - bath) / np.maximum(self.g, 1e-9))
        for t, j in enumerate(self.switchable):
            row = self.switch.first + 2 * t
            if switched[j]:
                row_upper[row] = row_upper[row + 1] = 0.0
            coefficients.append((row + 1, self.col_switch.start + t, -max(most_kg[j], self.min_kg[j])))

        cost = np.zeros(self.n_cols)
        cost[self.col_mat] = prices * self.scale
        cost[self.col_up] = cost[self.col_down] = AIM_PENALTY_PER_KG * aim_penalty
        cost[self.col_reheat] = reheat_cost
        integrality = np.zeros(self.n_cols)
        integrality[self.col_mat] = packed
        integrality[self.col_switch] = 1
        return HeatLoad(col_lower, col_upper, cost, row_lower, row_upper, integrality, tuple(coefficients),
                        packed, switched, locked_kg, prices, active, usable, tuple(notes))


@dataclass(frozen=True)
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
        self._moved: list[tuple[int, int]] = []

    def load(self, heat: HeatLoad) -> None:
        """Write one heat's bounds, costs and moving coefficients over the previous heat's."""
        highs = self.highs
        highs.changeColsBounds(self.shape.n_cols, self._all_cols, heat.col_lower, heat.col_upper)
        highs.changeColsCost(self.shape.n_cols, self._all_cols, heat.cost)
        # In the binding, not in its type stubs:
        highs.changeRowsBounds(self.shape.n_rows, self._all_rows, heat.row_lower, heat.row_upper)  # type: ignore[attr-defined]
        for row, col, value in heat.coefficients:
            highs.changeCoeff(row, col, value)

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
        return Solution(np.array(solution.col_value), np.array(solution.row_dual), np.array(solution.col_dual))

    def solve_mip(self, time_limit_s: float, rel_gap: float, integer: np.ndarray) -> tuple[Solution | None, bool]:
        """Branch and bound on the columns marked in ``integer`` within ``time_limit_s``: (the best
        integer point or None, whether the time ran out)."""
        self._integers(integer)
        highs = self.highs
        highs.setOptionValue("time_limit", max(time_limit_s, 1e-3))
        highs.setOptionValue("mip_rel_gap", rel_gap)
        self._run()
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
        # HighsVarType as bytes: 0 continuous, 1 integer.
        values = np.zeros(self.shape.n_cols, dtype=np.uint8) if integer is None else integer.astype(np.uint8)
        self.highs.changeColsIntegrality(self.shape.n_cols, self._all_cols, values)

    def _run(self) -> bool:
        # Each solve starts from no basis, so a heat's plan never depends on the heats planned
        # before it on this model (ties between equally cheap plans break the same way every time).
        self.highs.clearSolver()
        self.highs.run()
        return self.highs.getModelStatus() == highspy.HighsModelStatus.kOptimal


def _yields(materials: Sequence[Material], elements: Sequence[str]) -> np.ndarray:
    return np.array([[m.yield_pct(s) / 100.0 for m in materials] for s in elements]).reshape(len(elements), len(materials))


def _or_inf(value: float | None) -> float:
    return math.inf if value is None else value
