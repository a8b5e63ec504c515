"""How much longer a plan to the shop's target odds takes than the plan on paper: prints figures, asserts nothing.

    python bench/odds_speed.py [--repeat 5] [--draws 2000]

For each demo heat: the median time of the plan on paper (the planner alone), of the same plan
with its odds judged (`solve --on-paper`: the plan and a Monte Carlo of 2,000 draws), and of the
risk-aware plan (`solve`, meltfix.plan.risk), timed in turn --repeat times, and the risk-aware
plan's time as a ratio to each; then the median ratio and the ratio of the sums over the heats.
The issue's goal: at most 3x the plan on paper.
"""

from __future__ import annotations

import argparse
import statistics
import time
from collections.abc import Callable

from meltfix.base.paths import demo_dir
from meltfix.plan.planner import Planner
from meltfix.plan.risk import RiskPlanner
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import RecipeBook, load_recipes


def timed_ms(run: Callable[[], object]) -> float:
    start = time.perf_counter()
    run()
    return (time.perf_counter() - start) * 1000.0


def odds_figures(book: RecipeBook, repeat: int, draws: int) -> None:
    """Print the table: per demo heat, the three times and the ratios; then the median ratio and
    the ratio of the sums."""
    planner = Planner(book)
    risk = RiskPlanner(book, planner)
    heats = [load_heat(path, book) for path in sorted((demo_dir() / "heats").glob("*.toml"))]
    planner.plan(heats[0])  # the first solve pays the solver's start-up
    print(f"{'heat':<10}{'paper ms':>10}{'+odds ms':>10}{'target ms':>11}{'x paper':>9}{'x +odds':>9}  odds")
    ratios = []
    totals = [0.0, 0.0]
    for heat in heats:
        runs: list[tuple[float, float, float]] = []
        for _ in range(repeat):  # interleaved, so a burst of load on a shared machine hits all three alike
            runs.append((timed_ms(lambda: planner.plan(heat)),
                         timed_ms(lambda: risk.plan(heat, draws=draws, on_paper=True)),
                         timed_ms(lambda: risk.plan(heat, draws=draws))))
        paper, judged, to_target = (statistics.median(run[k] for run in runs) for k in range(3))
        odds = risk.plan(heat, draws=draws).odds.heat
        ratios.append(to_target / paper)
        totals[0] += paper
        totals[1] += to_target
        print(f"{heat.heat_id:<10}{paper:>10.1f}{judged:>10.1f}{to_target:>11.1f}{to_target / paper:>9.1f}"
              f"{to_target / judged:>9.1f}  {100 * odds:.1f} %")
    print(f"median ratio to the plan on paper: {statistics.median(ratios):.1f}x (goal: at most 3x); "
          f"all heats together: {totals[1] / totals[0]:.1f}x")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--draws", type=int, default=2000)
    args = parser.parse_args()
    odds_figures(load_recipes(None), args.repeat, args.draws)


if __name__ == "__main__":
    main()
