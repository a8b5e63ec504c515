"""How fast the planner is, as ratios to floors measured in the same run: prints figures, asserts nothing.

    python3 bench/plan_speed.py [--heats 1000] [--repeat 10] [--seed 7] [--sizes 25,100,200,400] [--no-processes]
                               [--odds-repeat 5]

1. Per plan on each demo heat, as an LP (loose amounts, minimum additions left out) and with whole
   packs: the planner's time against the floor, HiGHS itself solving the same problem on a hot model
   of its own (the heat's bounds and costs written, one run: the MIP when the problem has integers,
   else the LP), every material open: the planner's pruning of dominated materials is its own. A heat
   no plan brings inside costs both two more problems (the closest plan's, meltfix.plan.elastic).
2. A batch of varied heats (each demo heat with its bath and analysis shaken, seeded; some cannot
   be brought in and get closest plans), with packs: one process, and `meltfix solve` with --jobs 1
   and 2 on the same heats written as files (plans alone with --on-paper --draws 1, and as by
   default, each plan judged by its odds), against the floor's time for the same heats.
3. Plan time with packs at 25, 100, 200 and 400 materials (the demo book's materials repeated with
   shaken prices and contents), against the floor on the same heats and the time budget per plan
   (shop.toml plan_time_limit_s).
4. The plan to the shop's target odds on each demo heat beside its plan on paper (bench/odds_speed.py's
   table; goal of issue 11: at most 3x).

Goals (issue 14): LP <= 1.5x its floor, packs <= 1.2x, the batch <= 1.2x the floor's time, p90 under
300 ms at 200 materials and every plan inside its budget at 400. On a shared machine the wall-clock
figures move with the load; the ratios, measured side by side, move much less.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from dataclasses import replace
from pathlib import Path
from types import MappingProxyType

import numpy as np
from odds_speed import odds_figures

from meltfix.base.paths import demo_dir
from meltfix.plan.elastic import elastic_phases
from meltfix.plan.heat_load import load_of
from meltfix.plan.hot_model import HotModel, Solution
from meltfix.plan.plan_model import ModelShape
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, heat_to_toml, load_heat
from meltfix.shop.recipes import RecipeBook, load_recipes


def demo_heats(book: RecipeBook) -> list[Heat]:
    return [load_heat(path, book) for path in sorted((demo_dir() / "heats").glob("*.toml"))]


def varied_heats(base: list[Heat], count: int, seed: int) -> list[Heat]:
    """``count`` heats shaken from the demo heats: bath ±15 %, each content ×0.8–1.2 (seeded)."""
    rng = np.random.default_rng(seed)
    heats = []
    for k in range(count):
        heat = base[k % len(base)]
        bath_kg = heat.bath_kg * rng.uniform(0.85, 1.15)
        # The vessel keeps its free room in proportion, so capacity never falls below the bath.
        capacity_kg = None if heat.capacity_kg is None else bath_kg * heat.capacity_kg / heat.bath_kg
        pct = {s: v * rng.uniform(0.8, 1.2) for s, v in heat.analysis.pct.items()}
        analysis = Analysis(pct, heat.analysis.below_limit)
        heats.append(heat.with_changes(heat_id=f"{heat.heat_id}-{k}", bath_kg=bath_kg, capacity_kg=capacity_kg,
                                       analysis=analysis))
    return heats


def bigger_book(book: RecipeBook, count: int, seed: int) -> RecipeBook:
    """The book with ``count`` materials: its own, then copies with prices ×0.8–1.2 and every content
    but iron ×0.9–1.1 (iron left out), so no copy simply duplicates another; copies of one material
    differ in strength and price only, and a few are dearer twins the planner prunes."""
    rng = np.random.default_rng(seed)
    materials = list(book.materials)
    k = 0
    while len(materials) < count:
        m = book.materials[k % len(book.materials)]
        scale = min(rng.uniform(0.9, 1.1), 100.0 / max(sum(m.composition_pct.values()), 1e-9))
        composition = {s: v * scale for s, v in m.composition_pct.items() if s != "Fe"}
        materials.append(replace(m, name=f"{m.name} #{k}", price_per_kg=m.price_per_kg * rng.uniform(0.8, 1.2),
                                 composition_pct=MappingProxyType(composition)))
        k += 1
    return replace(book, materials=tuple(materials[:count]))


class Floor:
    """HiGHS alone on hot models of the same problems: per heat only the writes and one run, or,
    for a heat no plan brings inside, the three the planner must solve (meltfix.plan.elastic)."""

    def __init__(self, book: RecipeBook) -> None:
        self.book = book
        self.models: dict[tuple[str, str, bool, bool], HotModel] = {}

    def seconds(self, heat: Heat, options: PlanOptions, integers: bool = True) -> float:
        """One solve of ``heat``'s problem: branch and bound when it has integers (and ``integers``),
        else the LP."""
        key = (heat.grade, heat.stage, options.continuous, options.use_aim)
        if key not in self.models:
            self.models[key] = HotModel(ModelShape(self.book, self.book.grade(heat.grade), *key[1:]))
        model = self.models[key]
        penalty = options.aim_penalty if options.aim_penalty is not None else self.book.settings.aim_penalty
        load = load_of(model.shape, heat, penalty, prune=False)
        start = time.perf_counter()
        model.load(load)

        def solve(upper: np.ndarray) -> Solution | None:
            model.set_bounds(load.col_lower, upper)
            if integers and load.integrality.any():
                return model.solve_mip(60.0, options.mip_rel_gap, load.integrality > 0)[0]
            return model.solve_lp()

        if solve(load.col_upper) is None:  # no plan inside: the closest plan's two problems
            elastic_phases(model, load, heat.bath_kg, options.closest_tolerance, solve)
        return time.perf_counter() - start


def timed(planner: Planner, heat: Heat, options: PlanOptions) -> float:
    start = time.perf_counter()
    planner.plan(heat, options)
    return time.perf_counter() - start


def ms(seconds: list[float]) -> str:
    return (f"median {1000 * statistics.median(seconds):7.2f} ms, p90 {1000 * np.percentile(seconds, 90):7.2f} ms, "
            f"max {1000 * max(seconds):7.1f} ms")


def per_plan(book: RecipeBook, repeat: int) -> None:
    planner, floor = Planner(book), Floor(book)
    base = demo_heats(book)
    print(f"1. per plan, {len(book.materials)} materials, {len(base)} demo heats x {repeat}")
    # The LP: loose amounts and no minimum additions, so the plan is one linear programme.
    lp_book = replace(book, materials=tuple(replace(m, min_kg=0.0) for m in book.materials))
    lp_planner, lp_floor = Planner(lp_book), Floor(lp_book)
    for name, options, ours_of, floor_of, integers in (
            ("LP (loose, no minimums)", PlanOptions(continuous=True), lp_planner, lp_floor, False),
            ("whole packs", PlanOptions(), planner, floor, True)):
        ours, hers = [], []
        for heat in base:
            ours_of.plan(heat, options), floor_of.seconds(heat, options, integers)  # the first pays the build
            for _ in range(repeat):  # interleaved, so a burst of load hits both alike
                ours.append(timed(ours_of, heat, options))
                hers.append(floor_of.seconds(heat, options, integers))
        ratio = statistics.median(ours) / statistics.median(hers)
        print(f"   {name:<18} planner {ms(ours)}")
        print(f"   {'':<18} floor   {ms(hers)}   ratio of medians {ratio:.2f} "
              f"(sum {sum(ours) / sum(hers):.2f})")


def batch(book: RecipeBook, count: int, seed: int, processes: bool = True) -> None:
    heats = varied_heats(demo_heats(book), count, seed)
    options = PlanOptions()
    floor = Floor(book)
    floor_s = sum(floor.seconds(heat, options) for heat in heats)
    planner = Planner(book)
    statuses: dict[str, int] = {}
    start = time.perf_counter()
    for heat in heats:
        status = planner.plan(heat, options).status
        statuses[status] = statuses.get(status, 0) + 1
    one = time.perf_counter() - start
    print(f"2. {count} varied heats with packs ({statuses})")
    print(f"   one process, one Planner: {one:6.2f} s   floor {floor_s:6.2f} s   ratio {one / floor_s:.2f}")
    if not processes:
        return
    with tempfile.TemporaryDirectory() as folder:
        paths = []
        for heat in heats:
            path = Path(folder) / f"{heat.heat_id}.toml"
            path.write_text(heat_to_toml(heat), encoding="utf-8")
            paths.append(str(path))
        code = "import sys; from meltfix.cli import program; sys.exit(program())"
        # --on-paper --draws 1: the plans alone; by default every plan is also judged by its odds.
        for jobs, extra in ((1, ["--on-paper", "--draws", "1"]), (2, ["--on-paper", "--draws", "1"]), (1, []), (2, [])):
            start = time.perf_counter()
            subprocess.run([sys.executable, "-c", code, "solve", *paths, "--json", "--jobs", str(jobs), *extra],
                           stdout=subprocess.DEVNULL, check=False)
            wall = time.perf_counter() - start
            print(f"   meltfix solve --jobs {jobs} {' '.join(extra) or '(odds by default)'}, whole process: "
                  f"{wall:6.2f} s   ratio to the floor {wall / floor_s:.2f}")


def sizes(book: RecipeBook, counts: list[int], heats: int, seed: int) -> None:
    base = varied_heats(demo_heats(book), heats, seed)
    print(f"3. plan time with packs by recipe-book size, {heats} varied heats each "
          f"(budget {book.settings.plan_time_limit_s:g} s per plan)")
    for count in counts:
        big = bigger_book(book, count, seed)
        planner, floor = Planner(big), Floor(big)
        ours, hers, unproven = [], [], 0
        for heat in base:
            start = time.perf_counter()
            plan = planner.plan(heat, PlanOptions())
            ours.append(time.perf_counter() - start)
            unproven += not plan.proven
            hers.append(floor.seconds(heat, PlanOptions()))
        over = sum(t > book.settings.plan_time_limit_s for t in ours)
        print(f"   {count:4d} materials: planner {ms(ours)}; {unproven} stopped by the budget, {over} over it")
        print(f"   {'':14s} floor   {ms(hers)}; ratio of medians {statistics.median(ours) / statistics.median(hers):.2f}, "
              f"of p90 {np.percentile(ours, 90) / np.percentile(hers, 90):.2f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--heats", type=int, default=1000, help="heats in the batch")
    parser.add_argument("--repeat", type=int, default=10, help="plans per demo heat for the per-plan figures")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--sizes", default="25,100,200,400", help="recipe-book sizes for part 3")
    parser.add_argument("--size-heats", type=int, default=40, help="heats per size in part 3")
    parser.add_argument("--recipes", type=Path, default=None)
    parser.add_argument("--odds-repeat", type=int, default=5, help="runs per demo heat for part 4")
    parser.add_argument("--no-processes", action="store_true",
                        help="leave out the meltfix solve runs of part 2 (minutes with the odds on)")
    args = parser.parse_args()
    book = load_recipes(args.recipes)
    print(f"load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs")
    per_plan(book, args.repeat)
    batch(book, args.heats, args.seed, not args.no_processes)
    sizes(book, [int(n) for n in args.sizes.split(",")], args.size_heats, args.seed)
    print("4. the plan to the shop's target odds beside the plan on paper (bench/odds_speed.py)")
    odds_figures(book, args.odds_repeat, 2000)


if __name__ == "__main__":
    main()
