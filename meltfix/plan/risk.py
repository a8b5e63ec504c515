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

from dataclasses import replace

from meltfix.plan.massbalance import recheck
from meltfix.plan.moved_limits import loosened, real_name
from meltfix.plan.odds_ladder import (Z_STEPS, Ladder, Tried, deeper_while_rising, deepest_open, judged, least_inset,
                                      least_reaching, reaches)
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, Addition, Binding, PlanOptions, RiskPlan
from meltfix.plan.uncertainty import Trial, judge
from meltfix.shop.heat import Heat, checked_grade, stage_material
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ECONOMIC

ECONOMIC_LEVELS = (0.5, 0.8, 0.9, 0.95, 0.98, 0.99)
"""Targets tried by ``target_odds = "economic"`` (besides the on-paper plan)."""
# Bindings confirmed by a re-solve each (the largest first): each costs one more solve.
_MAX_CONFIRMED = 4
# A saving under a cent is no reason to move a limit.
_LEAST_SHOWN = 0.005


class _OneHeat:
    """One heat's plans, worked out once and shared by every target tried for it (the economic
    target tries six): the plan on paper, the ladders of insets, the re-solves that price bindings."""

    def __init__(self, risk: RiskPlanner, heat: Heat, options: PlanOptions, trial: Trial) -> None:
        self.risk, self.heat, self.options, self.trial = risk, heat, options, trial
        self._paper: Tried | None = None
        self._bare: Tried | None = None
        self._relaxed: Ladder | None = None
        self._in_packs: Ladder | None = None
        self.bindings: dict[tuple[float, tuple[Addition, ...]], tuple[Binding, ...]] = {}
        """What holds the cost up, per plan (its inset and additions) once re-solved."""

    def paper(self) -> Tried:
        """The plan to the exact windows (a closest plan without its bystanders)."""
        if self._paper is None:
            risk, heat = self.risk, self.heat
            self._paper = judged(heat, risk.book, risk.planner.plan(heat, self.options), self.trial)
            if self._paper.plan.status != "optimal":
                self._paper = risk._without_bystanders(heat, self.options, self.trial, self._paper)
        return self._paper

    def relaxed(self) -> Ladder:
        """The insets planned on the linear relaxation (loose amounts, no minimums): one LP each."""
        if self._relaxed is None:
            self._relaxed = Ladder(self.risk.planner, self.heat, replace(self.options, relaxed=True), self.trial,
                                   self.paper())
        return self._relaxed

    def in_packs(self) -> Ladder:
        """The insets planned as the shop adds them, with the relaxed ladder's sigma: an inset whose
        relaxation cannot be met cannot be met in packs either."""
        if self._in_packs is None:
            relaxed = None if self.options.relaxed else self.relaxed()
            self._in_packs = Ladder(self.risk.planner, self.heat, self.options, self.trial, self.paper(),
                                    None if relaxed is None else relaxed.sigma,
                                    None if relaxed is None else relaxed.least_closed())
        return self._in_packs

    def bare(self) -> Tried:
        """The cheapest plan inside, aims aside."""
        if self._bare is None:
            plan = self.risk.planner.plan(self.heat, replace(self.options, use_aim=False))
            self._bare = judged(self.heat, self.risk.book, plan, self.trial)
        return self._bare


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
        work = _OneHeat(self, heat, options, Trial(heat, self.book, draws, seed))
        if target == ECONOMIC:
            return self._economic(work, on_paper, to_aims)
        assert isinstance(target, float)
        if not 0.0 < target < 1.0:
            raise ValueError("target must be between 0 and 1")
        return self._to_target(work, target, on_paper, to_aims)

    def _risk(self, tried: Tried, target: float) -> RiskPlan:
        return RiskPlan(tried.plan, tried.odds, target, self.book.settings.correction_cost)

    def _to_target(self, work: _OneHeat, target: float, on_paper: bool, to_aims: bool = False) -> RiskPlan:
        heat = work.heat
        grade = checked_grade(heat, self.book.grade(heat.grade))
        unchanged = recheck(heat, grade, [], self.book.settings)[2]
        if (not to_aims and all(c.margin_pct >= -LIMIT_TOL_PCT for c in unchanged)
                and judge(work.trial, grade, unchanged).heat >= target):
            # Inside every window already, and likely enough as it stands: nothing to add, unless
            # the cheapest plan inside finds something the heat owes (a treatment, a deoxidation).
            bare = work.bare()
            if not bare.plan.additions and bare.odds.heat >= target:
                return self._risk(_noted(bare, f"the heat is inside every window with {bare.odds.heat:.1%} odds "
                                               "as it stands: nothing to add (--to-aims pulls it to the aims)"),
                                  target)
        paper = work.paper()
        if on_paper:
            return self._risk(self._confirmed(work, paper), target)
        if paper.plan.status != "optimal":
            return self._risk(_noted(paper, "no margin was added: the windows cannot be met even on paper"), target)
        if paper.odds.heat < target:
            paper = self._search(work, target)
        return self._risk(self._confirmed(work, paper), target)

    def _without_bystanders(self, heat: Heat, options: PlanOptions, trial: Trial, closest: Tried) -> Tried:
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
        return _noted(judged(heat, self.book, plan, trial),
                      f"left out {', '.join(sorted(off))}: none of them moves a missed limit towards its window")

    def _confirmed(self, work: _OneHeat, tried: Tried) -> Tried:
        """Keep only what holds the cost up in real money: for the limits the duals rank highest,
        the change in the additions' cost when the limit moves, planned again with it moved. The
        re-solve's figure is the one shown: with the aims on, the duals price the aim penalty too and
        are no money; the aims themselves are a penalty and never shown."""
        plan, heat = tried.plan, work.heat
        key = (tried.z, plan.additions)
        if key not in work.bindings:
            real = checked_grade(heat, self.book.grade(heat.grade))
            grade = tried.planned_to or real
            confirmed = []
            for binding in [b for b in plan.binding if not b.name.endswith(" aim")][:_MAX_CONFIRMED]:
                moved = loosened(heat, self.book, grade, binding.name)
                if moved is None:
                    continue
                again_heat, again_grade = moved
                again = self.planner.plan(again_heat, work.options, again_grade, start=plan)
                saving = plan.total_cost - again.total_cost
                if again.status == "optimal" and saving >= _LEAST_SHOWN:
                    confirmed.append(replace(binding, name=real_name(binding.name, real), saving=saving))
            work.bindings[key] = tuple(sorted(confirmed, key=lambda b: -b.saving))
        return replace(tried, plan=replace(plan, binding=work.bindings[key]))

    def _search(self, work: _OneHeat, target: float) -> Tried:
        """The least inset (on the grid of Z_STEP sigmas) whose plan the simulation finds at or
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
        paper = work.paper()
        start, best_relaxed = 0, None
        if not work.options.relaxed:
            relaxed = work.relaxed()
            reached = least_reaching(relaxed, target, 0, least_inset(paper, target))
            if reached <= Z_STEPS and relaxed.plans.get(reached) is not None:
                start = reached
            else:
                best_relaxed = relaxed.best_odds()
        ladder = work.in_packs()
        if best_relaxed is not None and not reaches(ladder.at(best_relaxed), target):
            deeper_while_rising(ladder, best_relaxed if ladder.at(best_relaxed) else deepest_open(ladder, best_relaxed))
            return self._short(ladder, target, work.trial)
        guess = start if start > 0 else least_inset(paper, target)
        high = least_reaching(ladder, target, max(start - 1, 0), guess)
        best = ladder.plans.get(high)
        if best is not None and reaches(best, target):
            return _noted(best, f"planned to {target:.0%} odds: each limit kept {best.z:.2f} standard "
                                "deviations of its scatter inside")
        if best is None:  # the windows closed in packs before the odds reached the target
            deepest_open(ladder, high)
        return self._short(ladder, target, work.trial)

    def _short(self, ladder: Ladder, target: float, trial: Trial) -> Tried:
        """The plan with the best odds the ladder found, and why it falls short of the target."""
        best = max([t for t in ladder.plans.values() if t is not None], key=lambda t: (t.odds.heat, -t.plan.total_cost))
        if not best.odds.resolves(target):
            return _noted(best, f"a {target:.4%} target cannot be told from certainty with {trial.draws:,} draws "
                                f"(--draws); best odds {best.odds.heat:.1%}")
        return _noted(best, _why_short(best, target))

    def _economic(self, work: _OneHeat, on_paper: bool, to_aims: bool) -> RiskPlan:
        """The level among ECONOMIC_LEVELS whose plan has the least expected total cost."""
        plans = [self._to_target(work, level, on_paper, to_aims) for level in ECONOMIC_LEVELS]
        best = min(plans, key=lambda r: (r.expected_total_cost, -r.target))
        note = (f"economic target: {best.target:.0%} gives the least expected total cost "
                f"({best.expected_total_cost:,.2f} {best.plan.currency} with {best.correction_cost:,.0f} "
                f"{best.plan.currency} a correction)")
        return replace(best, plan=replace(best.plan, notes=best.plan.notes + (note,)), economic=True)


def _why_short(best: Tried, target: float) -> str:
    """Why no plan reached the target: the limits that hold the odds down."""
    weakest = sorted((p, label) for label, p in best.odds.limits.items() if p < 0.999)[:3]
    words = ", ".join(f"{label} {p:.1%}" for p, label in weakest) or "every limit"
    return (f"the {target:.0%} target cannot be reached: the windows cannot close further around the scatter "
            f"(best odds {best.odds.heat:.1%}; weakest: {words})")


def _noted(tried: Tried, note: str) -> Tried:
    return replace(tried, plan=replace(tried.plan, notes=tried.plan.notes + (note,)))


def plan_to_target(heat: Heat, book: RecipeBook, target: float | str | None = None,
                   options: PlanOptions = PlanOptions(), draws: int = 2000, seed: int = 0,
                   on_paper: bool = False) -> RiskPlan:
    """Plan one heat to a target (see :class:`RiskPlanner` to plan many)."""
    return RiskPlanner(book).plan(heat, target, options, draws, seed, on_paper)
