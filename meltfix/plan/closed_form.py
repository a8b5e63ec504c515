"""A plan's odds in closed form: each limit's standard deviation at the plan, and the normal distribution.

A limit's quantity (an element's content, or an index such as a carbon equivalent) is taken as
normal around the plan's prediction, its standard deviation linearised at the plan (all as
fractions): q = sum_s w_s p_s (w = 1 for one element, the index weights for an index),
p_s = (W c_s + sum_j y_sj x_j) / M, M = W + sum_j g_j x_j. Then dq/dy_tj = x_j (w_t - q) / M for the
dissolved yield y = a r of element t from material j (its standard deviation is y times the
recovery's relative one), dq/dW = sum_s w_s (c_s - p_s) / M and dq/dc_s = w_s W / M; the variances
add (independent errors). A limit's odds are then Phi(margin / sigma). meltfix.plan.risk plans with
this; the Monte Carlo simulation of meltfix.plan.uncertainty judges every plan.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Sequence

import numpy as np

from meltfix.plan.massbalance import bath_after
from meltfix.plan.result import LIMIT_TOL_PCT, LimitCheck
from meltfix.plan.treatment import contents_owed_pct
from meltfix.plan.uncertainty import NO_SCATTER, LimitSet, analysis_sigma_pct, world_symbols
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.settings import Scatter, ShopSettings

# The normal distribution from the standard library, element by element (a plan has a few dozen
# limits at most): SciPy's special functions cost a fifth of a second to import, more than a plan.
# Phi(x) = erfc(-x / sqrt 2) / 2: erfc keeps its relative accuracy far into the lower tail.
_CDF = np.frompyfunc(lambda x: 0.5 * math.erfc(-x / math.sqrt(2.0)), 1, 1)


@functools.cache
def _quantile() -> np.ufunc:
    # statistics (and the fractions and decimal it loads) only once a quantile is asked for: a heat
    # that reaches its target on paper never does. inv_cdf is Wichura's algorithm AS 241 (Applied
    # Statistics 37(3), 1988), about 1e-16 relative.
    from statistics import NormalDist

    return np.frompyfunc(NormalDist().inv_cdf, 1, 1)


def normal_cdf(x: np.ndarray | float) -> np.ndarray:
    """Standard normal distribution function."""
    return np.asarray(_CDF(np.asarray(x, dtype=float)), dtype=float)


def normal_quantile(p: np.ndarray | float) -> np.ndarray:
    """Standard normal quantile (inverse of :func:`normal_cdf`), p in (0, 1)."""
    return np.asarray(_quantile()(np.asarray(p, dtype=float)), dtype=float)


def limit_sigma_pct(heat: Heat, grade: Grade, used: Sequence[tuple[Material, float]], settings: ShopSettings,
                    checks: Sequence[LimitCheck], scatter: Scatter | None = None) -> np.ndarray:
    """Standard deviation [wt %] of each checked quantity after ``used`` (material, kg), linearised
    (see the module's docstring), in the order of ``checks``; ``scatter`` defaults to the shop's."""
    scatter = settings.scatter if scatter is None else scatter
    symbols = world_symbols(heat, grade, [m for m, _ in used])[:-1]  # iron is the balance
    limits = LimitSet(grade, symbols, checks)
    weights = limits.weights  # (symbols, limits): 1 for an element's own limit, the index weights
    owed = contents_owed_pct(heat, grade, settings)
    final_kg, predicted = bath_after(heat.bath_kg, heat.analysis.pct, used, owed)
    now = np.array([heat.analysis.get(s) - owed.get(s, 0.0) for s in symbols]) / 100.0
    after = np.array([predicted.get(s, 0.0) for s in symbols]) / 100.0
    q = after @ weights  # (limits,) as fractions
    variance = np.zeros(len(checks))
    if scatter != NO_SCATTER:
        for material, kg in used:
            sd = np.array([material.recovery_scatter.get(s, scatter.recovery) * material.yield_pct(s) / 100.0
                           for s in symbols]) * kg  # kg of each element, one standard deviation
            variance += (((weights - q) * sd[:, None]) ** 2).sum(axis=0)
    variance += (scatter.bath * heat.bath_kg * ((now - after) @ weights)) ** 2
    measured = np.array([heat.analysis.get(s) for s in symbols])
    sigma_c = scatter.analysis * analysis_sigma_pct(symbols, measured) / 100.0
    sigma_c[[s in heat.analysis.below_limit for s in symbols]] = 0.0  # planned at the safe end already
    variance += ((weights * (sigma_c * heat.bath_kg)[:, None]) ** 2).sum(axis=0)
    return 100.0 * np.sqrt(variance) / final_kg


def closed_form_odds(margins_pct: np.ndarray, sigma_pct: np.ndarray) -> np.ndarray:
    """Each limit's odds from its margin [wt %] and standard deviation [wt %] (normal)."""
    exact = np.where(margins_pct >= -LIMIT_TOL_PCT, 1.0, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.where(sigma_pct > 0, normal_cdf(margins_pct / np.where(sigma_pct > 0, sigma_pct, 1.0)), exact)


# ---------------------------------------------------------------------------------------------
# Planning to a target


def heat_odds_by_inset(margins_pct: np.ndarray, sigma_pct: np.ndarray, z: float, z_grid: np.ndarray) -> np.ndarray:
    """The heat's closed-form odds (its limits taken as independent) of the plan at each inset of
    ``z_grid`` [sigmas], predicted from one plan made at inset ``z`` with these margins [wt %] and
    standard deviations [wt %]: a limit the inset holds (its margin z sigma) moves with the inset,
    any other keeps its margin unless the inset asks for more."""
    with np.errstate(divide="ignore", invalid="ignore"):
        clear = np.where(sigma_pct > 0, margins_pct / np.where(sigma_pct > 0, sigma_pct, 1.0), math.inf)
    held = clear <= z + 0.05
    clear_at = np.where(held, z_grid[:, None], np.maximum(clear, z_grid[:, None]))  # (insets, limits)
    return np.prod(normal_cdf(np.minimum(clear_at, 40.0)), axis=1)
