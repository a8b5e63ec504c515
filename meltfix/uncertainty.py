"""The odds that a plan lands the heat inside its grade when the world is not as measured (DESIGN §3).

A plan is exact for the bath it was given. The real bath differs: each material's recovery is off
by up to ±10 % of itself (uniform; a true recovery never exceeds 1), the bath weight by up to ±3 %
(uniform), and the analysis by the spectrometer's repeatability (normal, sigma = r / 2.8 with r
from meltfix.spectro's curves: r = 2.8 sigma is the ISO 5725-6 limit for two results, from memory).
A reading below the detection limit L is anywhere in 0..L. Many such heats are drawn at once
(NumPy, seeded) and the additions applied to each by the mass balance of DESIGN §2; the share of
draws inside each limit is that limit's odds, the share inside all of them the heat's.

Robust mode moves every limit inwards by a growing multiple of its spread and plans again until
the heat's odds reach the level asked for, or the windows cannot tighten further.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace
from types import MappingProxyType

import numpy as np

from meltfix.deoxidation import aluminium_owed_pct
from meltfix.heat import Heat, stage_material
from meltfix.planner import LIMIT_TOL_PCT, LimitCheck, Plan, PlanOptions, Planner, limit_checks, recheck
from meltfix.recipes import Grade, LinearIndex, Material, RecipeBook
from meltfix.spectro import default_curve

R_TO_SIGMA = 2.8
"""Repeatability limit r = 2.8 sigma for two results (ISO 5725-6, from memory)."""


@dataclass(frozen=True)
class Spread:
    """How far the real heat may stray from what the plan assumes."""

    recovery_rel: float = 0.10
    """Largest relative error of each recovery (uniform) [fraction of the recovery]."""
    bath_rel: float = 0.03
    """Largest relative error of the bath weight (uniform) [fraction of the bath]."""
    analysis_scale: float = 1.0
    """Multiple of the spectrometer's sigma for the analysis error (0 = the analysis is exact)."""


NO_SPREAD = Spread(0.0, 0.0, 0.0)


@dataclass(frozen=True)
class Odds:
    """How likely a plan is to land the heat inside its grade."""

    heat: float
    """Probability [0..1] that every limit of the grade holds at once."""
    limits: Mapping[str, float]
    """Probability [0..1] that each limit holds, by label ("Mn max", "CEV max"), in the plan's order."""
    draws: int
    """Number of simulated heats."""
    seed: int
    """Seed of the random draws: the same seed gives the same odds."""

    def to_json(self) -> dict[str, object]:
        return {"heat": self.heat, "limits": dict(self.limits), "draws": self.draws, "seed": self.seed}


@dataclass(frozen=True)
class RobustPlan:
    """Robust mode's answer: the plan, its odds, and how far the windows were tightened."""

    plan: Plan
    """Checked against the grade's real windows; its binding limits are the tightened ones."""
    odds: Odds
    """The plan's odds, on the same draws as every plan tried."""
    level: float
    """Probability [0..1] asked for."""
    inset_sigmas: float
    """How far each limit was moved in [multiples of that limit's spread, sigma]; 0 = not at all."""
    reached: bool
    """Whether ``odds.heat`` reached ``level``."""


# ---------------------------------------------------------------------------------------------
# The true heats of many draws


def watched_symbols(heat: Heat, grade: Grade) -> set[str]:
    """Elements the analysis reports or the grade limits (windows and index terms)."""
    return set(heat.analysis.pct) | set(grade.window_pct) | {s for ix in grade.indices for s in ix.terms}


def world_symbols(heat: Heat, grade: Grade, materials: Sequence[Material]) -> list[str]:
    """The elements a simulation follows: those watched and those the materials carry; iron last."""
    return sorted(watched_symbols(heat, grade) | {s for m in materials for s in m.composition_pct} - {"Fe"}) + ["Fe"]


