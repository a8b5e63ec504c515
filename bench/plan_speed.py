"""How fast the planner is on the demo shop: prints figures, asserts nothing (issue 3, item 6).

    /tmp/venv/bin/python bench/plan_speed.py [--heats 1000] [--repeat 20] [--seed 7]

1. Median and 90th-percentile time per plan on each demo heat (the whole recipe book, every element
   of the grade), as a linear programme (--continuous) and with whole packs.
2. Wall time for a batch of varied heats planned in one process by one Planner: each demo heat with
   its bath weight and analysis shaken at random (seeded), so some heats need much and some little
   and some cannot be brought in at all (closest plans, which cost two more solves). The batch is
   planned once in one thread and once by two threads sharing the Planner (HiGHS releases the GIL).

Targets (issue 3): far under 50 ms per plan; 1,000 heats in under 20 s on a 2-core machine.
"""

from __future__ import annotations

import argparse
import statistics
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import numpy as np

from meltfix.analysis import Analysis
from meltfix.heat import Heat, load_heat
from meltfix.paths import demo_dir
from meltfix.planner import PlanOptions, Planner
from meltfix.recipes import RecipeBook, load_recipes


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


def per_plan_ms(planner: Planner, heat: Heat, options: PlanOptions, repeat: int) -> list[float]:
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        planner.plan(heat, options)
        times.append((time.perf_counter() - start) * 1000.0)
    return times


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--heats", type=int, default=1000, help="heats in the batch")
    parser.add_argument("--repeat", type=int, default=20, help="plans per demo heat for the medians")
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--recipes", type=Path, default=None)
    args = parser.parse_args()

    book = load_recipes(args.recipes)
    planner = Planner(book)
    base = demo_heats(book)
    modes = {"LP (--continuous)": PlanOptions(continuous=True), "whole packs": PlanOptions()}
    planner.plan(base[0], modes["whole packs"])  # the first solve pays SciPy's and HiGHS's start-up

    print(f"{len(book.materials)} materials, {len(base)} demo heats, {args.repeat} plans each")
    print(f"{'heat':<12}{'grade':<20}" + "".join(f"{name + ' median/p90 ms':>34}" for name in modes))
    pooled: dict[str, list[float]] = {name: [] for name in modes}
    for heat in base:
        cells = []
        for name, options in modes.items():
            times = per_plan_ms(planner, heat, options, args.repeat)
            pooled[name] += times
            cells.append(f"{statistics.median(times):.2f} / {np.percentile(times, 90):.2f}")
        print(f"{heat.heat_id:<12}{heat.grade:<20}" + "".join(f"{cell:>34}" for cell in cells))
    for name, times in pooled.items():
        print(f"all demo heats, {name}: median {statistics.median(times):.2f} ms, "
              f"p90 {np.percentile(times, 90):.2f} ms, max {max(times):.2f} ms")

    batch = varied_heats(base, args.heats, args.seed)
    for name, options in modes.items():
        statuses: dict[str, int] = {}
        times = []
        start = time.perf_counter()
        for heat in batch:
            t0 = time.perf_counter()
            status = planner.plan(heat, options).status
            times.append(time.perf_counter() - t0)
            statuses[status] = statuses.get(status, 0) + 1
        wall = time.perf_counter() - start
        print(f"{len(batch)} varied heats, {name}, one thread: {wall:.2f} s wall "
              f"({1000 * wall / len(batch):.2f} ms per heat, p90 {1000 * np.percentile(times, 90):.2f} ms, "
              f"max {1000 * max(times):.1f} ms; {statuses})")
        start = time.perf_counter()
        with ThreadPoolExecutor(max_workers=2) as pool:
            list(pool.map(lambda heat: planner.plan(heat, options), batch))
        print(f"{len(batch)} varied heats, {name}, two threads: {time.perf_counter() - start:.2f} s wall")


if __name__ == "__main__":
    main()
