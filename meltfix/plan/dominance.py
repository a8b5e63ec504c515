"""Materials no cheapest plan needs, found before solving so branch and bound never looks at them.

Material b is dominated by material a when b's column is lambda times a's in every row of the model
(meltfix.plan.plan_model): every element dissolves from b in the same proportions as from a, iron
included, so b's dissolved contents are lambda = g_b / g_a times a's, g being the share of each that
dissolves; b chills the bath at least lambda times as much (the temperature rows then read no
worse); and b costs more than lambda times a's price. Any plan's x kg of b can then go in as
lambda x kg of a instead: every window, aim and capacity row reads the same, the temperature rows
no worse, and the plan is cheaper. So b is in no cheapest plan, provided a can take the extra:

- a is usable on this heat, loose (not in packs, whose counts could not follow lambda x) and not
  locked (a lock fixes its amount), and b is not locked (the heat forces it);
- a's minimum addition is met by lambda times the least amount of b that can go in at all;
- a's stock covers the most of a any plan can hold (``most_kg``), so no plan runs out of a.

This is the textbook exchange argument for dominated columns of a linear programme (e.g. the
dominated-column reductions of LP presolve, Andersen & Andersen, "Presolving in linear
programming", Math. Programming 71 (1995) 221-245, from memory), restricted to what the integer
choices allow.
Ties (b exactly lambda times as dear) are left alone, so the plan chosen among equally cheap
ones does not change. A real book has such pairs when it lists one alloy twice (two suppliers,
two lot sizes at different prices).

The most of a material any plan can hold is bound propagation on the rows that keep their limits:
each window row and the vessel's capacity row read sum_j A_rj x_j <= u_r with x >= 0, so where
A_rj > 0, x_j <= (u_r - sum over the k with A_rk < 0 of A_rk x_k^max) / A_rj. The closest-plan
phases make the windows elastic, so they solve with every material open (``HeatLoad.col_upper_all``).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from meltfix.shop.materials import Material

# Two materials whose dissolved contents agree in proportion to this many decimals of a fraction
# are taken as one direction (rounding only groups candidates; each pair is then checked exactly).
_DECIMALS = 12
# b must cost more than lambda times a's price by this share, so that ties are left alone.
_PRICE_MARGIN = 1e-9


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
class Pairs:
    """Candidate pairs (b, a) of one model: b's column is ``ratio`` times a's and b chills no less."""

    b: np.ndarray
    a: np.ndarray
    ratio: np.ndarray
    """lambda = g_b / g_a."""

    @property
    def empty(self) -> bool:
        return self.b.size == 0


def proportional_pairs(materials: Sequence[Material], g: np.ndarray, chill: np.ndarray) -> Pairs:
    """Every ordered pair of materials whose columns point the same way (heat-independent: once per model)."""
    symbols = sorted({s for m in materials for s in m.composition_pct})
    groups: dict[tuple[float, ...], list[int]] = {}
    if symbols:
        yields = np.array([[m.yield_pct(s) / 100.0 for s in symbols] for m in materials])
        for j in np.flatnonzero(g > 0):
            key = tuple(np.round(yields[j] / g[j], _DECIMALS).tolist())
            groups.setdefault(key, []).append(int(j))
    b_list, a_list = [], []
    for members in groups.values():
        for b in members:
            for a in members:
                if a != b and chill[b] / g[b] >= chill[a] / g[a]:
                    b_list.append(b)
                    a_list.append(a)
    b_idx, a_idx = np.array(b_list, dtype=int), np.array(a_list, dtype=int)
    return Pairs(b_idx, a_idx, g[b_idx] / g[a_idx] if b_idx.size else np.zeros(0))


def most_kg(coefficients: np.ndarray, upper: np.ndarray, material_upper_kg: np.ndarray) -> np.ndarray:
    """The most of each material [kg] any plan can hold under rows ``coefficients`` [per kg] x <= ``upper``,
    every material between 0 and ``material_upper_kg`` (inf = no bound of its own); inf where no row
    bounds it."""
    negative = coefficients < 0
    # A row with a material of unbounded supply that loosens it bounds nothing.
    open_rows = (negative & np.isinf(material_upper_kg)[None, :]).any(axis=1)
    finite_upper = np.where(np.isinf(material_upper_kg), 0.0, material_upper_kg)
    room = upper - np.where(negative, coefficients * finite_upper, 0.0).sum(axis=1)
    room = np.where(open_rows | ~np.isfinite(upper), np.inf, room)
    positive = coefficients > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        bound = np.where(positive, room[:, None] / np.where(positive, coefficients, 1.0), np.inf)
    return np.asarray(bound.min(axis=0, initial=np.inf))


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
class HeatMaterials:
    """One heat's view of the materials, per material, as the dominance test needs it."""

    prices: np.ndarray
    stock_kg: np.ndarray
    can_use: np.ndarray
    locked: np.ndarray
    packed: np.ndarray
    switched: np.ndarray
    min_kg: np.ndarray
    pack_kg: np.ndarray
    most_kg: np.ndarray
    """The most of each material any plan can hold [kg] (``most_kg``)."""
    switch_most_kg: np.ndarray
    """The most the on/off row lets in once switched on [kg]."""


def dominated(pairs: Pairs, heat: HeatMaterials) -> np.ndarray:
    """Per material: dominated on this heat by a material that can always take its place."""
    out = np.zeros(heat.prices.shape[0], dtype=bool)
    if pairs.empty:
        return out
    b, a, ratio = pairs.b, pairs.a, pairs.ratio
    # The least amount of b that can go in at all: its minimum, or one pack.
    least_b = np.maximum(np.where(heat.switched[b], heat.min_kg[b], 0.0), np.where(heat.packed[b], heat.pack_kg[b], 0.0))
    takes_it = (heat.can_use[a] & ~heat.locked[a] & ~heat.packed[a]
                & (heat.stock_kg[a] >= heat.most_kg[a])
                & (~heat.switched[a] | ((ratio * least_b >= heat.min_kg[a]) & (heat.switch_most_kg[a] >= heat.most_kg[a]))))
    cheaper = heat.prices[b] > ratio * heat.prices[a] * (1 + _PRICE_MARGIN)
    out[b[takes_it & cheaper & heat.can_use[b] & ~heat.locked[b]]] = True
    return out
