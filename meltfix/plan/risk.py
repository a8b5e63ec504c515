"""Plans that land inside the grade with the shop's target odds: a deterministic equivalent.

Chance-constrained programming (Charnes & Cooper, "Chance-constrained programming", Management
Science 6(1), 1959): a limit that must hold with probability p, on a quantity that is normal with
standard deviation sigma, holds exactly when the predicted quantity clears the limit by
z sigma, z = the normal quantile of p. So each limit of the grade is moved inwards by z sigma and
the ordinary planner solves the tightened grade. Sigma depends on the plan (the more of a material,
the more its recovery scatters the content), so it is evaluated at the plan, linearised
(meltfix.plan.closed_form), and the plan solved again until sigma stops moving (a fixed point).
The inset z is the least on a grid whose plan the Monte Carlo simulation of
meltfix.plan.uncertainty, the independent judge, finds at or above the target. The closed form
(the heat's odds as the product of its limits', taken as independent, scaled by what the
simulation found for the last plan) only says which inset to try next, so that few are solved.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

import numpy as np

from meltfix.plan.closed_form import closed_form_odds, heat_odds_by_inset, limit_sigma_pct, normal_quantile
from meltfix.plan.massbalance import recheck
from meltfix.plan.moved_limits import loosened, real_name, tightened
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, Odds, Plan, PlanOptions, RiskPlan
from meltfix.plan.uncertainty import Trial, judge
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, checked_grade, stage_material
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ECONOMIC

ECONOMIC_LEVELS = (0.5, 0.8, 0.9, 0.95, 0.98, 0.99)
"""Targets tried by ``target_odds = "economic"`` (besides the on-paper plan)."""
# The insets tried, in sigmas: 0.05, 0.1, ... 4.0 (4 sigma is 99.997 % for one limit); a step of
# 0.05 sigma is about 1.5 points of odds near 80 %.
_Z_STEP = 0.05
_Z_STEPS = 80
_Z_GRID = _Z_STEP * np.arange(_Z_STEPS + 1)
# Sigma has settled when no limit's moved by more than this share between two plans; a plan is
# solved at most this many times for one inset.
_SIGMA_SETTLED = 0.05
_SIGMA_ROUNDS = 2
# The odds the anchor inset of a heat's fixed point is guessed for (see _Ladder).
_ANCHOR_ODDS = 0.95
# Bindings confirmed by a re-solve each (the largest first): each costs one more solve.
_MAX_CONFIRMED = 4
# A saving under a cent is no reason to move a limit.
_LEAST_SHOWN = 0.005


@dataclass(frozen=True)
class _Tried:
    plan: Plan
    odds: Odds
    sigma: np.ndarray
    """Each limit's standard deviation at the plan [wt %]."""
    z: float = 0.0
    """How far each limit was moved in for the plan [its sigmas]."""
    planned_to: Grade | None = None
    """The tightened grade the plan was solved for; None = the real one."""


