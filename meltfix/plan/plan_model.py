"""The planner's linear model for one grade, built once and loaded with each heat (meltfix.plan.massbalance's mass balance as a linear programme).

The decision per material is its mass [kg], or its number of packs when it comes in bags, bales or
coils. Windows are linear once multiplied out by the final bath mass, so the optimum is exact:

    m_i = W c_i + sum_j Y_ij x_j,   M = W + sum_j g_j x_j,   lo_i M <= m_i <= hi_i M

Every row is written so that its coefficients depend on the recipe book and the grade only; what a
heat changes (the bath W, the analysis c, prices, stock, locks, the vessel) lands in bounds and costs,
plus one coefficient per row for the few families noted below. A window's limit is the coefficient
of M in its row, so a grade with its limits moved (the odds search's insets) is the same model with
those coefficients rewritten. So the model is built once per (book, grade, mode) and kept hot in HiGHS
(meltfix.plan.hot_model); a heat only overwrites bounds and costs (meltfix.plan.heat_load says what it
writes).

Columns, in this order: the materials (kg, or packs), the aim deviations d+ and d-, one on/off
binary per material with a minimum addition, one elastic slack per window row (fixed at 0 except in
the closest-plan phases), the final bath mass M, and the arc heating R [°C] a stage that can reheat
may buy. Rows come in families, one function each
(``_window_rows``, ``_capacity_row``, ...): a new family is one more function and one more line in
``ModelShape.__init__``.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from meltfix.plan.dominance import proportional_pairs
from meltfix.shop.elements import element_sort_key
from meltfix.shop.grades import Grade
from meltfix.shop.liquidus import formula_for
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook

# Kilograms of element off aim -> penalty: 0.01 wt % of a bath of M kg is M/10000 kg, per tonne
# of bath that is M/1000 t, so w currency per (0.01 % x t) is exactly 10 w per kg off aim.
AIM_PENALTY_PER_KG = 10.0
# A closest plan's violation weight floors each limit at 0.001 %, so a limit of 0 (a debt to
# deoxidation) still has a finite weight.
_LEAST_LIMIT_PCT = 1e-3


@dataclass(frozen=True)
class WindowRow:
    """One limit row of the model: its label, for reading duals and violations back."""

    element: str
    """Element symbol, or an index name such as "CEV"."""
    limit: str
    """"min" or "max"."""


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
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

    @property
    def span(self) -> slice:
        """The family's rows as a slice: NumPy indexes a slice without building an index array."""
        return slice(self.first, self.first + self.count)


