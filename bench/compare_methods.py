"""What the planner saves against the hand method, and how often a heat lands in spec.

    python bench/compare_methods.py [--heats 1000] [--seed 2026] [--draws 20] [--workers 2] [--target economic]

Every heat of a seeded population (bench/population.py) is planned by meltfix and by the hand
method of the melt shop (meltfix.plan.handmethod), and the plans are compared: heats inside every
window, cost per tonne, where the hand method breaks a window meltfix keeps, heats neither can
bring inside and why. Then each plan meets an uncertain world (Monte Carlo, seeded, the same draws
for both methods): recoveries, the bath weight and both samples scatter as the shop's [scatter]
says (normal errors; the samples with the spectrometer's repeatability, meltfix.readers.spectro, sigma =
r / 2.8, the ISO 5725 relation, from memory); the draws are those of meltfix.plan.uncertainty.
A second sample out of a window gets one correction, planned by the same method from what the
melter then believes; the share of heats truly inside every window afterwards is the figure that
matters. Last, throughput: meltfix plans per second in one process and on all cores. Figures print
as tables; nothing here is a pass/fail test.
"""

from __future__ import annotations

import argparse
import os
import re
import sys
import time
from collections import Counter, defaultdict
from collections.abc import Callable, Iterable, Sequence
from concurrent.futures import ProcessPoolExecutor
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from population import population  # bench/ is on sys.path when this file runs as a script
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from meltfix.base.errors import InputError
from meltfix.plan.closed_form import closed_form_odds, limit_sigma_pct, normal_quantile
from meltfix.plan.handmethod import HandPlan, hand_plan
from meltfix.plan.result import LIMIT_TOL_PCT, PlanOptions
from meltfix.plan.risk import RiskPlanner
from meltfix.plan.treatment import contents_owed_pct
from meltfix.plan.uncertainty import LimitSet, analysis_sigma_pct, draw_world, watched_symbols, world_symbols
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, stage_material
from meltfix.shop.recipes import RecipeBook, load_recipes
from meltfix.shop.settings import ECONOMIC

METHODS = ("meltfix", "hand")
# Draws behind each meltfix plan's odds: fewer than `solve`'s 2,000, for speed; the benchmark's own
# Monte Carlo below judges every plan on fresh draws anyway.
_PLAN_DRAWS = 500


# ---------------------------------------------------------------------------------------------
# What one method did with one heat


@dataclass(frozen=True)
class Outcome:
    """One method's plan for one heat, reduced to what the tables need."""

    index: int
    grade: str
    in_spec: bool
    cost: float
    """Cost of the additions [currency]."""
    final_kg: float
    kg: np.ndarray
    """Mass of each recipe-book material [kg], in the book's order."""
    broken: tuple[str, ...]
    """Limits the plan misses ("C max"), empty when in spec."""
    reasons: tuple[str, ...]
    """meltfix: the planner's reason per missed limit; hand: the melter's notes."""
    temperature_drop_c: float
    stated_odds: float | None = None
    """meltfix: the odds the risk planner states for its plan; hand: None (it states none)."""

    @property
    def cost_per_t(self) -> float:
        return self.cost / (self.final_kg / 1000.0)


@dataclass(frozen=True)
class Draws:
    """Monte Carlo counts for one heat and one method, over all draws."""

    in_spec_first: int
    """Draws truly inside every window after the first additions."""
    corrected: int
    """Draws whose second sample read outside a window, so a correction was planned."""
    in_spec_final: int
    """Draws truly inside every window after at most one correction."""
    correction_cost_per_t: float
    """Sum over draws of the correction's cost [currency/t]."""
    total_cost_per_t: float
    """Sum over draws of what the heat cost [currency/t]: the first additions, the correction's
    additions and, when corrected, the shop's correction_cost."""


# ---------------------------------------------------------------------------------------------
# Worker processes: each loads the book and rebuilds the same population from the seed


_BOOK: RecipeBook
_PLANNER: RiskPlanner
_OPTIONS: PlanOptions
_TARGET: float | str | None
_HEATS: list[Heat]


def _start_worker(recipes: str | None, n_heats: int, seed: int, options: PlanOptions,
                  target: float | str | None) -> None:
    global _BOOK, _PLANNER, _OPTIONS, _TARGET, _HEATS
    # HiGHS can write straight to file descriptor 1, below Python's sys.stdout; a worker prints
    # nothing of its own, so its descriptor 1 goes to the null device and the tables stay clean.
    os.dup2(os.open(os.devnull, os.O_WRONLY), 1)
    _BOOK = load_recipes(recipes)
    _PLANNER = RiskPlanner(_BOOK)
    _OPTIONS = options
    _TARGET = target
    _HEATS = population(_BOOK, n_heats, seed)


