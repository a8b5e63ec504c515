"""The odds that a plan lands the heat inside its grade when the world is not as measured.

A plan is exact for the bath it was given. The real bath differs, as the shop's ``[scatter]`` says
(meltfix.shop.settings.Scatter): each (material, element) recovery is off by a normal relative error of
its own (the material's ``recovery_scatter`` or the shop's ``recovery``; a drawn recovery above 1
counts as 1; the iron balance does not scatter), the bath weight by a normal relative error, and
the analysis by the spectrometer's repeatability (normal, sigma = r / 2.8 with r from
meltfix.readers.spectro's curves: r = 2.8 sigma is the ISO 5725-6 limit for two results, from memory)
times ``analysis``. A reading below the detection limit L is anywhere in 0..L. Many such heats are
drawn at once (NumPy, seeded) and the additions applied to each by the mass balance of meltfix.plan.massbalance;
the share of draws inside each limit is that limit's odds, the share inside all of them the heat's.
This simulation is the judge of every plan's odds; meltfix.plan.risk plans to a target with a closed
form and leaves the verdict to it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

import numpy as np

from meltfix.plan.result import LIMIT_TOL_PCT, Addition, LimitCheck, Odds, Plan, limit_checks
from meltfix.plan.treatment import contents_owed_pct
from meltfix.shop.grades import Grade, LinearIndex
from meltfix.shop.heat import Heat, checked_grade
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.repeatability import default_curve
from meltfix.shop.settings import Scatter

R_TO_SIGMA = 2.8
"""Repeatability limit r = 2.8 sigma for two results (ISO 5725-6, from memory)."""

NO_SCATTER = Scatter(0.0, 0.0, 0.0)
"""No scatter at all: the world is as measured (and a material's own ``recovery_scatter`` is ignored)."""


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


@dataclass(frozen=True, eq=False)  # holds arrays: == has no single truth value
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


def recovery_sd(materials: Sequence[Material], symbols: Sequence[str], scatter: Scatter) -> np.ndarray:
    """Relative standard deviation of each recovery, shape (symbols, materials); iron 0 (the
    balance of an addition is not what goes astray). ``NO_SCATTER`` overrides the materials' own."""
    if scatter == NO_SCATTER:
        return np.zeros((len(symbols), len(materials)))
    return np.array([[0.0 if s == "Fe" else m.recovery_scatter.get(s, scatter.recovery) for m in materials]
                     for s in symbols]).reshape(len(symbols), len(materials))


def draw_yield(material: Material, symbols: Sequence[str], draws: int, rng: np.random.Generator,
               scatter: Scatter) -> np.ndarray:
    """Mass of each element that dissolves per kg of ``material`` in each draw [kg/kg], shape
    (draws, symbols): content x min(recovery x (1 + error), 1). Only the elements the material
    carries and whose recovery scatters are drawn."""
    content = np.array([material.composition_pct.get(s, 0.0) / 100.0 for s in symbols])
    recovery = np.array([material.recovery.get(s, 1.0) for s in symbols])
    sd = recovery_sd([material], symbols, scatter)[:, 0]
    dissolved = np.empty((draws, len(symbols)))
    dissolved[:] = content * np.minimum(recovery, 1.0)
    drawn = np.flatnonzero((content > 0) & (sd > 0))
    drawn_recovery = recovery[drawn] * (1.0 + sd[drawn] * rng.standard_normal(size=(draws, drawn.size)))
    dissolved[:, drawn] = content[drawn] * np.minimum(drawn_recovery, 1.0)
    return dissolved


def draw_start(heat: Heat, symbols: Sequence[str], draws: int, rng: np.random.Generator, scatter: Scatter,
               owed_pct: Mapping[str, float] | None = None) -> tuple[np.ndarray, np.ndarray]:
    """The true bath [kg] (draws,) and element masses [kg] (draws, symbols) before any addition:
    the bath weight, then the analysis, then the below-limit readings, drawn from ``rng`` in that
    order. ``owed_pct`` [wt %] is taken off the true start (aluminium bound by dissolved oxygen,
    meltfix.plan.deoxidation; magnesium bound by sulphur and lost to fade, meltfix.plan.treatment),
    as the planner does; iron is 0 (the balance)."""
    bath_kg = heat.bath_kg * (1.0 + scatter.bath * rng.standard_normal(size=draws))
    measured = np.array([heat.analysis.get(s) for s in symbols])
    sigma = scatter.analysis * analysis_sigma_pct(symbols, measured)
    true_pct = np.maximum(measured - sigma * rng.standard_normal((draws, len(symbols))), 0.0)
    for k, s in enumerate(symbols):
        if s in heat.analysis.below_limit:  # reported "<L": anywhere between 0 and L
            true_pct[:, k] = rng.uniform(0.0, measured[k], size=draws)
    true_pct[:, -1] = 0.0
    for s, pct in (owed_pct or {}).items():
        true_pct[:, symbols.index(s)] -= pct
    return bath_kg, bath_kg[:, None] * true_pct / 100.0


def draw_world(heat: Heat, materials: Sequence[Material], symbols: Sequence[str], draws: int,
               rng: np.random.Generator, scatter: Scatter = Scatter(),
               owed_pct: Mapping[str, float] | None = None) -> World:
    """Draw ``draws`` true heats around what was measured (``symbols`` from :func:`world_symbols`),
    every material's recoveries included. The draws come from ``rng`` in a fixed order (recoveries
    material by material, then :func:`draw_start`) so that a caller may draw more after them."""
    yield_frac = np.stack([draw_yield(m, symbols, draws, rng, scatter) for m in materials], axis=-1)
    bath_kg, element_kg = draw_start(heat, symbols, draws, rng, scatter, owed_pct)
    return World(tuple(symbols), bath_kg, element_kg, yield_frac)


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
        # C order: OpenBLAS multiplies a transposed (Fortran-order) operand of this shape some forty
        # times slower, on several threads.
        self.weights = np.ascontiguousarray(np.array(columns, dtype=float).reshape(len(checks), len(symbols)).T)
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


class Trial:
    """One heat's draws, kept to judge several plans for it on the same draws (with :func:`judge`).

    The true start is drawn at once; a material's recoveries when a plan first uses it, from a
    stream of their own (the seed and the material's place in the book), so the draws do not
    depend on which materials a plan uses nor on the order plans use them, and a heat planned
    with three materials draws three, not the whole book. The recoveries are those of the heat's
    stage (a raiser thrown into a ladle recovers less). Not frozen: it keeps the recoveries drawn.
    """

    def __init__(self, heat: Heat, book: RecipeBook, draws: int, seed: int, scatter: Scatter | None = None) -> None:
        if draws < 1:
            raise ValueError("draws must be at least 1")
        grade = checked_grade(heat, book.grade(heat.grade))
        self.draws, self.seed = draws, seed
        self.scatter = book.settings.scatter if scatter is None else scatter
        self.materials = {m.name: m.at_stage(heat.stage) for m in book.materials}
        self.symbols = tuple(world_symbols(heat, grade, list(self.materials.values())))
        self.bath_kg, self.element_kg = draw_start(heat, self.symbols, draws, np.random.default_rng(seed), self.scatter,
                                                   contents_owed_pct(heat, grade, book.settings))
        self._place = {name: j for j, name in enumerate(self.materials)}
        self._yields: dict[str, np.ndarray] = {}

    def dissolved(self, name: str) -> np.ndarray:
        """Mass of each element that dissolves per kg of material ``name`` [kg/kg], (draws, symbols)."""
        if name not in self._yields:
            rng = np.random.default_rng([self.seed, 1 + self._place[name]])
            self._yields[name] = draw_yield(self.materials[name], self.symbols, self.draws, rng, self.scatter)
        return self._yields[name]

    def after_pct(self, additions: Sequence[Addition]) -> np.ndarray:
        """Contents after ``additions`` [wt %], shape (draws, symbols)."""
        element_kg = self.element_kg.copy()
        for addition in additions:
            element_kg += addition.kg * self.dissolved(addition.material)
        bath_kg = self.bath_kg + (element_kg - self.element_kg).sum(axis=1)
        return 100.0 * element_kg / bath_kg[:, None]


def judge(trial: Trial, grade: Grade, checks: Sequence[LimitCheck], additions: Sequence[Addition] = ()) -> Odds:
    """The odds of ``additions`` (none: the heat as it stands) on the trial's draws, limit by limit
    in the order of ``checks``."""
    pct = trial.after_pct(additions)
    limits = LimitSet(grade, trial.symbols, checks)
    held = limits.each(pct)
    return Odds(float(np.all(held, axis=1).mean()),
                MappingProxyType(dict(zip(limits.labels, (float(p) for p in held.mean(axis=0))))),
                trial.draws, trial.seed)


def plan_odds(heat: Heat, book: RecipeBook, plan: Plan, draws: int = 2000, seed: int = 0,
              scatter: Scatter | None = None) -> Odds:
    """The odds that ``plan``'s additions land ``heat`` inside its grade, from ``draws`` seeded draws
    (``scatter``: the shop's when None)."""
    return judge(Trial(heat, book, draws, seed, scatter), checked_grade(heat, book.grade(heat.grade)), plan.checks,
                 plan.additions)