class RiskPlanner:
    """Plans heats to a target probability of landing inside every window. Build once, plan many."""

    def __init__(self, book: RecipeBook, planner: Planner | None = None) -> None:
        self.book = book
        self.planner = planner or Planner(book)

    def plan(self, heat: Heat, target: float | str | None = None, options: PlanOptions = PlanOptions(),
             draws: int = 2000, seed: int = 0, on_paper: bool = False, to_aims: bool = False) -> RiskPlan:
        """The cheapest plan whose odds reach ``target`` (the shop's ``target_odds`` when None; a
        probability or ``"economic"``); where none does, the plan with the best odds and why.
        ``on_paper``: the exact-window plan, judged against the target. A heat already inside every
        window at the target odds gets an empty plan unless ``to_aims`` asks to pull it to the aims."""
        settings = self.book.settings
        target = settings.target_odds if target is None else target
        trial = Trial(heat, self.book, draws, seed)
        if target == ECONOMIC:
            return self._economic(heat, options, trial, on_paper, to_aims)
        assert isinstance(target, float)
        if not 0.0 < target < 1.0:
            raise ValueError("target must be between 0 and 1")
        return self._to_target(heat, target, options, trial, on_paper, to_aims)

    def _risk(self, tried: _Tried, target: float) -> RiskPlan:
        return RiskPlan(tried.plan, tried.odds, target, self.book.settings.correction_cost)

    def _judged(self, heat: Heat, plan: Plan, trial: Trial) -> _Tried:
        grade = checked_grade(heat, self.book.grade(heat.grade))
        used = [(stage_material(heat, self.book, a.material), a.kg) for a in plan.additions]
        sigma = limit_sigma_pct(heat, grade, used, self.book.settings, plan.checks)
        return _Tried(plan, judge(trial, grade, plan.checks, plan.additions), sigma)

    def _to_target(self, heat: Heat, target: float, options: PlanOptions, trial: Trial,
                   on_paper: bool, to_aims: bool = False) -> RiskPlan:
        grade = checked_grade(heat, self.book.grade(heat.grade))
        unchanged = recheck(heat, grade, [], self.book.settings)[2]
        if (not to_aims and all(c.margin_pct >= -LIMIT_TOL_PCT for c in unchanged)
                and judge(trial, grade, unchanged).heat >= target):
            # Inside every window already, and likely enough as it stands: nothing to add, unless
            # the cheapest plan inside finds something the heat owes (a treatment, a deoxidation).
            bare = self._judged(heat, self.planner.plan(heat, replace(options, use_aim=False)), trial)
            if not bare.plan.additions and bare.odds.heat >= target:
                return self._risk(_noted(bare, f"the heat is inside every window with {bare.odds.heat:.1%} odds "
                                               "as it stands: nothing to add (--to-aims pulls it to the aims)"),
                                  target)
        paper = self._judged(heat, self.planner.plan(heat, options), trial)
        if paper.plan.status != "optimal":
            paper = self._without_bystanders(heat, options, trial, paper)
        if on_paper:
            return self._risk(self._confirmed(heat, options, paper), target)
        if paper.plan.status != "optimal":
            return self._risk(_noted(paper, "no margin was added: the windows cannot be met even on paper"), target)
        if paper.odds.heat < target:
            paper = self._search(heat, target, options, trial, paper)
        return self._risk(self._confirmed(heat, options, paper), target)

    def _without_bystanders(self, heat: Heat, options: PlanOptions, trial: Trial, closest: _Tried) -> _Tried:
        """The closest plan without the materials that move no missed limit towards its window.

        The least-violation plan will use any alloy as a few kilograms of diluent (ferrosilicon or
        aluminium to take carbon down by a thousandth); a melter adds only what acts on the missed
        limits: dilution materials against a maximum, carriers of the element against a minimum
        (a material whose content of it is a trace carries none).
        Materials that keep another limit inside (a minimum the plan meets with nothing to spare) or
        lift an element towards its aim stay.
        """
        grade = checked_grade(heat, self.book.grade(heat.grade))
        missed = [v for v in closest.plan.violations]
        # The minimums the plan works for: missed or met with nothing to spare.
        needed = {c.element for c in closest.plan.checks if c.limit == "min" and c.margin_pct <= 1e-6}
        # ... and the aims the plan pulls towards from below (an alloy that lifts Mn to its aim acts).
        needed |= {s for s, aim in grade.aim_pct.items() if options.use_aim and heat.analysis.get(s) < aim}
        indices = {ix.name: ix for ix in grade.indices}

        def carries(material: Material, symbol: str) -> bool:
            # A carrier holds the element as one of its principal contents, at least a twentieth of
            # its largest (iron aside): the 0.01 % carbon in nickel or the 0.5 % Mn in
            # ferroniobium only thin a bath that holds more, so they carry nothing (common practice).
            largest = max((pct for s, pct in material.composition_pct.items() if s != "Fe"), default=0.0)
            return material.yield_pct(symbol) > 0 and material.composition_pct.get(symbol, 0.0) >= largest / 20.0

        def acts(name: str) -> bool:
            material = stage_material(heat, self.book, name)
            if material.kind == "dilution":
                return any(v.limit == "max" for v in missed)
            for element in needed:
                terms = indices[element].terms if element in indices else {element: 1.0}
                if any(w > 0 and carries(material, s) for s, w in terms.items()):
                    return True
            return False

        before = {(v.element, v.limit) for v in missed}
        off: frozenset[str] = frozenset()
        plan = closest.plan
        for _ in range(3):  # leaving some out can bring another diluent in: leave that out too
            idle = frozenset(a.material for a in plan.additions if not acts(a.material))
            if not idle:
                break
            again = self.planner.plan(heat.with_changes(switched_off=heat.switched_off | off | idle), options)
            if again.status == "optimal" or not {(v.element, v.limit) for v in again.violations} <= before:
                break  # switching them off changed which limits are missed: they were not idle
            off, plan = off | idle, again
        if not off:
            return closest
        return _noted(self._judged(heat, plan, trial),
                      f"left out {', '.join(sorted(off))}: none of them moves a missed limit towards its window")

    def _confirmed(self, heat: Heat, options: PlanOptions, tried: _Tried) -> _Tried:
        """Keep only what holds the cost up in real money: for the limits the duals rank highest,
        the change in the additions' cost when the limit moves, planned again with it moved. The
        re-solve's figure is the one shown: with the aims on, the duals price the aim penalty too and
        are no money; the aims themselves are a penalty and never shown."""
        plan = tried.plan
        real = checked_grade(heat, self.book.grade(heat.grade))
        grade = tried.planned_to or real
        confirmed = []
        for binding in [b for b in plan.binding if not b.name.endswith(" aim")][:_MAX_CONFIRMED]:
            moved = loosened(heat, self.book, grade, binding.name)
            if moved is None:
                continue
            again_heat, again_grade = moved
            again = self.planner.plan(again_heat, options, again_grade, start=plan)
            saving = plan.total_cost - again.total_cost
            if again.status == "optimal" and saving >= _LEAST_SHOWN:
                confirmed.append(replace(binding, name=real_name(binding.name, real), saving=saving))
        confirmed.sort(key=lambda b: -b.saving)
        return replace(tried, plan=replace(plan, binding=tuple(confirmed)))

    def _search(self, heat: Heat, target: float, options: PlanOptions, trial: Trial, paper: _Tried) -> _Tried:
        """The least inset (on the grid of _Z_STEP sigmas) whose plan the simulation finds at or
        above the target.

        Packs and minimum additions make a plan a branch and bound, many times dearer than its
        linear relaxation, so the insets are first searched on the relaxation (a ladder of LPs: loose
        amounts, no minimums), and the plans as the shop adds them then start from the least relaxed
        inset that reaches the target and go deeper only while they fall short. An inset whose
        relaxation cannot be met cannot be met in whole packs either. Where no relaxed plan reaches
        the target, the plans as added start at the relaxed plan with the best odds (or, where its
        windows cannot be met in packs, at the deepest inset where they can) and go deeper while the
        odds still rise (unless that plan in packs reaches it after all). Both ladders are
        the target's own only through where they start, and a deeper inset never makes a plan
        cheaper nor less likely inside, so a higher target still gets a plan at least as costly and
        at least as safe.
        """
        start, sigma, closed, best_relaxed = 0, None, None, None
        if not options.relaxed:
            loose = _Ladder(self, heat, replace(options, relaxed=True), trial, paper)
            reached = _least_reaching(loose, target, 0, _least_inset(paper, target))
            sigma = loose.sigma
            closed = min((k for k, t in loose.plans.items() if t is None), default=None)
            if reached <= _Z_STEPS and loose.plans.get(reached) is not None:
                start = reached
            else:
                best_relaxed = max((t.odds.heat, -k) for k, t in loose.plans.items() if t is not None)[1] * -1
        ladder = _Ladder(self, heat, options, trial, paper, sigma, closed)
        if best_relaxed is not None and not _reaches(ladder.at(best_relaxed), target):
            _deeper_while_rising(ladder, best_relaxed if ladder.at(best_relaxed) else _deepest_open(ladder, best_relaxed))
            return self._short(ladder, target, trial)
        guess = start if start > 0 else _least_inset(paper, target)
        high = _least_reaching(ladder, target, max(start - 1, 0), guess)
        best = ladder.plans.get(high)
        if best is not None and _reaches(best, target):
            return _noted(best, f"planned to {target:.0%} odds: each limit kept {best.z:.2f} standard "
                                "deviations of its scatter inside")
        if best is None:  # the windows closed in packs before the odds reached the target
            _deepest_open(ladder, high)
        return self._short(ladder, target, trial)

    def _short(self, ladder: _Ladder, target: float, trial: Trial) -> _Tried:
        """The plan with the best odds the ladder found, and why it falls short of the target."""
        best = max([t for t in ladder.plans.values() if t is not None], key=lambda t: (t.odds.heat, -t.plan.total_cost))
        if not best.odds.resolves(target):
            return _noted(best, f"a {target:.4%} target cannot be told from certainty with {trial.draws:,} draws "
                                f"(--draws); best odds {best.odds.heat:.1%}")
        return _noted(best, _why_short(best, target))

    def _economic(self, heat: Heat, options: PlanOptions, trial: Trial, on_paper: bool, to_aims: bool) -> RiskPlan:
        """The level among ECONOMIC_LEVELS whose plan has the least expected total cost."""
        plans = [self._to_target(heat, level, options, trial, on_paper, to_aims) for level in ECONOMIC_LEVELS]
        best = min(plans, key=lambda r: (r.expected_total_cost, -r.target))
        note = (f"economic target: {best.target:.0%} gives the least expected total cost "
                f"({best.expected_total_cost:,.2f} {best.plan.currency} with {best.correction_cost:,.0f} "
                f"{best.plan.currency} a correction)")
        return replace(best, plan=replace(best.plan, notes=best.plan.notes + (note,)), economic=True)


