"""Plans that land inside the grade with the shop's target odds: a deterministic equivalent.

Chance-constrained programming (Charnes & Cooper, "Chance-constrained programming", Management
Science 6(1), 1959): a limit that must hold with probability p, on a quantity that is normal with
standard deviation sigma, holds exactly when the predicted quantity clears the limit by
z sigma, z = the normal quantile of p. So each limit of the grade is moved inwards by z sigma and
the ordinary planner solves the tightened grade. Sigma depends on the plan (the more of a material,
the more its recovery scatters the content), so it is evaluated at the plan, linearised, and the
plan solved again until sigma stops moving (a fixed point). The heat's odds are the product of
its limits' odds in the closed form (limits taken as independent); the share each limit must reach
is adjusted until the Monte Carlo simulation of meltfix.uncertainty, the independent judge, says
the heat reaches the target.

The linearisation (all as fractions): a limit's quantity q = sum_s w_s p_s (w = 1 for one element,
the index weights for an index such as a carbon equivalent), p_s = (W c_s + sum_j y_sj x_j) / M,
M = W + sum_j g_j x_j. Then dq/dy_tj = x_j (w_t - q) / M for the dissolved yield y = a r of
element t from material j (its standard deviation is y times the recovery's relative one),
dq/dW = sum_s w_s (c_s - p_s) / M and dq/dc_s = w_s W / M; the variances add (independent errors).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np
from scipy.special import ndtr, ndtri

from meltfix.deoxidation import aluminium_owed_pct
from meltfix.heat import Heat, checked_grade, stage_material
from meltfix.massbalance import bath_after
from meltfix.planner import LIMIT_TOL_PCT, LimitCheck, Plan, PlanOptions, Planner, recheck
from meltfix.recipes import ECONOMIC, Grade, Material, RecipeBook, Scatter
from meltfix.uncertainty import (NO_SCATTER, LimitSet, Odds, Trial, analysis_sigma_pct, draw_trial, judge,
                                 world_symbols)

ECONOMIC_LEVELS = (0.5, 0.8, 0.9, 0.95, 0.98, 0.99)
"""Targets tried by ``target_odds = "economic"`` (besides the on-paper plan)."""
_MAX_SOLVES = 8
# Sigma has settled when no limit's moved by more than this share between two plans.
_SIGMA_SETTLED = 0.05
# A plan beyond the target by less than this is close enough to the cheapest: stop searching.
_CLOSE_ENOUGH = 0.01


def normal_cdf(x: np.ndarray | float) -> np.ndarray:
    """Standard normal distribution function."""
    return np.asarray(ndtr(x), dtype=float)


def normal_quantile(p: np.ndarray | float) -> np.ndarray:
    """Standard normal quantile (inverse of :func:`normal_cdf`), p in (0, 1)."""
    return np.asarray(ndtri(p), dtype=float)


@dataclass(frozen=True)
class RiskPlan:
    """A plan with its odds of landing inside the grade and what a miss would cost."""

    plan: Plan
    """Checked against the grade's real windows."""
    odds: Odds
    """The Monte Carlo verdict on the plan."""
    target: float
    """Probability [0..1] the plan had to reach."""
    correction_cost: float
    """Cost of one correction [currency] (shop.toml ``correction_cost``)."""
    economic: bool = False
    """Whether ``target`` was chosen as the least expected total cost."""

    @property
    def reached(self) -> bool:
        return self.plan.status == "optimal" and self.odds.heat >= self.target

    @property
    def expected_total_cost(self) -> float:
        """Additions + (1 - odds) x correction cost [currency]."""
        return self.plan.total_cost + (1.0 - self.odds.heat) * self.correction_cost

    def to_json(self) -> dict[str, object]:
        """The plan's JSON object with the odds fields of DESIGN §6.1."""
        line = self.plan.to_json()
        line.update({"target_odds": self.target, "odds": self.odds.to_json(),
                     "correction_cost": self.correction_cost, "expected_total_cost": self.expected_total_cost})
        if self.economic:
            line["target_odds_rule"] = ECONOMIC
        return line


# ---------------------------------------------------------------------------------------------
# The closed form


def limit_sigma_pct(heat: Heat, grade: Grade, used: Sequence[tuple[Material, float]], scatter: Scatter,
                    checks: Sequence[LimitCheck]) -> np.ndarray:
    """Standard deviation [wt %] of each checked quantity after ``used`` (material, kg), linearised
    (see the module's docstring), in the order of ``checks``."""
    symbols = world_symbols(heat, grade, [m for m, _ in used])[:-1]  # iron is the balance
    limits = LimitSet(grade, symbols, checks)
    weights = limits.weights  # (symbols, limits): 1 for an element's own limit, the index weights
    owed = aluminium_owed_pct(heat, grade)
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


