"""Plans that land inside the grade with the shop's target odds: a deterministic equivalent.

Chance-constrained programming (Charnes & Cooper, "Chance-constrained programming", Management
Science 6(1), 1959): a limit that must hold with probability p, on a quantity that is normal with
standard deviation sigma, holds exactly when the predicted quantity clears the limit by
z sigma, z = the normal quantile of p. So each limit of the grade is moved inwards by z sigma and
the ordinary planner solves the tightened grade. Sigma depends on the plan (the more of a material,
the more its recovery scatters the content), so it is evaluated at the plan, linearised, and the
plan solved again until sigma stops moving (a fixed point). The heat's odds are the product of
its limits' odds in the closed form (limits taken as independent); the share each limit must reach
is adjusted until the Monte Carlo simulation of meltfix.plan.uncertainty, the independent judge, says
the heat reaches the target.

The linearisation (all as fractions): a limit's quantity q = sum_s w_s p_s (w = 1 for one element,
the index weights for an index such as a carbon equivalent), p_s = (W c_s + sum_j y_sj x_j) / M,
M = W + sum_j g_j x_j. Then dq/dy_tj = x_j (w_t - q) / M for the dissolved yield y = a r of
element t from material j (its standard deviation is y times the recovery's relative one),
dq/dW = sum_s w_s (c_s - p_s) / M and dq/dc_s = w_s W / M; the variances add (independent errors).
"""

from __future__ import annotations

import math
import re
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from statistics import NormalDist
from types import MappingProxyType

import numpy as np

from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner, recheck
from meltfix.plan.result import LIMIT_TOL_PCT, LimitCheck, Odds, Plan, PlanOptions, RiskPlan, limit_checks
from meltfix.plan.treatment import contents_owed_pct
from meltfix.plan.uncertainty import NO_SCATTER, LimitSet, Trial, analysis_sigma_pct, draw_trial, judge, world_symbols
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, checked_grade, stage_material
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ECONOMIC, Scatter, ShopSettings

ECONOMIC_LEVELS = (0.5, 0.8, 0.9, 0.95, 0.98, 0.99)
"""Targets tried by ``target_odds = "economic"`` (besides the on-paper plan)."""
# The insets tried, in sigmas: 0.1, 0.2, ... 4.0 (4 sigma is 99.997 % for one limit).
_Z_STEP = 0.1
_Z_STEPS = 40
# Sigma has settled when no limit's moved by more than this share between two plans; a plan is
# solved at most this many times for one inset.
_SIGMA_SETTLED = 0.05
_SIGMA_ROUNDS = 2
# Bindings confirmed by a re-solve each (the largest first): each costs one more solve.
_MAX_CONFIRMED = 4


# The normal distribution from the standard library, element by element (a plan has a few dozen
# limits at most): SciPy's special functions cost a fifth of a second to import, more than a plan.
# Phi(x) = erfc(-x / sqrt 2) / 2: erfc keeps its relative accuracy far into the lower tail.
_CDF = np.frompyfunc(lambda x: 0.5 * math.erfc(-x / math.sqrt(2.0)), 1, 1)
# inv_cdf is Wichura's algorithm AS 241 (Applied Statistics 37(3), 1988), about 1e-16 relative.
_QUANTILE = np.frompyfunc(NormalDist().inv_cdf, 1, 1)


def normal_cdf(x: np.ndarray | float) -> np.ndarray:
    """Standard normal distribution function."""
    return np.asarray(_CDF(np.asarray(x, dtype=float)), dtype=float)


def normal_quantile(p: np.ndarray | float) -> np.ndarray:
    """Standard normal quantile (inverse of :func:`normal_cdf`), p in (0, 1)."""
    return np.asarray(_QUANTILE(np.asarray(p, dtype=float)), dtype=float)