class _Ladder:
    """The plans of one heat at the insets tried, judged on one trial.

    Sigma is iterated to its fixed point once per heat, at an anchor inset: the closed form's guess
    for _ANCHOR_ODDS from the paper plan (near the answer for the usual targets). Every inset is then
    planned once with that sigma, so each costs one solve. The anchor does not depend on the target,
    so every target walks the same ladder of plans, each deeper one no cheaper than the last.
    """

    def __init__(self, risk: RiskPlanner, heat: Heat, options: PlanOptions, trial: Trial, paper: _Tried,
                 sigma: np.ndarray | None = None, closed: int | None = None) -> None:
        self.risk, self.heat, self.options, self.trial, self.paper = risk, heat, options, trial, paper
        self.grade = checked_grade(heat, risk.book.grade(heat.grade))
        self.labels = [f"{c.element} {c.limit}" for c in paper.plan.checks]
        self.plans: dict[int, _Tried | None] = {0: paper}
        if closed is not None:  # the windows closed there on the relaxation: in whole packs too
            self.plans[closed] = None
        self.sigma = paper.sigma if sigma is None else sigma
        """Each limit's sigma [wt %] every inset is planned with: the fixed point at the anchor, or
        the one given (a loose ladder's, for the ladder in whole packs that follows it)."""
        if sigma is not None:
            return
        anchor = _least_inset(paper, _ANCHOR_ODDS)
        anchor = (_Z_STEPS + 1) // 2 if anchor is None else min(max(anchor, 1), _Z_STEPS)
        for round_ in range(_SIGMA_ROUNDS):  # the fixed point, from the paper plan's sigma
            tried = self.plans[anchor] = self._solved(anchor * _Z_STEP)
            if tried is None or round_ == _SIGMA_ROUNDS - 1:
                break
            if np.all(np.abs(tried.sigma - self.sigma) <= _SIGMA_SETTLED * np.maximum(self.sigma, 1e-12)):
                break  # settled: every inset is planned with the sigma this plan was made with
            self.sigma = tried.sigma

    def at(self, k: int) -> _Tried | None:
        if k not in self.plans:
            self.plans[k] = self._solved(k * _Z_STEP)
        return self.plans[k]

    def _solved(self, z: float) -> _Tried | None:
        """The plan with every limit moved in by z sigma; None when the tightened grade cannot be met."""
        book, heat, grade = self.risk.book, self.heat, self.grade
        tight = tightened(grade, dict(zip(self.labels, z * self.sigma)))
        candidate = self.risk.planner.plan_inside(heat, self.options, tight)
        if candidate is None or candidate.status != "optimal":
            return None
        used = [(stage_material(heat, book, a.material), a.kg) for a in candidate.additions]
        candidate = replace(candidate, checks=recheck(heat, grade, used, book.settings)[2])
        return replace(self.risk._judged(heat, candidate, self.trial), z=z, planned_to=tight)