def tightened(grade: Grade, inset_pct: Mapping[str, float]) -> Grade:
    """The grade with each limit (by label, "Mn min") moved inwards by its inset [wt %]; a window
    closes at most to its middle."""
    window = {}
    for s, (low, high) in grade.window_pct.items():
        room = (high - low) / 2.0
        window[s] = (low + min(inset_pct.get(f"{s} min", 0.0), room), high - min(inset_pct.get(f"{s} max", 0.0), room))
    indices = []
    for ix in grade.indices:
        both = ix.min_value is not None and ix.max_value is not None
        room = (ix.max_value - ix.min_value) / 2.0 if both else math.inf  # type: ignore[operator]
        indices.append(replace(
            ix, min_value=None if ix.min_value is None else ix.min_value + min(inset_pct.get(f"{ix.name} min", 0.0), room),
            max_value=None if ix.max_value is None else ix.max_value - min(inset_pct.get(f"{ix.name} max", 0.0), room)))
    return replace(grade, window_pct=MappingProxyType(window), indices=tuple(indices))


@dataclass(frozen=True)
class _Tried:
    plan: Plan
    odds: Odds
    sigma: np.ndarray
    """Each limit's standard deviation at the plan [wt %]."""
    z: float = 0.0
    """How far each limit was moved in for the plan [its sigmas]."""