class ModelShape:
    """The fixed part of the model for one grade, stage and mode: columns, rows and their coefficients."""

    def __init__(self, book: RecipeBook, grade: Grade, stage: str, continuous: bool, use_aim: bool,
                 minimums: bool = True) -> None:
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
        self.min_kg = np.array([m.min_kg if minimums else 0.0 for m in materials])
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
        self._columns()
        self._rows()
        self._heat_independent(book, grade, stage)
        self.pairs = proportional_pairs(materials, self.g, self.chill)
        """Materials whose columns point the same way: the candidates for pruning on each heat."""

    def _columns(self) -> None:
        """Where each kind of column sits: materials, aim deviations, on/off, slacks, M, R."""
        n, n_aim, n_switch = self.n_materials, len(self.aim_elements), len(self.switchable)
        self.col_mat = slice(0, n)
        self.col_up = slice(n, n + n_aim)
        self.col_down = slice(n + n_aim, n + 2 * n_aim)
        self.col_switch = slice(n + 2 * n_aim, n + 2 * n_aim + n_switch)
        self.n_window = self._count_window_rows()
        self.col_slack = slice(self.col_switch.stop, self.col_switch.stop + self.n_window)
        self.col_mass = self.col_slack.stop
        self.col_reheat = self.col_mass + 1
        self.n_cols = self.col_reheat + 1

    def _rows(self) -> None:
        """Every family of rows, placed one after the other in one matrix."""
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

    def _heat_independent(self, book: RecipeBook, grade: Grade, stage: str) -> None:
        """What every heat reads the same way, worked out once per model rather than per heat: the
        book's prices and stocks, where each material may go, the window rows' bounds as matrices
        over the analysis (a heat's bound is then one matrix product), and what a heat reads
        into the other rows."""
        self.column_of = {m.name: j for j, m in enumerate(book.materials)}
        self.allowed = np.array([m.allowed_at(stage) for m in book.materials], dtype=bool)
        self.forbidden = np.array([m.name in grade.forbidden for m in book.materials], dtype=bool)
        self.book_prices = np.array([m.price_per_kg for m in book.materials], dtype=float)
        self.book_stock = np.array([_or_inf(m.stock_kg) for m in book.materials], dtype=float)
        # Row r's bound per kg of bath: low[r] . (analysis, below-limit readings at 0)
        # + now[r] . (analysis), as fractions; low and now side by side (the limit is M's coefficient).
        n_el = len(self.elements)
        low, now = np.zeros((self.n_window, n_el)), np.zeros((self.n_window, n_el))
        r = 0
        for symbol, (_, highest) in grade.window_pct.items():
            k = self.row_of[symbol]
            low[r, k] = 1.0
            r += 1
            if highest < 100:
                now[r, k] = -1.0
                r += 1
        for index in grade.indices:
            weights = np.array([index.terms.get(s, 0.0) for s in self.elements])
            # A negative weight (a ratio such as Mn - 20 S) flips which end of a below-limit
            # reading is the safe one: the least index for its minimum, the most for its maximum.
            positive, negative = np.where(weights > 0, weights, 0.0), np.where(weights > 0, 0.0, weights)
            for bound, sign in ((index.min_value, 1.0), (index.max_value, -1.0)):
                if bound is not None:
                    low[r], now[r] = (positive, negative) if sign > 0 else (-negative, -positive)
                    r += 1
        self.window_bounds = np.hstack((low, now))
        self.element_min = np.array([row.limit == "min" and row.element in grade.window_pct
                                     for row in self.window_rows], dtype=bool)
        """Per window row: an element's minimum (at 0 % a row only when deoxidation leaves it in debt)."""
        self.own_applies = self.applies(self.limit_pct)
        """Per window row: the model's own grade's limit applies on every heat (``applies``)."""
        self.aim_fractions = [(self.row_of[s], grade.aim_pct[s] / 100.0) for s in self.aim_elements]
        """Per aim row: its element's place in ``elements`` and the aim as a fraction."""
        self.open_rows = np.full(self.n_rows, -math.inf), np.full(self.n_rows, math.inf)
        """Every row's bounds open: where each heat's row bounds start (a copy costs less than a fill)."""
        self.no_materials = np.zeros(self.n_materials, dtype=bool)
        """Per material, all False: what a heat that prunes nothing shuts."""
        for shared in (self.own_applies, *self.open_rows, self.no_materials):
            shared.flags.writeable = False  # read by every heat

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
        """lo M - m_i <= 0 and m_i - hi M <= 0 per window, and a linear index likewise, each with its
        elastic slack. The limit is the coefficient of M alone, so a grade with its limits moved
        (the odds search's insets) is the same model with one coefficient per row changed.

        Every element gets its minimum row (a 0 % floor binds only an element in debt to
        deoxidation; on other heats it is left open); a maximum of 100 % is no row."""
        y_part, sign = [], []
        for symbol, (_, high) in self.grade.window_pct.items():
            y = self.yields[self.row_of[symbol]]
            y_part.append(-y)
            sign.append(1.0)
            self.window_rows.append(WindowRow(symbol, "min"))
            if high < 100:
                y_part.append(y)
                sign.append(-1.0)
                self.window_rows.append(WindowRow(symbol, "max"))
        for index in self.grade.indices:
            weights = np.array([index.terms.get(s, 0.0) for s in self.elements])
            for bound, side, direction in ((index.min_value, "min", -1.0), (index.max_value, "max", 1.0)):
                if bound is not None:
                    y_part.append(direction * (weights @ self.yields))
                    sign.append(-direction)
                    self.window_rows.append(WindowRow(index.name, side))
        self.window_y_per_kg = np.array(y_part).reshape(len(y_part), self.n_materials)
        """The window rows' coefficients per kg of each material, the limit's part aside."""
        self.window_sign = np.array(sign)
        """Per window row: +1 for a minimum (the coefficient of M is the limit), -1 for a maximum."""
        self.limit_pct = self.limits_pct(self.grade)
        """The model's own grade's limit of each window row [wt %, or the index's unit]."""
        self.own_mass_coefficients = self.mass_coefficients(self.limit_pct)
        """The window rows' coefficients of M for the model's own grade (most heats plan to it)."""
        block = self._material_block(self.window_y_per_kg)
        block[:, self.col_mass] = self.own_mass_coefficients
        block[np.arange(self.n_window), self.col_slack.start + np.arange(self.n_window)] = -1.0
        return Rows(block)

    def limits_pct(self, grade: Grade) -> np.ndarray:
        """The limit of each window row in ``grade``, a grade with this model's rows (its own, or
        one with its limits moved)."""
        limits = []
        for row in self.window_rows:
            if row.element in grade.window_pct:
                limits.append(grade.window_pct[row.element][0 if row.limit == "min" else 1])
            else:
                index = next(ix for ix in grade.indices if ix.name == row.element)
                value = index.min_value if row.limit == "min" else index.max_value
                assert value is not None, f"{grade.name}: {row.element} {row.limit} has no limit"
                limits.append(value)
        return np.array(limits, dtype=float)

    def mass_coefficients(self, limit_pct: np.ndarray) -> np.ndarray:
        """The window rows' coefficients of M for these limits: the limit as a fraction, signed,
        never 0 (HiGHS deletes a coefficient set to 0, and the matrix's structure must not move
        with a heat: 1e-12 of M tightens a limit of 0 by 1e-10 wt %, under LIMIT_TOL_PCT)."""
        coefficients = self.window_sign * limit_pct / 100.0
        return np.where(np.abs(coefficients) < 1e-12, 1e-12, coefficients)

    def applies(self, limit_pct: np.ndarray) -> np.ndarray:
        """Per window row: the limit applies on every heat under these limits; all do but an
        element's minimum of 0 %, which binds only an element in debt (meltfix.plan.heat_load)."""
        return ~(self.element_min & (limit_pct <= 0))

    def window_per_kg(self, mass_coefficients: np.ndarray) -> np.ndarray:
        """Each window row's change per kg of each material, M's growth included (what
        meltfix.plan.dominance reads), for the rows' coefficients of M."""
        return self.window_y_per_kg + mass_coefficients[:, None] * self.g[None, :]

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
        return np.maximum(self.limit_pct, _LEAST_LIMIT_PCT) / 100.0


def _yields(materials: Sequence[Material], elements: Sequence[str]) -> np.ndarray:
    return np.array([[m.yield_pct(s) / 100.0 for m in materials] for s in elements]).reshape(len(elements), len(materials))


def _or_inf(value: float | None) -> float:
    return math.inf if value is None else value