def _kg_vector(additions: Iterable[tuple[str, float]]) -> np.ndarray:
    kg = np.zeros(len(_BOOK.materials))
    names = _BOOK.material_names
    for name, amount in additions:
        kg[names.index(name)] += amount
    return kg


def _meltfix(index: int, heat: Heat) -> Outcome:
    risk = _PLANNER.plan(heat, _TARGET, options=_OPTIONS, draws=_PLAN_DRAWS, seed=index)
    plan = risk.plan
    return Outcome(index, heat.grade, plan.status == "optimal", plan.total_cost, plan.final_kg,
                   _kg_vector((a.material, a.kg) for a in plan.additions),
                   tuple(f"{v.element} {v.limit}" for v in plan.violations),
                   tuple(v.reason for v in plan.violations), plan.temperature_drop_c, risk.odds.heat)


def hand_margins_pct(heat: Heat, plan: HandPlan, book: RecipeBook) -> dict[str, float]:
    """The margin the shop keeps inside each limit [wt %], for the melter to keep too: z sigma, sigma
    of each limit at the melter's plan without margins (meltfix.plan.risk's linearisation), z for each
    limit at risk reaching the k-th root of the shop's target."""
    target = book.settings.target_odds if isinstance(book.settings.target_odds, float) else 0.95
    used = [(stage_material(heat, book, a.material), a.kg) for a in plan.additions]
    grade = book.grade(heat.grade)
    sigma = limit_sigma_pct(heat, grade, used, book.settings, plan.checks)
    margins = np.array([c.margin_pct for c in plan.checks])
    at_risk = max(int(np.sum(closed_form_odds(margins, sigma) < 0.999)), 1)
    z = float(normal_quantile(target ** (1.0 / at_risk)))
    return {f"{c.element} {c.limit}": z * float(sd) for c, sd in zip(plan.checks, sigma)}


def _hand(index: int, heat: Heat) -> Outcome:
    # A competent melter: first the usual sheet, then again keeping the shop's margin inside each limit.
    plan = hand_plan(heat, _BOOK, margins_pct=hand_margins_pct(heat, hand_plan(heat, _BOOK), _BOOK))
    return Outcome(index, heat.grade, plan.in_spec, plan.total_cost, plan.final_kg,
                   _kg_vector((a.material, a.kg) for a in plan.additions),
                   tuple(f"{c.element} {c.limit}" for c in plan.checks if c.margin_pct < -LIMIT_TOL_PCT),
                   plan.notes, plan.temperature_drop_c)


_PLAN_BY = {"meltfix": _meltfix, "hand": _hand}


def _plan_chunk(indices: Sequence[int], methods: Sequence[str]) -> tuple[dict[str, list[Outcome]], dict[str, float]]:
    """Plan heats with each method in turn; also the seconds each method took."""
    outcomes: dict[str, list[Outcome]] = {}
    seconds: dict[str, float] = {}
    for method in methods:
        start = time.perf_counter()
        outcomes[method] = [_PLAN_BY[method](i, _HEATS[i]) for i in indices]
        seconds[method] = time.perf_counter() - start
    return outcomes, seconds


# ---------------------------------------------------------------------------------------------
# Monte Carlo: the plans in an uncertain world, vectorised over the draws of one heat