def analysis_sigma_pct(symbols: Sequence[str], pct: np.ndarray) -> np.ndarray:
    """Standard deviation of one reported analysis [wt %] per element (last axis of ``pct`` [wt %]),
    from the spectrometer's repeatability curves."""
    curves = [default_curve(s) for s in symbols]
    limit = np.vectorize(lambda k, c: curves[k].limit_pct(c), otypes=[float])
    return limit(np.arange(len(symbols)), pct) / R_TO_SIGMA


@dataclass(frozen=True)
class World:
    """Many draws of the true heat: what the bath really holds and what each material really gives."""

    symbols: tuple[str, ...]
    bath_kg: np.ndarray
    """True bath mass before the additions [kg], shape (draws,)."""
    element_kg: np.ndarray
    """True mass of each element before the additions [kg], shape (draws, symbols); iron 0 (the balance)."""
    yield_frac: np.ndarray
    """Mass of each element that dissolves per kg of each material [kg/kg], shape (draws, symbols, materials)."""

    def after(self, kg: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Bath [kg] (draws,), element masses [kg] and contents [wt %] (draws, symbols) after adding
        ``kg`` [kg] of each material."""
        element_kg = self.element_kg + self.yield_frac @ kg
        bath_kg = self.bath_kg + (element_kg - self.element_kg).sum(axis=1)
        return bath_kg, element_kg, 100.0 * element_kg / bath_kg[:, None]


def draw_world(heat: Heat, materials: Sequence[Material], symbols: Sequence[str], draws: int,
               rng: np.random.Generator, spread: Spread = Spread(),
               owed_pct: Mapping[str, float] | None = None) -> World:
    """Draw ``draws`` true heats around what was measured (``symbols`` from :func:`world_symbols`).

    ``owed_pct`` [wt %] is taken off the true start (aluminium bound by dissolved oxygen,
    meltfix.deoxidation), as the planner does. The draws come from ``rng`` in a fixed order
    (recoveries, bath, analysis, below-limit readings) so that a caller may draw more after them.
    """
    content = np.array([[m.composition_pct.get(s, 0.0) / 100.0 for m in materials] for s in symbols])
    recovery = np.array([[m.recovery.get(s, 1.0) for m in materials] for s in symbols])
    error = rng.uniform(-spread.recovery_rel, spread.recovery_rel, size=(draws, *recovery.shape))
    error[:, -1, :] = 0.0  # the iron balance of an addition is not what goes astray
    # content * min(recovery * (1 + error), 1), in place: this is the one large array.
    yield_frac = error
    yield_frac += 1.0
    yield_frac *= recovery
    np.minimum(yield_frac, 1.0, out=yield_frac)
    yield_frac *= content
    bath_kg = heat.bath_kg * (1.0 + rng.uniform(-spread.bath_rel, spread.bath_rel, size=draws))
    measured = np.array([heat.analysis.get(s) for s in symbols])
    sigma = spread.analysis_scale * analysis_sigma_pct(symbols, measured)
    true_pct = np.maximum(measured - sigma * rng.standard_normal((draws, len(symbols))), 0.0)
    for k, s in enumerate(symbols):
        if s in heat.analysis.below_limit:  # reported "<L": anywhere between 0 and L
            true_pct[:, k] = rng.uniform(0.0, measured[k], size=draws)
    true_pct[:, -1] = 0.0
    for s, pct in (owed_pct or {}).items():
        true_pct[:, symbols.index(s)] -= pct
    return World(tuple(symbols), bath_kg, bath_kg[:, None] * true_pct / 100.0, yield_frac)


# ---------------------------------------------------------------------------------------------
# Limits as arrays


class LimitSet:
    """One-sided limits as arrays over a list of symbols, to test many analyses at once.

    Built from the planner's checks (``limit_checks`` of the grade when none are given), so that
    "inside" means here what it means in a plan.
    """

    def __init__(self, grade: Grade, symbols: Sequence[str], checks: Sequence[LimitCheck] | None = None) -> None:
        checks = limit_checks(grade, {}) if checks is None else checks
        indices: dict[str, LinearIndex] = {ix.name: ix for ix in grade.indices}
        columns = []
        for check in checks:
            terms = indices[check.element].terms if check.element in indices else {check.element: 1.0}
            columns.append([terms.get(s, 0.0) for s in symbols])
        self.labels = tuple(f"{c.element} {c.limit}" for c in checks)
        self.weights = np.array(columns, dtype=float).reshape(len(checks), len(symbols)).T
        self.bound = np.array([c.limit_pct for c in checks], dtype=float)
        self.is_min = np.array([c.limit == "min" for c in checks], dtype=bool)

    def values(self, pct: np.ndarray) -> np.ndarray:
        """Each limit's quantity (content or index) per analysis [wt %], shape (draws, limits)."""
        return pct @ self.weights

    def each(self, pct: np.ndarray) -> np.ndarray:
        """Whether each limit holds per analysis, shape (draws, limits)."""
        value = self.values(pct)
        return np.where(self.is_min, value >= self.bound - LIMIT_TOL_PCT, value <= self.bound + LIMIT_TOL_PCT)

    def inside(self, pct: np.ndarray) -> np.ndarray:
        """Whether every limit holds per analysis, shape (draws,)."""
        return np.all(self.each(pct), axis=-1)


# ---------------------------------------------------------------------------------------------
# Odds of a plan


@dataclass(frozen=True)
class _Trial:
    """One heat's draws, kept to judge several plans for it on the same draws."""

    world: World
    kg_index: Mapping[str, int]
    draws: int
    seed: int


def _trial(heat: Heat, book: RecipeBook, draws: int, seed: int, spread: Spread) -> _Trial:
    if draws < 1:
        raise ValueError("draws must be at least 1")
    grade = book.grade(heat.grade)
    # Every material of the book, used or not: the draws then do not depend on the plan, so plans
    # for one heat are compared on the same draws.
    # The recoveries are those of the heat's stage (a raiser thrown into a ladle recovers less).
    materials = [m.at_stage(heat.stage) for m in book.materials]
    symbols = world_symbols(heat, grade, materials)
    world = draw_world(heat, materials, symbols, draws, np.random.default_rng(seed), spread,
                       aluminium_owed_pct(heat, grade))
    return _Trial(world, {name: j for j, name in enumerate(book.material_names)}, draws, seed)


def _judge(trial: _Trial, grade: Grade, plan: Plan) -> tuple[Odds, np.ndarray]:
    """The plan's odds, and each limit's quantity per draw (draws, limits) [wt %]."""
    kg = np.zeros(len(trial.kg_index))
    for addition in plan.additions:
        kg[trial.kg_index[addition.material]] += addition.kg
    pct = trial.world.after(kg)[2]
    limits = LimitSet(grade, trial.world.symbols, plan.checks)
    held = limits.each(pct)
    odds = Odds(float(np.all(held, axis=1).mean()),
                MappingProxyType(dict(zip(limits.labels, (float(p) for p in held.mean(axis=0))))),
                trial.draws, trial.seed)
    return odds, limits.values(pct)


def plan_odds(heat: Heat, book: RecipeBook, plan: Plan, draws: int = 2000, seed: int = 0,
              spread: Spread = Spread()) -> Odds:
    """The odds that ``plan``'s additions land ``heat`` inside its grade, from ``draws`` seeded draws."""
    return _judge(_trial(heat, book, draws, seed, spread), book.grade(heat.grade), plan)[0]


# ---------------------------------------------------------------------------------------------
# Robust mode


def _tightened(grade: Grade, sigma: Mapping[str, float], sigmas: float) -> tuple[Grade, bool]:
    """The grade with each limit moved in by ``sigmas`` x its spread [wt %]; a window closes at most
    to its middle. Also whether every limit has reached that end (no further tightening)."""
    all_capped = True

    def moved(label: str, room: float) -> float:
        nonlocal all_capped
        want = sigmas * sigma.get(label, 0.0)
        if want < room:
            all_capped = False
        return min(want, room)

    window = {}
    for s, (low, high) in grade.window_pct.items():
        room = (high - low) / 2.0
        window[s] = (low + moved(f"{s} min", room) if f"{s} min" in sigma else low,
                     high - moved(f"{s} max", room))
    indices = []
    for ix in grade.indices:
        both = ix.min_value is not None and ix.max_value is not None
        room = (ix.max_value - ix.min_value) / 2.0 if both else np.inf  # type: ignore[operator]
        indices.append(replace(ix,
                               min_value=None if ix.min_value is None else ix.min_value + moved(f"{ix.name} min", room),
                               max_value=None if ix.max_value is None else ix.max_value - moved(f"{ix.name} max", room)))
    return replace(grade, window_pct=MappingProxyType(window), indices=tuple(indices)), all_capped


def robust_plan(heat: Heat, book: RecipeBook, level: float = 0.95, options: PlanOptions = PlanOptions(),
                draws: int = 2000, seed: int = 0, spread: Spread = Spread(), step_sigmas: float = 0.25,
                max_sigmas: float = 3.0) -> RobustPlan:
    """Plan ``heat`` so that it lands inside its grade with probability ``level`` [0..1] if it can.

    Each limit is moved in by k x ``step_sigmas`` x its spread (the standard deviation of its
    quantity over the draws under the ordinary plan), k = 1, 2, ..., and the heat planned again,
    until the odds reach ``level``; every plan is judged on the same draws. It stops when a
    tightened grade cannot be met, every window is closed to its middle, or ``max_sigmas`` is
    reached, and then returns the plan with the best odds. The plan returned is checked against
    the real windows.
    """
    if not 0.0 < level < 1.0:
        raise ValueError("level must be between 0 and 1")
    grade = book.grade(heat.grade)
    trial = _trial(heat, book, draws, seed, spread)
    plan = Planner(book).plan(heat, options)
    odds, values = _judge(trial, grade, plan)
    best = RobustPlan(plan, odds, level, 0.0, odds.heat >= level)
    if best.reached:
        return _noted(best, f"robust mode: the ordinary plan already lands inside with {odds.heat:.1%} odds")
    if plan.status != "optimal":
        return _noted(best, "robust mode: the grade cannot be met even as measured; the windows were not tightened")
    sigma = dict(zip(odds.limits, values.std(axis=0)))
    k = 1
    while k * step_sigmas <= max_sigmas + 1e-12:
        inset = k * step_sigmas
        tight, capped = _tightened(grade, sigma, inset)
        tight_book = replace(book, grades=MappingProxyType({**book.grades, grade.name: tight}))
        candidate = Planner(tight_book).plan(heat, options)
        if candidate.status != "optimal":
            break  # the windows cannot tighten this far
        used = [(stage_material(heat, book, a.material), a.kg) for a in candidate.additions]
        candidate = replace(candidate, checks=recheck(heat, grade, used)[2])
        candidate_odds = _judge(trial, grade, candidate)[0]
        if candidate_odds.heat > best.odds.heat:
            best = RobustPlan(candidate, candidate_odds, level, inset, candidate_odds.heat >= level)
        if best.reached or capped:
            break
        k += 1
    if best.inset_sigmas:
        note = (f"robust mode: each limit moved in by {best.inset_sigmas:g} x its spread (sigma) for "
                f"{best.odds.heat:.1%} odds of landing inside")
    else:
        note = "robust mode: tightening the windows did not raise the odds"
    if not best.reached:
        note += f"; {level:.0%} was not reached (the windows cannot tighten further)"
    return _noted(best, note)


def _noted(robust: RobustPlan, note: str) -> RobustPlan:
    return replace(robust, plan=replace(robust.plan, notes=robust.plan.notes + (note,)))