# ---------------------------------------------------------------------------------------------
# The closed form


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
        trial = draw_trial(heat, self.book, draws, seed)
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
        return _Tried(plan, judge(trial, grade, plan), sigma)

    def _to_target(self, heat: Heat, target: float, options: PlanOptions, trial: Trial,
                   on_paper: bool, to_aims: bool = False) -> RiskPlan:
        grade = checked_grade(heat, self.book.grade(heat.grade))
        unchanged = recheck(heat, grade, [], self.book.settings)[2]
        if not to_aims and all(c.margin_pct >= -LIMIT_TOL_PCT for c in unchanged):
            # Inside every window already: nothing to add if the odds hold as it stands.
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
        limits: dilution materials against a maximum, carriers of the element against a minimum.
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

        def acts(name: str) -> bool:
            material = stage_material(heat, self.book, name)
            if material.kind == "dilution":
                return any(v.limit == "max" for v in missed)
            for element in needed:
                terms = indices[element].terms if element in indices else {element: 1.0}
                if any(w > 0 and material.yield_pct(s) > 0 for s, w in terms.items()):
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
        """Keep only what holds the cost up in real money: each limit's saving from the duals,
        confirmed by planning again with that limit moved (within 5 %, the re-solve's figure
        shown); the aims' weights are a penalty, never money, and are left out."""
        plan = tried.plan
        real = checked_grade(heat, self.book.grade(heat.grade))
        grade = tried.planned_to or real
        confirmed = []
        for binding in [b for b in plan.binding if not b.name.endswith(" aim")][:_MAX_CONFIRMED]:
            moved = _loosened(heat, self.book, grade, binding.name)
            if moved is None:
                continue
            again_heat, again_book = moved
            again = Planner(again_book).plan(again_heat, options) if again_book is not self.book \
                else self.planner.plan(again_heat, options)
            saving = plan.total_cost - again.total_cost
            if again.status == "optimal" and abs(saving - binding.saving) <= 0.05 * binding.saving:
                confirmed.append(replace(binding, name=_real_name(binding.name, real), saving=saving))
        return replace(tried, plan=replace(plan, binding=tuple(confirmed)))

    def _search(self, heat: Heat, target: float, options: PlanOptions, trial: Trial, paper: _Tried) -> _Tried:
        """The least inset z (on a grid of _Z_STEP sigmas) whose plan the simulation finds at or
        above the target; the plan at each z is a fixed point of sigma (see :meth:`_at`).

        The plan at a given z does not depend on the target, and a deeper inset never makes a
        plan cheaper nor less likely inside, so the least z found by bracketing and bisection gives
        a higher target a plan at least as costly and at least as safe.
        """
        plans: dict[int, _Tried | None] = {0: paper}

        def at(k: int) -> _Tried | None:
            if k not in plans:
                plans[k] = self._at(heat, options, trial, paper, k * _Z_STEP)
            return plans[k]

        def done(k: int) -> bool:  # reached, or the windows cannot tighten this far: deeper is no better
            tried = at(k)
            return tried is None or tried.odds.heat >= target

        # First guess: each limit at risk on paper reaching the k-th root of the target.
        at_risk = int(np.sum(closed_form_odds(_margins(paper.plan), paper.sigma) < 0.999))
        guess = float(normal_quantile(target ** (1.0 / max(at_risk, 1))))
        k = min(max(math.ceil(guess / _Z_STEP), 1), _Z_STEPS)
        low, high = 0, _Z_STEPS + 1  # done(low) is false (the paper plan is short); done(high) true
        step = 1
        if done(k):
            high = k
            while high - step > low and done(high - step):
                high, step = high - step, step * 2
            low = max(high - step, low)
        else:
            low = k
            while low + step <= _Z_STEPS and not done(low + step):
                low, step = low + step, step * 2
            high = min(low + step, _Z_STEPS + 1)
        while high - low > 1:
            middle = (low + high) // 2
            low, high = (low, middle) if done(middle) else (middle, high)
        best = plans.get(high) if high <= _Z_STEPS else None
        if best is not None and best.odds.heat >= target:
            return _noted(best, f"planned to {target:.0%} odds: each limit kept {best.z:.2f} standard "
                                "deviations of its scatter inside")
        tried = [t for t in plans.values() if t is not None]
        best = max(tried, key=lambda t: (t.odds.heat, -t.plan.total_cost))
        return _noted(best, _why_short(best, target))

    def _at(self, heat: Heat, options: PlanOptions, trial: Trial, paper: _Tried, z: float) -> _Tried | None:
        """The plan with every limit moved in by z sigma, sigma evaluated at that plan (iterated
        from the paper plan's until it settles); None when the tightened grade cannot be met."""
        grade = checked_grade(heat, self.book.grade(heat.grade))
        labels = [f"{c.element} {c.limit}" for c in paper.plan.checks]
        sigma, result = paper.sigma, None
        for _ in range(_SIGMA_ROUNDS):
            tight = tightened(grade, dict(zip(labels, z * sigma)))
            book = replace(self.book, grades=MappingProxyType({**self.book.grades, grade.name: tight}))
            candidate = Planner(book).plan(heat, options)
            if candidate.status != "optimal":
                return None
            used = [(stage_material(heat, self.book, a.material), a.kg) for a in candidate.additions]
            candidate = replace(candidate, checks=recheck(heat, grade, used, self.book.settings)[2])
            result = replace(self._judged(heat, candidate, trial), z=z, planned_to=tight)
            settled = bool(np.all(np.abs(result.sigma - sigma) <= _SIGMA_SETTLED * np.maximum(sigma, 1e-12)))
            sigma = result.sigma
            if settled:
                break
        return result

    def _economic(self, heat: Heat, options: PlanOptions, trial: Trial, on_paper: bool, to_aims: bool) -> RiskPlan:
        """The level among ECONOMIC_LEVELS whose plan has the least expected total cost."""
        plans = [self._to_target(heat, level, options, trial, on_paper, to_aims) for level in ECONOMIC_LEVELS]
        best = min(plans, key=lambda r: (r.expected_total_cost, -r.target))
        note = (f"economic target: {best.target:.0%} gives the least expected total cost "
                f"({best.expected_total_cost:,.2f} {best.plan.currency} with {best.correction_cost:,.0f} "
                f"{best.plan.currency} a correction)")
        return replace(best, plan=replace(best.plan, notes=best.plan.notes + (note,)), economic=True)