class RiskPlanner:
    """Plans heats to a target probability of landing inside every window. Build once, plan many."""

    def __init__(self, book: RecipeBook, planner: Planner | None = None) -> None:
        self.book = book
        self.planner = planner or Planner(book)

    def plan(self, heat: Heat, target: float | str | None = None, options: PlanOptions = PlanOptions(),
             draws: int = 2000, seed: int = 0, on_paper: bool = False) -> RiskPlan:
        """The cheapest plan whose odds reach ``target`` (the shop's ``target_odds`` when None; a
        probability or ``"economic"``); where none does, the plan with the best odds and why.
        ``on_paper``: the exact-window plan, judged against the target."""
        settings = self.book.settings
        target = settings.target_odds if target is None else target
        trial = draw_trial(heat, self.book, draws, seed)
        if target == ECONOMIC:
            return self._economic(heat, options, trial, on_paper)
        assert isinstance(target, float)
        if not 0.0 < target < 1.0:
            raise ValueError("target must be between 0 and 1")
        return self._to_target(heat, target, options, trial, on_paper)

    def _risk(self, tried: _Tried, target: float) -> RiskPlan:
        return RiskPlan(tried.plan, tried.odds, target, self.book.settings.correction_cost)

    def _judged(self, heat: Heat, plan: Plan, trial: Trial) -> _Tried:
        grade = checked_grade(heat, self.book.grade(heat.grade))
        used = [(stage_material(heat, self.book, a.material), a.kg) for a in plan.additions]
        sigma = limit_sigma_pct(heat, grade, used, self.book.settings.scatter, plan.checks)
        return _Tried(plan, judge(trial, grade, plan), sigma)

    def _to_target(self, heat: Heat, target: float, options: PlanOptions, trial: Trial,
                   on_paper: bool) -> RiskPlan:
        paper = self._judged(heat, self.planner.plan(heat, options), trial)
        if on_paper:
            return self._risk(paper, target)
        if paper.plan.status != "optimal":
            return self._risk(_noted(paper, "no margin was added: the windows cannot be met even on paper"), target)
        if paper.odds.heat >= target:
            return self._risk(paper, target)
        return self._risk(self._search(heat, target, options, trial, paper), target)

    def _search(self, heat: Heat, target: float, options: PlanOptions, trial: Trial, paper: _Tried) -> _Tried:
        """The fixed point: tighten by z sigma at the last plan, solve, judge, adjust each limit's share."""
        grade = checked_grade(heat, self.book.grade(heat.grade))
        labels = [f"{c.element} {c.limit}" for c in paper.plan.checks]
        sigma = paper.sigma
        # Each limit at risk on paper must reach the k-th root of the target for the heat to reach it.
        at_risk = int(np.sum(closed_form_odds(_margins(paper.plan), sigma) < 0.999))
        share = target ** (1.0 / max(at_risk, 1))
        z_failed = math.inf  # the least z whose tightened grade could not be planned
        reached: list[_Tried] = []
        tried: list[_Tried] = [paper]
        seen = {tuple((a.material, round(a.kg, 6)) for a in paper.plan.additions)}
        for _ in range(_MAX_SOLVES):
            z = min(float(normal_quantile(share)), 0.5 * z_failed if math.isfinite(z_failed) else math.inf)
            tight = tightened(grade, dict(zip(labels, z * sigma)))
            book = replace(self.book, grades=MappingProxyType({**self.book.grades, grade.name: tight}))
            candidate = Planner(book).plan(heat, options)
            if candidate.status != "optimal":
                z_failed = z  # the windows cannot tighten this far: halve the way
                share = float(normal_cdf(z / 2.0))
                continue
            used = [(stage_material(heat, self.book, a.material), a.kg) for a in candidate.additions]
            candidate = replace(candidate, checks=recheck(heat, grade, used)[2], binding=())
            key = tuple((a.material, round(a.kg, 6)) for a in candidate.additions)
            if key in seen:
                break  # the search came back to a plan it had: whole packs, no finer step exists
            seen.add(key)
            now = replace(self._judged(heat, candidate, trial), z=z)
            tried.append(now)
            settled = bool(np.all(np.abs(now.sigma - sigma) <= _SIGMA_SETTLED * np.maximum(sigma, 1e-12)))
            sigma = now.sigma
            if now.odds.heat >= target:
                reached.append(now)
                if settled and now.odds.heat < target + _CLOSE_ENOUGH:
                    break
            elif z_failed <= z * 1.01:
                break  # short, and no more room to tighten
            # The share each limit must reach, scaled as if the heat's odds were share^k; where the
            # draws are all inside (or all out) the closed form says by how much.
            heat_odds = now.odds.heat
            if not 0.0 < heat_odds < 1.0:
                heat_odds = float(np.prod(closed_form_odds(_margins(candidate), sigma)))
            if 0.0 < heat_odds < 1.0:
                share = min(max(share ** (math.log(target) / math.log(heat_odds)), 0.5), 1.0 - 1e-9)
            elif heat_odds == 0.0:
                share = min(1.0 - (1.0 - share) / 4.0, 1.0 - 1e-9)
            else:
                break  # certain even by the closed form: nothing to adjust
        if reached:
            best = min(reached, key=lambda t: t.plan.total_cost)
            return _noted(best, f"planned to {target:.0%} odds: each limit kept {best.z:.2f} standard "
                                "deviations of its scatter inside")
        best = max(tried, key=lambda t: (t.odds.heat, -t.plan.total_cost))
        return _noted(best, _why_short(best, target))

    def _economic(self, heat: Heat, options: PlanOptions, trial: Trial, on_paper: bool) -> RiskPlan:
        """The level among ECONOMIC_LEVELS whose plan has the least expected total cost."""
        plans = [self._to_target(heat, level, options, trial, on_paper) for level in ECONOMIC_LEVELS]
        best = min(plans, key=lambda r: (r.expected_total_cost, -r.target))
        note = (f"economic target: {best.target:.0%} gives the least expected total cost "
                f"({best.expected_total_cost:,.2f} {best.plan.currency} with {best.correction_cost:,.0f} "
                f"{best.plan.currency} a correction)")
        return replace(best, plan=replace(best.plan, notes=best.plan.notes + (note,)), economic=True)


def _margins(plan: Plan) -> np.ndarray:
    return np.array([c.margin_pct for c in plan.checks])


def _why_short(best: _Tried, target: float) -> str:
    """Why no plan reached the target: the limits that hold the odds down."""
    weakest = sorted((p, label) for label, p in best.odds.limits.items() if p < 0.999)[:3]
    words = ", ".join(f"{label} {p:.1%}" for p, label in weakest) or "every limit"
    return (f"the {target:.0%} target cannot be reached: the windows cannot close further around the scatter "
            f"(best odds {best.odds.heat:.1%}; weakest: {words})")


def _noted(tried: _Tried, note: str) -> _Tried:
    return replace(tried, plan=replace(tried.plan, notes=tried.plan.notes + (note,)))


def plan_to_target(heat: Heat, book: RecipeBook, target: float | str | None = None,
                   options: PlanOptions = PlanOptions(), draws: int = 2000, seed: int = 0,
                   on_paper: bool = False) -> RiskPlan:
    """Plan one heat to a target (see :class:`RiskPlanner` to plan many)."""
    return RiskPlanner(book).plan(heat, target, options, draws, seed, on_paper)