def _simulate(index: int, first: dict[str, Outcome], draws: int, seed: int) -> dict[str, Draws]:
    heat = _HEATS[index]
    book, grade = _BOOK, _BOOK.grade(heat.grade)
    # As both methods plan them: with the recoveries of the heat's stage (a raiser thrown into a
    # ladle recovers less than one charged into the furnace).
    materials = [m.at_stage(heat.stage) for m in book.materials]
    watched = watched_symbols(heat, grade)
    symbols = world_symbols(heat, grade, materials)
    limits = LimitSet(grade, symbols)
    rng = np.random.default_rng([seed, 1, index])

    # The true world of each draw, shared by both methods (common random numbers).
    world = draw_world(heat, materials, symbols, draws, rng, book.settings.scatter, contents_owed_pct(heat, grade, book.settings))
    noise = rng.standard_normal((draws, len(symbols)))  # the second sample's reading error

    prices = np.array([heat.material_price_per_kg(m) for m in materials])
    result = {}
    for method, plan in first.items():
        bath_kg, element_kg, pct = world.after(plan.kg)
        in_first = limits.inside(pct)
        read = np.maximum(pct + book.settings.scatter.analysis * analysis_sigma_pct(symbols, pct) * noise, 0.0)
        to_correct = np.flatnonzero(~limits.inside(read))
        final = in_first.copy()
        cost_per_t = 0.0
        total_per_t = float(np.sum(plan.cost / (bath_kg / 1000.0)))
        for d in to_correct:
            kg = _correction_kg(method, heat, plan, {s: round(float(read[d, k]), 4) for k, s in enumerate(symbols)
                                                       if s in watched})
            dissolved_kg = world.yield_frac[d] @ kg
            final_kg = bath_kg[d] + dissolved_kg.sum()
            final[d] = limits.inside(100.0 * (element_kg[d] + dissolved_kg) / final_kg)
            cost_per_t += float(prices @ kg) / (final_kg / 1000.0)
            total_per_t += book.settings.correction_cost / (final_kg / 1000.0)
        result[method] = Draws(int(in_first.sum()), len(to_correct), int(final.sum()), cost_per_t,
                               total_per_t + cost_per_t)
    return result


def _correction_kg(method: str, heat: Heat, first: Outcome, reading_pct: dict[str, float]) -> np.ndarray:
    """The method's correction from the second sample, on the bath the melter believes is there.

    The second sample is of the treated, deoxidised heat: the sulphur has taken its magnesium, the
    fade to pouring is in the simulated truth already, and the probe's oxygen is bound. The planner
    charges those debts to a first sample (meltfix.plan.treatment), so they are handed back here and
    the correction is planned on the reading as it is, as the simulation then applies it.
    """
    stock = {m.name: max(0.0, heat.material_stock_kg(m) - first.kg[j])
             for j, m in enumerate(_BOOK.materials) if heat.material_stock_kg(m) is not None}
    capacity = None if heat.capacity_kg is None else max(heat.capacity_kg, first.final_kg)
    second = heat.with_changes(bath_kg=first.final_kg, analysis=Analysis(reading_pct), capacity_kg=capacity,
                               stock_kg=stock, locked_kg={}, dissolved_o_ppm=None)
    owed = contents_owed_pct(second, _BOOK.grade(heat.grade), _BOOK.settings)
    if owed:
        second = second.with_changes(analysis=Analysis({s: reading_pct.get(s, 0.0) + owed.get(s, 0.0)
                                                        for s in set(reading_pct) | set(owed)}))
    try:
        return _PLAN_BY[method](first.index, second).kg
    except InputError:
        return np.zeros(len(_BOOK.materials))


def _monte_carlo_chunk(firsts: Sequence[dict[str, Outcome]], draws: int, seed: int) -> list[dict[str, Draws]]:
    return [_simulate(first["meltfix"].index, first, draws, seed) for first in firsts]


# ---------------------------------------------------------------------------------------------
# Running the phases with a progress bar


def _chunks(items: Sequence, size: int) -> list[Sequence]:
    return [items[k:k + size] for k in range(0, len(items), size)]


def _run(progress: Progress, label: str, pool: ProcessPoolExecutor, task: Callable, chunks: Sequence[Sequence],
         *args: object) -> tuple[list, float]:
    """Run ``task(chunk, *args)`` for every chunk on the pool; results in chunk order, wall seconds."""
    bar = progress.add_task(label, total=sum(len(c) for c in chunks))
    start = time.perf_counter()
    futures = [pool.submit(task, chunk, *args) for chunk in chunks]
    for future, chunk in zip(futures, chunks):
        future.result()
        progress.advance(bar, len(chunk))
    return [f.result() for f in futures], time.perf_counter() - start


@dataclass(frozen=True)
class Results:
    outcomes: dict[str, list[Outcome]]
    draws: list[dict[str, Draws]]
    seconds_one: dict[str, float]
    """Seconds each method spent planning all heats in one process."""
    seconds_all: float
    """Wall seconds for meltfix to plan all heats on ``workers`` processes."""
    workers: int
    n_draws: int


