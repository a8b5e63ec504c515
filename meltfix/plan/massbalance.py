"""The mass balance of additions to a bath, written plainly.

Kept apart from the optimiser so that plans, replays and tests can re-check any set of additions
with arithmetic that shares nothing with the LP's matrices.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping, Sequence
from functools import lru_cache

from meltfix.plan.result import LimitCheck, limit_checks
from meltfix.plan.treatment import contents_owed_pct
from meltfix.shop.elements import element_sort_key
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.settings import ShopSettings


def bath_after(bath_kg: float, analysis_pct: Mapping[str, float],
               additions: Iterable[tuple[Material, float]],
               owed_pct: Mapping[str, float] | None = None) -> tuple[float, dict[str, float]]:
    """Bath mass [kg] and analysis [wt %] after dissolving ``additions`` (material, kg).

    Element mass after: W*c + sum(a*r*x); bath mass after: W + sum(x * sum_i a_i*r_i), iron
    balance included, so the bath grows only by what actually dissolves. ``owed_pct`` [wt % of the
    bath now] is taken off the start before the additions count: the aluminium dissolved oxygen
    binds (meltfix.plan.deoxidation), so a content can come out below 0 % when the debt is not paid.
    The bath mass is left as it is: the alumina leaving takes under 0.1 % of it at 400 ppm O.
    """
    final_kg, predicted, _ = _baths_after(bath_kg, analysis_pct, additions, owed_pct or {})
    return final_kg, predicted


def _baths_after(bath_kg: float, start_pct: Mapping[str, float], additions: Iterable[tuple[Material, float]],
                 owed_pct: Mapping[str, float], at_zero: frozenset[str] = frozenset()
                 ) -> tuple[float, dict[str, float], dict[str, float]]:
    """bath_after, and the analysis after from the same start with the elements in ``at_zero`` at
    0 % (below-limit readings at their safe end against a minimum). Only those elements differ, so
    only theirs are summed again, the same terms in the same order: the same floats as a second
    mass balance from that start."""
    final_kg = bath_kg
    dissolved_kg = []  # (symbol, kg) in the order of the additions and their compositions
    for material, kg in additions:
        for symbol, pct, recovery in material.dissolving:
            dissolved = kg * pct / 100.0 * recovery
            final_kg += dissolved
            if symbol != "Fe":
                dissolved_kg.append((symbol, dissolved))
    element_kg = {symbol: bath_kg * pct / 100.0 for symbol, pct in start_pct.items()}
    for symbol, pct in owed_pct.items():
        element_kg[symbol] = element_kg.get(symbol, 0.0) - bath_kg * pct / 100.0
    for symbol, dissolved in dissolved_kg:
        element_kg[symbol] = element_kg.get(symbol, 0.0) + dissolved
    predicted = {s: 100.0 * element_kg[s] / final_kg for s in _sheet_order(tuple(element_kg))}
    if not at_zero:
        return final_kg, predicted, predicted
    zero_kg = {s: 0.0 - bath_kg * owed_pct[s] / 100.0 if s in owed_pct else 0.0 for s in at_zero if s in predicted}
    for symbol, dissolved in dissolved_kg:
        if symbol in zero_kg:
            zero_kg[symbol] += dissolved
    return final_kg, predicted, predicted | {s: 100.0 * kg / final_kg for s, kg in zero_kg.items()}


@lru_cache(maxsize=256)
def _sheet_order(symbols: tuple[str, ...]) -> tuple[str, ...]:
    """``symbols`` as an analysis sheet lists them; a bath's elements come back the same heat after heat."""
    return tuple(sorted(symbols, key=element_sort_key))


def temperature_drop_c(bath_kg: float, additions: Iterable[tuple[Material, float]]) -> float:
    """Temperature drop of the bath [°C] from the materials' chill factors [°C per kg/t]."""
    return math.fsum(material.chill_per_kg_t * kg for material, kg in additions) / (bath_kg / 1000.0)


def single_addition_kg(bath_kg: float, now_pct: float, aim_pct: float, content_pct: float,
                       recovery: float, mass_yield: float) -> float:
    """Closed form for one element and one material [kg]: the mass balance above solved for x.

    x = W (c_aim - c0) / (r a - g c_aim), all as fractions; ``mass_yield`` is g, the fraction of
    the material that dissolves (1 when the whole addition joins the bath).
    """
    denominator = recovery * content_pct / 100.0 - mass_yield * aim_pct / 100.0
    return bath_kg * (aim_pct - now_pct) / 100.0 / denominator


def recheck(heat: Heat, grade: Grade, used: Sequence[tuple[Material, float]], settings: ShopSettings
            ) -> tuple[float, dict[str, float], tuple[LimitCheck, ...]]:
    """Final bath [kg], predicted analysis [wt %] and the grade's checks after ``used`` (material, kg),
    by the plain mass balance: the plan's own re-check, also against a grade other than the one
    planned for (meltfix.plan.risk plans to tightened windows and reports against the real ones)."""
    owed = contents_owed_pct(heat, grade, settings)
    # Against a minimum a below-limit reading counts as 0, as in the plan's own rows, so a
    # closest plan reports the shortfall it was planned against.
    final_kg, predicted, lowest = _baths_after(heat.bath_kg, heat.analysis.pct, used, owed, heat.analysis.below_limit)
    return final_kg, predicted, limit_checks(grade, predicted, lowest, floors=frozenset(owed))