_LIMIT_NAME = re.compile(r"^(?P<label>\S+ (?:min|max)) (?P<pct>[-0-9.e+]+) %$")


def _loosened(heat: Heat, book: RecipeBook, grade: Grade, name: str) -> tuple[Heat, RecipeBook] | None:
    """The heat and book with the limit or resource ``name`` (a Binding's name) loosened by the
    binding's unit: a limit by 0.01 %, the capacity by 1 t, the drop by 1 °C, a stock by 1 kg."""
    match = _LIMIT_NAME.match(name)
    if match:
        label = match["label"]
        symbol, side = label.rsplit(" ", 1)
        return heat, replace(book, grades=MappingProxyType(
            {**book.grades, heat.grade: _moved(grade, symbol, side, 0.01)}))
    if name == "vessel capacity" and heat.capacity_kg is not None:
        return heat.with_changes(capacity_kg=heat.capacity_kg + 1000.0), _with(book, grade, heat)
    if name == "temperature drop limit":
        limit = heat.drop_limit_c(book.settings)
        return (None if limit is None else (heat.with_changes(max_temp_drop_c=limit + 1.0), _with(book, grade, heat)))
    if name.startswith("stock of "):
        material = book.material(name.removeprefix("stock of "))
        stock = heat.material_stock_kg(material)
        if stock is None:
            return None
        return heat.with_changes(stock_kg={**heat.stock_kg, material.name: stock + 1.0}), _with(book, grade, heat)
    return None


def _with(book: RecipeBook, grade: Grade, heat: Heat) -> RecipeBook:
    """The book with ``grade`` in place of the heat's (the same book when it is the book's own)."""
    if book.grade(heat.grade) is grade:
        return book
    return replace(book, grades=MappingProxyType({**book.grades, heat.grade: grade}))


def _moved(grade: Grade, symbol: str, side: str, by_pct: float) -> Grade:
    """The grade with one limit moved outwards by ``by_pct`` [wt %]."""
    if symbol in grade.window_pct:
        low, high = grade.window_pct[symbol]
        window = {**grade.window_pct, symbol: (low - by_pct, high) if side == "min" else (low, high + by_pct)}
        return replace(grade, window_pct=MappingProxyType(window))
    return replace(grade, indices=tuple(
        replace(ix, min_value=ix.min_value - by_pct if side == "min" and ix.min_value is not None else ix.min_value,
                max_value=ix.max_value + by_pct if side == "max" and ix.max_value is not None else ix.max_value)
        if ix.name == symbol else ix for ix in grade.indices))


def _real_name(name: str, grade: Grade) -> str:
    """A tightened limit's binding named by the grade's real limit, with the level planned to."""
    match = _LIMIT_NAME.match(name)
    if not match:
        return name
    symbol, side = match["label"].rsplit(" ", 1)
    real = next((c.limit_pct for c in limit_checks(grade, {}) if c.element == symbol and c.limit == side), None)
    if real is None or abs(real - float(match["pct"])) < 1e-9:
        return name
    return f"{match['label']} {real:g} % (planned to {float(match['pct']):.4g} % for the odds)"


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
