"""The odds search's ladder (meltfix.plan.risk): one heat's plans with every limit moved in by z of
its standard deviations, z on a grid of Z_STEP, each judged by the simulation, and the searches
along it (the least inset that reaches a target, the deepest whose windows can still be met).
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from meltfix.plan.closed_form import closed_form_odds, heat_odds_by_inset, limit_sigma_pct, normal_quantile
from meltfix.plan.massbalance import recheck
from meltfix.plan.moved_limits import tightened
from meltfix.plan.planner import Planner
from meltfix.plan.result import Odds, Plan, PlanOptions
from meltfix.plan.uncertainty import Trial, judge
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, checked_grade, stage_material
from meltfix.shop.recipes import RecipeBook

# The insets tried, in sigmas: 0.05, 0.1, ... 4.0 (4 sigma is 99.997 % for one limit); a step of
# 0.05 sigma is about 1.5 points of odds near 80 %.
Z_STEP = 0.05
Z_STEPS = 80
_Z_GRID = Z_STEP * np.arange(Z_STEPS + 1)
# Sigma has settled when no limit's moved by more than this share between two plans; a plan is
# solved at most this many times for one inset.
_SIGMA_SETTLED = 0.05
_SIGMA_ROUNDS = 2
# The odds the anchor inset of a heat's fixed point is guessed for (see Ladder).
_ANCHOR_ODDS = 0.95


@dataclass(frozen=True)
class Tried:
    """One plan of the odds search, with its odds (the simulation's) and each limit's sigma at it."""

    plan: Plan
    odds: Odds
    sigma: np.ndarray
    """Each limit's standard deviation at the plan [wt %]."""
    z: float = 0.0
    """How far each limit was moved in for the plan [its sigmas]."""
    planned_to: Grade | None = None
    """The tightened grade the plan was solved for; None = the real one."""


class Ladder:
    """The plans of one heat at the insets tried, judged on one trial.

    Sigma is iterated to its fixed point once per heat, at an anchor inset: the closed form's guess
    for _ANCHOR_ODDS from the paper plan (near the answer for the usual targets). Every inset is then
    planned once with that sigma, so each costs one solve. The anchor does not depend on the target,
    so every target walks the same ladder of plans, each deeper one no cheaper than the last.
    """

    def __init__(self, planner: Planner, heat: Heat, options: PlanOptions, trial: Trial, paper: Tried,
                 sigma: np.ndarray | None = None, closed: int | None = None) -> None:
        self.planner, self.heat, self.options, self.trial, self.paper = planner, heat, options, trial, paper
        self.grade = checked_grade(heat, planner.book.grade(heat.grade))
        self.labels = [f"{c.element} {c.limit}" for c in paper.plan.checks]
        self.plans: dict[int, Tried | None] = {0: paper}
        if closed is not None:  # the windows closed there on the relaxation: in whole packs too
            self.plans[closed] = None
        self.sigma = paper.sigma if sigma is None else sigma
        """Each limit's sigma [wt %] every inset is planned with: the fixed point at the anchor, or
        the one given (the relaxed ladder's, for the ladder in whole packs that follows it)."""
        if sigma is not None:
            return
        anchor = least_inset(paper, _ANCHOR_ODDS)
        anchor = (Z_STEPS + 1) // 2 if anchor is None else min(max(anchor, 1), Z_STEPS)
        for round_ in range(_SIGMA_ROUNDS):  # the fixed point, from the paper plan's sigma
            tried = self.plans[anchor] = self._solved(anchor * Z_STEP)
            if tried is None or round_ == _SIGMA_ROUNDS - 1:
                break
            if np.all(np.abs(tried.sigma - self.sigma) <= _SIGMA_SETTLED * np.maximum(self.sigma, 1e-12)):
                break  # settled: every inset is planned with the sigma this plan was made with
            self.sigma = tried.sigma

    def least_closed(self) -> int | None:
        """The least inset tried whose windows could not be met (None: none so far)."""
        return min((k for k, t in self.plans.items() if t is None), default=None)

    def best_odds(self) -> int:
        """The inset tried whose plan has the best odds (the least of equals)."""
        planned = {k: t for k, t in self.plans.items() if t is not None}
        return min(planned, key=lambda k: (-planned[k].odds.heat, k))

    def at(self, k: int) -> Tried | None:
        if k not in self.plans:
            self.plans[k] = self._solved(k * Z_STEP)
        return self.plans[k]

    def _solved(self, z: float) -> Tried | None:
        """The plan with every limit moved in by z sigma; None when the tightened grade cannot be met."""
        book, heat, grade = self.planner.book, self.heat, self.grade
        tight = tightened(grade, dict(zip(self.labels, z * self.sigma)))
        candidate = self.planner.plan_inside(heat, self.options, tight)
        if candidate is None or candidate.status != "optimal":
            return None
        used = [(stage_material(heat, book, a.material), a.kg) for a in candidate.additions]
        candidate = replace(candidate, checks=recheck(heat, grade, used, book.settings)[2])
        return replace(judged(heat, book, candidate, self.trial), z=z, planned_to=tight)



def reaches(tried: Tried | None, target: float) -> bool:
    return tried is not None and tried.odds.heat >= target and tried.odds.resolves(target)


def deepest_open(ladder: Ladder, closed: int) -> int:
    """The deepest inset above 0 and below ``closed`` whose windows can still be met on ``ladder``
    (0 when none), by bisection from the deepest known to be open: an inset that cannot be met makes
    every deeper one so."""
    low, high = max(k for k, t in ladder.plans.items() if t is not None and k < closed), closed
    while high - low > 1:
        k = (low + high) // 2
        low, high = (k, high) if ladder.at(k) is not None else (low, k)
    return low


def deeper_while_rising(ladder: Ladder, k: int) -> None:
    """Plan ``ladder`` one inset deeper than ``k`` at a time while the odds rise and the windows close."""
    last = ladder.at(k)
    while k < Z_STEPS and last is not None:
        k += 1
        deeper = ladder.at(k)
        if deeper is None or deeper.odds.heat <= last.odds.heat:
            return
        last = deeper


def least_reaching(ladder: Ladder, target: float, low: int, guess: int | None) -> int:
    """The least grid step above ``low`` whose plan on ``ladder`` reaches ``target`` (past the grid:
    Z_STEPS + 1), by a bracket that only narrows: each inset tried is the closed form's guess when it
    falls inside the bracket, else a step from the bound just moved that doubles while the guesses
    stay outside (whole packs make the odds jump where no closed form sees it)."""
    high = min((k for k, t in ladder.plans.items() if t is None and k > low), default=Z_STEPS + 1)
    stride, reached = 1, False
    while high - low > 1:
        if guess is not None and low < guess < high:
            k, stride = guess, 1
        elif guess is None or (high in ladder.plans and ladder.plans[high] is None):
            k = (low + high) // 2  # where the windows stop closing, the closed form says nothing
        else:
            k = max(high - stride, low + 1) if reached else min(low + stride, high - 1)
            stride *= 2
        tried = ladder.at(k)
        # Reached, or the windows cannot close this far: deeper is no better.
        reached = tried is None or reaches(tried, target)
        low, high = (low, k) if reached else (k, high)
        guess = None if tried is None else least_inset(tried, target)
    return high

def least_inset(tried: Tried, target: float) -> int | None:
    """The closed form's guess at the least grid step whose plan reaches ``target``, from one plan:
    its closed-form odds at each step, moved by the gap (as a normal quantile) between the
    simulation's verdict on this plan and the closed form's; None when no step would reach it."""
    margins = np.array([c.margin_pct for c in tried.plan.checks])
    closed = float(np.prod(closed_form_odds(margins, tried.sigma)))
    by_inset = np.clip(heat_odds_by_inset(margins, tried.sigma, tried.z, _Z_GRID), 1e-9, 1 - 1e-9)
    gap = 0.0
    if 0.0 < closed < 1.0 and 0.0 < tried.odds.heat < 1.0:
        gap = float(normal_quantile(tried.odds.heat) - normal_quantile(closed))
    reached = np.flatnonzero(normal_quantile(by_inset) + gap >= normal_quantile(target))
    return int(reached[0]) if reached.size else None


def judged(heat: Heat, book: RecipeBook, plan: Plan, trial: Trial) -> Tried:
    """A plan with its odds (the simulation's, on ``trial``) and each limit's sigma at it."""
    grade = checked_grade(heat, book.grade(heat.grade))
    used = [(stage_material(heat, book, a.material), a.kg) for a in plan.additions]
    sigma = limit_sigma_pct(heat, grade, used, book.settings, plan.checks)
    return Tried(plan, judge(trial, grade, plan.checks, plan.additions), sigma)