def run(recipes: str | None, n_heats: int, seed: int, n_draws: int, workers: int, options: PlanOptions,
        target: float | str | None = None) -> Results:
    indices = list(range(n_heats))
    start_args = (recipes, n_heats, seed, options, target)
    progress = Progress(TextColumn("{task.description:<34}"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
                        console=Console(stderr=True), transient=True)
    with progress:
        with ProcessPoolExecutor(1, initializer=_start_worker, initargs=start_args) as pool:
            chunks, _ = _run(progress, "planning, one process", pool, _plan_chunk, _chunks(indices, 25), METHODS)
        outcomes = {m: [o for chunk, _ in chunks for o in chunk[m]] for m in METHODS}
        seconds_one = {m: sum(times[m] for _, times in chunks) for m in METHODS}
        with ProcessPoolExecutor(workers, initializer=_start_worker, initargs=start_args) as pool:
            _warm_up(pool, workers)
            again, seconds_all = _run(progress, f"planning, {workers} processes", pool, _plan_chunk,
                                      _chunks(indices, 10), ("meltfix",))
            replanned = [o for chunk, _ in again for o in chunk["meltfix"]]
            if [o.cost for o in replanned] != [o.cost for o in outcomes["meltfix"]]:
                raise RuntimeError("meltfix planned the same heats differently in another process")
            firsts = [{m: outcomes[m][i] for m in METHODS} for i in indices]
            mc, _ = _run(progress, f"Monte Carlo, {n_draws} draws a heat", pool, _monte_carlo_chunk,
                         _chunks(firsts, 5), n_draws, seed)
    return Results(outcomes, [d for chunk in mc for d in chunk], seconds_one, seconds_all, workers, n_draws)


def _warm_up(pool: ProcessPoolExecutor, workers: int) -> None:
    """Return once every worker has started (book loaded, population built), so the clock sees planning only."""
    seen: set[int] = set()
    while len(seen) < workers:
        seen |= set(pool.map(_worker_id, range(workers)))


def _worker_id(_: int) -> int:
    time.sleep(0.05)  # long enough that an idle worker takes the next task
    return os.getpid()


# ---------------------------------------------------------------------------------------------
# Tables


def _pct(count: int, total: int) -> str:
    return f"{count:,} ({100.0 * count / total:.1f} %)" if total else "0"


def _template(reason: str) -> str:
    """A reason with its figures taken out, so that reasons of the same kind group together."""
    return re.sub(r"\d[\d,]*(\.\d+)?", "…", reason)


def tables(results: Results, book: RecipeBook, currency: str) -> list[Table]:
    mf, hd = results.outcomes["meltfix"], results.outcomes["hand"]
    n = len(mf)
    max_drop = book.settings.max_temp_drop_c
    both = [i for i in range(n) if mf[i].in_spec and hd[i].in_spec]
    out = []

    summary = Table(title=f"Plans for {n:,} first samples", title_justify="left")
    summary.add_column("")
    summary.add_column("meltfix", justify="right")
    summary.add_column("hand method", justify="right")
    summary.add_column("hand / meltfix", justify="right")
    summary.add_row("inside every window", _pct(sum(o.in_spec for o in mf), n), _pct(sum(o.in_spec for o in hd), n), "")
    if max_drop is not None:
        hot = [sum(o.in_spec and o.temperature_drop_c <= max_drop + 1e-6 for o in side) for side in (mf, hd)]
        summary.add_row(f"… and within the {max_drop:g} °C drop limit", _pct(hot[0], n), _pct(hot[1], n), "")
    for label, stat in (("median", np.median), ("mean", np.mean)):
        values = [float(stat([side[i].cost_per_t for i in both])) if both else float("nan") for side in (mf, hd)]
        summary.add_row(f"{label} cost [{currency}/t], heats both meet", f"{values[0]:.2f}", f"{values[1]:.2f}",
                        f"{values[1] / values[0]:.2f}")
    saving = sum(hd[i].cost - mf[i].cost for i in both)
    summary.add_row("total saving on heats both meet", f"{saving:,.0f} {currency}", "", "")
    summary.add_row("mean temperature drop [°C]", f"{np.mean([o.temperature_drop_c for o in mf]):.1f}",
                    f"{np.mean([o.temperature_drop_c for o in hd]):.1f}", "")
    out.append(summary)

    by_grade = Table(title="By grade (costs: median over heats both meet)", title_justify="left")
    for name, justify in (("grade", "left"), ("heats", "right"), ("inside: meltfix", "right"), ("hand", "right"),
                          (f"{currency}/t: meltfix", "right"), ("hand", "right"), ("saving", "right")):
        by_grade.add_column(name, justify=justify)
    grades = defaultdict(list)
    for i in range(n):
        grades[mf[i].grade].append(i)
    both_set = set(both)
    for grade, members in sorted(grades.items(), key=lambda item: -len(item[1])):
        met = [i for i in members if i in both_set]
        cost = [float(np.median([side[i].cost_per_t for i in met])) if met else float("nan") for side in (mf, hd)]
        by_grade.add_row(grade, f"{len(members)}", f"{100 * np.mean([mf[i].in_spec for i in members]):.0f} %",
                         f"{100 * np.mean([hd[i].in_spec for i in members]):.0f} %", f"{cost[0]:.2f}", f"{cost[1]:.2f}",
                         f"{100 * (1 - cost[0] / cost[1]):.0f} %" if met else "")
    out.append(by_grade)

    only_mf = [i for i in range(n) if mf[i].in_spec and not hd[i].in_spec]
    broken = Counter((", ".join(hd[i].broken), "; ".join(hd[i].reasons) or "—") for i in only_mf)
    hand_table = Table(title=f"The hand method breaks a window meltfix keeps: {_pct(len(only_mf), n)}",
                       title_justify="left")
    hand_table.add_column("limits the hand plan breaks")
    hand_table.add_column("what stopped the melter")
    hand_table.add_column("heats", justify="right")
    for (limits, notes), count in broken.most_common(12):
        hand_table.add_row(limits, notes, f"{count}")
    if len(broken) > 12:
        hand_table.add_row("(other combinations)", "", f"{sum(c for _, c in broken.most_common()[12:])}")
    out.append(hand_table)

    neither = [i for i in range(n) if not mf[i].in_spec and not hd[i].in_spec]
    only_hand = [i for i in range(n) if hd[i].in_spec and not mf[i].in_spec]
    reasons = Counter(_template(r) for i in neither for r in mf[i].reasons)
    neither_table = Table(title=f"Neither method brings the heat inside: {_pct(len(neither), n)} "
                                f"(the hand method alone: {len(only_hand)}); the planner's reasons",
                          title_justify="left")
    neither_table.add_column("reason (figures vary by heat)")
    neither_table.add_column("limits missed", justify="right")
    for reason, count in reasons.most_common(12):
        neither_table.add_row(reason, f"{count}")
    if len(reasons) > 12:
        neither_table.add_row("(other reasons)", f"{sum(c for _, c in reasons.most_common()[12:])}")
    out.append(neither_table)

    d = results.draws
    total = n * results.n_draws
    mc = Table(title=f"In an uncertain world: {results.n_draws} draws a heat, {total:,} in all",
               caption="recoveries, bath weight and both samples scatter as shop.toml \\[scatter] says "
                       "(normal errors; the spectrometer's repeatability for the samples)",
               title_justify="left", caption_justify="left")
    mc.add_column("")
    mc.add_column("meltfix", justify="right")
    mc.add_column("hand method", justify="right")
    rows = (("truly inside after the first additions", "in_spec_first"),
            ("second sample out of a window: corrected", "corrected"),
            ("truly inside after one correction", "in_spec_final"))
    for label, name in rows:
        mc.add_row(label, *(_pct(sum(getattr(x[m], name) for x in d), total) for m in METHODS))
    reach = [i for i in range(n) if mf[i].in_spec or hd[i].in_spec]
    mc.add_row("… of the heats a plan brings inside on paper",
               *(_pct(sum(d[i][m].in_spec_first for i in reach), len(reach) * results.n_draws) for m in METHODS))
    stated = [o.stated_odds for o in mf if o.stated_odds is not None]
    mc.add_row("meltfix's stated odds (mean over its plans)", f"{100 * np.mean(stated):.1f} %" if stated else "", "")
    mc.add_row(f"mean correction cost [{currency}/t per heat]",
               *(f"{sum(x[m].correction_cost_per_t for x in d) / total:.2f}" for m in METHODS))
    mc.add_row(f"expected total cost [{currency}/t per heat]",
               *(f"{sum(x[m].total_cost_per_t for x in d) / total:.2f}" for m in METHODS))
    out.append(mc)
    out.append(_by_family(results, book, currency))

    speed = Table(title="Throughput (heats planned per second)", title_justify="left")
    for name, justify in (("method", "left"), ("processes", "right"), ("heats", "right"), ("seconds", "right"),
                          ("heats/s", "right")):
        speed.add_column(name, justify=justify)
    for method in METHODS:
        seconds = results.seconds_one[method]
        speed.add_row(method, "1", f"{n:,}", f"{seconds:.1f}", f"{n / seconds:,.0f}")
    speed.add_row("meltfix", f"{results.workers}", f"{n:,}", f"{results.seconds_all:.1f}",
                  f"{n / results.seconds_all:,.0f}")
    out.append(speed)
    return out


def _by_family(results: Results, book: RecipeBook, currency: str) -> Table:
    """What a shop pays, per grade family: heats truly inside after the first additions, corrections
    per heat, expected total cost per tonne (additions, corrections' additions, correction_cost)."""
    table = Table(title=f"By grade family, in the uncertain world (correction_cost "
                        f"{book.settings.correction_cost:,.0f} {currency} a correction)", title_justify="left")
    for name in ("family", "heats", "stated odds: meltfix", "inside first: meltfix", "hand",
                 "corrections/heat: meltfix", "hand", f"total {currency}/t: meltfix", "hand"):
        table.add_column(name, justify="left" if name == "family" else "right")
    families: dict[str, list[int]] = defaultdict(list)
    for i, outcome in enumerate(results.outcomes["meltfix"]):
        families[book.grade(outcome.grade).family].append(i)
    for family, members in sorted(families.items()):
        draws = len(members) * results.n_draws
        sums = {m: {f: sum(getattr(results.draws[i][m], f) for i in members)
                    for f in ("in_spec_first", "corrected", "total_cost_per_t")} for m in METHODS}
        stated = [results.outcomes["meltfix"][i].stated_odds for i in members]
        table.add_row(family, f"{len(members)}", f"{100 * np.mean([p for p in stated if p is not None]):.1f} %",
                      *(f"{100 * sums[m]['in_spec_first'] / draws:.1f} %" for m in METHODS),
                      *(f"{sums[m]['corrected'] / draws:.3f}" for m in METHODS),
                      *(f"{sums[m]['total_cost_per_t'] / draws:.2f}" for m in METHODS))
    return table


def main(argv: Sequence[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--heats", type=int, default=1000, help="heats in the population (default 1000)")
    parser.add_argument("--seed", type=int, default=2026, help="seed of the population and the draws")
    parser.add_argument("--draws", type=int, default=20, help="Monte Carlo draws per heat (default 20)")
    parser.add_argument("--workers", type=int, default=os.cpu_count() or 1, help="processes for the parallel runs")
    parser.add_argument("--recipes", help="recipes folder (default: the demo shop's)")
    parser.add_argument("--aim-penalty", type=float,
                        help="meltfix's aim weight [currency per 0.01 %% off aim per tonne] (default: the shop's)")
    parser.add_argument("--target", help="meltfix's target odds, a probability or 'economic' (default: the shop's)")
    parser.add_argument("--markdown", type=Path, help="also write the tables (the command first) to this file")
    args = parser.parse_args(argv)
    if args.heats < 1 or args.draws < 1 or args.workers < 1:
        parser.error("--heats, --draws and --workers must be at least 1")
    target: float | str | None = args.target
    if target is not None and target != ECONOMIC:
        try:
            target = float(target)
        except ValueError:
            parser.error(f"--target must be a probability or '{ECONOMIC}', got {target!r}")
    try:
        book = load_recipes(args.recipes)
    except InputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    console = Console(record=True, width=130)
    load = os.getloadavg()[0]
    start = time.perf_counter()
    results = run(args.recipes, args.heats, args.seed, args.draws, args.workers, PlanOptions(aim_penalty=args.aim_penalty),
                  target)
    command = f"python bench/compare_methods.py --heats {args.heats} --seed {args.seed} --draws {args.draws}"
    command += "".join(f" --{name.replace('_', '-')} {value}" for name, value in
                       (("aim_penalty", args.aim_penalty), ("target", args.target), ("recipes", args.recipes))
                       if value is not None)
    aim = book.settings.aim_penalty if args.aim_penalty is None else args.aim_penalty
    console.print(f"[bold]{command}[/]\n{book.settings.shop_name}: {len(book.grades)} grades, "
                  f"{len(book.materials)} materials; meltfix aim weight {aim:g} {book.settings.currency} per 0.01 % "
                  f"per t, target odds {book.settings.target_odds if target is None else target}\n"
                  f"{args.heats:,} heats, seed {args.seed}; {os.cpu_count()} cores, load {load:.1f} at the start; "
                  f"{time.perf_counter() - start:.0f} s in all")
    for table in tables(results, book, book.settings.currency):
        console.print()
        console.print(table)
    if args.markdown:
        args.markdown.write_text(f"```\n{console.export_text()}```\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