def _reaches(tried: _Tried | None, target: float) -> bool:
    return tried is not None and tried.odds.heat >= target and tried.odds.resolves(target)


def _deepest_open(ladder: _Ladder, closed: int) -> int:
    """The deepest inset above 0 and below ``closed`` whose windows can still be met on ``ladder``
    (0 when none), by bisection from the deepest known to be open: an inset that cannot be met makes
    every deeper one so."""
    low, high = max(k for k, t in ladder.plans.items() if t is not None and k < closed), closed
    while high - low > 1:
        k = (low + high) // 2
        low, high = (k, high) if ladder.at(k) is not None else (low, k)
    return low


def _deeper_while_rising(ladder: _Ladder, k: int) -> None:
    """Plan ``ladder`` one inset deeper than ``k`` at a time while the odds rise and the windows close."""
    last = ladder.at(k)
    while k < _Z_STEPS and last is not None:
        k += 1
        deeper = ladder.at(k)
        if deeper is None or deeper.odds.heat <= last.odds.heat:
            return
        last = deeper


def _least_reaching(ladder: _Ladder, target: float, low: int, guess: int | None) -> int:
    """The least grid step above ``low`` whose plan on ``ladder`` reaches ``target`` (past the grid:
    _Z_STEPS + 1), by a bracket that only narrows: each inset tried is the closed form's guess when it
    falls inside the bracket, else a step from the bound just moved that doubles while the guesses
    stay outside (whole packs make the odds jump where no closed form sees it)."""
    high = min((k for k, t in ladder.plans.items() if t is None and k > low), default=_Z_STEPS + 1)
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
        reached = tried is None or _reaches(tried, target)
        low, high = (low, k) if reached else (k, high)
        guess = None if tried is None else _least_inset(tried, target)
    return high

def _least_inset(tried: _Tried, target: float) -> int | None:
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
