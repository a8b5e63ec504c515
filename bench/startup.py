"""Start-up, as ratios to floors measured in the same run: prints figures, asserts nothing.

    python3 bench/startup.py [--runs 7]

Each run is a fresh Python process, as a user's `meltfix` would be, and the floor runs right after
it, so a burst of load on a shared machine hits both alike. The CPU time of each whole process is
printed too: on a busy machine it moves less than the wall clock (the screen's child also spends
CPU after the paint, on shutting down):

1. `meltfix solve` on the demo shop's first heat (--json, to a pipe) against `python -c "import numpy"`.
2. `meltfix --help` against `python -c "pass"`.
3. Launch to the first plan painted on the screen (headless, the real app and demo heat) against a
   bare Textual app that paints one line, then loads the same heat and solves it with HiGHS
   (through the planner's model, without the meltfix screen) and paints the cost.

Goals (issue 14): the solve process <= 1.5x importing numpy, the screen <= 1.5x its floor.

Then what the solve process cannot do without, each process importing one more of the libraries it needs
(the odds' random draws, HiGHS, the standard modules the command uses), as ratios to importing numpy, and
what `site` costs every process at start (python -c pass against python -S -c pass). Run this in a fresh
venv: a site-packages `.pth` file that imports a module at every start adds the same time to the process
and to its floor, and flatters the ratio.

The children read compiled bytecode, as an installed package does (pip compiles it at install):
PYTHONDONTWRITEBYTECODE is dropped for them and their cache goes to a temporary folder
(PYTHONPYCACHEPREFIX), filled by one untimed run of each command. Without it every run would
compile meltfix's sources again, about 0.1 s of CPU the floors never pay.
"""

from __future__ import annotations

import argparse
import asyncio
import math
import os
import resource
import statistics
import subprocess
import sys
import tempfile
import time
from collections.abc import Callable

CLI = "import sys; from meltfix.cli import program; sys.exit(program())"


async def _until(done: Callable[[], bool], what: str) -> None:
    """Wait for ``done``; a child that never gets there (a worker that failed) stops with a message
    rather than hanging the benchmark."""
    deadline = time.monotonic() + 60
    while not done():
        if time.monotonic() > deadline:
            raise SystemExit(f"{what}: not painted within 60 s")
        await asyncio.sleep(0.002)


async def _screen_child() -> None:
    import argparse as _argparse
    from meltfix.cli import set_up_process

    set_up_process()  # as the `meltfix` program does before it opens the screen
    from meltfix.commands.screen import build_app
    from meltfix.tui.widgets.plan_view import PlanView

    app = build_app(_argparse.Namespace(heat=None, recipes=None, logbook=None, tickets=None, light=False))
    view: list[PlanView] = []

    def current() -> bool:
        # The panel is looked up until found, then only read: a query every 2 ms walks every widget
        # of the screen, work the floor's check (one attribute) never does.
        view.extend(() if view else app.screen.query(PlanView))
        return bool(view) and view[0].is_current

    async with app.run_test(size=(100, 32)) as pilot:
        await _until(current, "the screen's plan")
        await pilot.pause()  # the refresh that paints it
        painted = time.time()
    print(repr(painted))


async def _bare_child() -> None:
    from textual import work
    from textual.app import App, ComposeResult
    from textual.widgets import Static

    class Bare(App[None]):
        solved = False

        def compose(self) -> ComposeResult:
            yield Static("planning...")

        def on_mount(self) -> None:
            self.call_after_refresh(self.solve)

        @work(thread=True)
        def solve(self) -> None:
            from meltfix.commands.screen import first_demo_heat
            from meltfix.plan.heat_load import load_of
            from meltfix.plan.hot_model import HotModel
            from meltfix.plan.plan_model import ModelShape
            from meltfix.shop.heat import load_heat
            from meltfix.shop.recipes import load_recipes

            book = load_recipes()
            heat = load_heat(first_demo_heat(), book)
            model = HotModel(ModelShape(book, book.grade(heat.grade), heat.stage, False, True))
            load = load_of(model.shape, heat, book.settings.aim_penalty)
            model.load(load)
            found = model.solve_mip(60.0, 1e-6, load.integrality > 0)[0] if load.integrality.any() else model.solve_lp()
            cost = float(load.cost @ found.x) if found is not None else float("nan")
            self.call_from_thread(self.query_one(Static).update, f"cost {cost:.2f}")
            self.solved = True

    app = Bare()
    async with app.run_test(size=(100, 32)) as pilot:
        await _until(lambda: app.solved, "the bare app's cost")
        await pilot.pause()
        painted = time.time()
    print(repr(painted))


def _cpu() -> float:
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


# The children's environment: bytecode cached as an installed package has it (see the docstring).
_ENV = {key: value for key, value in os.environ.items() if key != "PYTHONDONTWRITEBYTECODE"}


def _wall(command: list[str]) -> tuple[float, float]:
    """(wall-clock seconds, CPU seconds) of one process run to its end."""
    started, cpu = time.time(), _cpu()
    subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True, env=_ENV)
    return time.time() - started, _cpu() - cpu


def _painted(mode: str) -> tuple[float, float]:
    """(seconds from launch to the painted plan, CPU seconds of the whole child)."""
    started, cpu = time.time(), _cpu()
    out = subprocess.run([sys.executable, __file__, mode], capture_output=True, text=True, check=True, env=_ENV)
    return float(out.stdout.split()[-1]) - started, _cpu() - cpu


def _report(label: str, ours: list[tuple[float, float]], floor: list[tuple[float, float]], floor_label: str,
            goal: float | None) -> None:
    wall = [statistics.median(t[0] for t in runs) for runs in (ours, floor)]
    cpu = [statistics.median(t[1] for t in runs) for runs in (ours, floor)]
    ratio = wall[0] / wall[1]
    verdict = "" if goal is None else f" (goal <= {goal:g}x: {'met' if ratio <= goal else 'NOT met'})"
    print(f"{label}: median {wall[0]:.3f} s wall, {cpu[0]:.3f} s CPU\n"
          f"    floor, {floor_label}: median {wall[1]:.3f} s wall, {cpu[1]:.3f} s CPU\n"
          f"    ratio {ratio:.2f} wall{verdict}, {cpu[0] / cpu[1]:.2f} CPU")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--runs", type=int, default=7)
    parser.add_argument("--screen-child", action="store_true", help=argparse.SUPPRESS)
    parser.add_argument("--bare-child", action="store_true", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.screen_child:
        asyncio.run(_screen_child())
        return
    if args.bare_child:
        asyncio.run(_bare_child())
        return
    from meltfix.commands.screen import first_demo_heat

    heat = str(first_demo_heat())
    with tempfile.TemporaryDirectory(prefix="meltfix-bench-pyc-") as cache:
        _ENV["PYTHONPYCACHEPREFIX"] = cache
        _measure(heat, args.runs)


def _measure(heat: str, runs: int) -> None:
    """Every figure ``runs`` times, interleaved, after one untimed run of each (filling the cache)."""
    for command in ([sys.executable, "-c", CLI, "solve", heat, "--json"], [sys.executable, "-c", "import numpy"]):
        _wall(command)  # fills the bytecode cache, untimed
    _painted("--screen-child")
    _painted("--bare-child")
    figures: dict[str, list[tuple[float, float]]] = {key: [] for key in ("solve", "numpy", "help", "pass", "screen", "bare")}
    for _ in range(runs):
        figures["solve"].append(_wall([sys.executable, "-c", CLI, "solve", heat, "--json"]))
        figures["numpy"].append(_wall([sys.executable, "-c", "import numpy"]))
        figures["help"].append(_wall([sys.executable, "-c", CLI, "--help"]))
        figures["pass"].append(_wall([sys.executable, "-c", "pass"]))
        figures["screen"].append(_painted("--screen-child"))
        figures["bare"].append(_painted("--bare-child"))
    print(f"{runs} runs each, interleaved; load average {os.getloadavg()[0]:.1f} on {os.cpu_count()} CPUs")
    _report("meltfix solve (one heat, --json)", figures["solve"], figures["numpy"], 'python -c "import numpy"', 1.5)
    _report("meltfix --help", figures["help"], figures["pass"], 'python -c "pass"', None)
    _report("first plan painted on the screen", figures["screen"], figures["bare"],
            "bare Textual app solving the same heat", 1.5)
    _needs(runs)


# What `meltfix solve` imports before any of its own modules, one more library per row.
_LIBRARIES = ("numpy", "numpy.random", "highspy", "dataclasses, argparse, json, tomllib, pathlib")


def _needs(runs: int) -> None:
    """The libraries the solve process needs, added one at a time, beside importing numpy; and site's own start."""
    ladder = [", ".join(_LIBRARIES[:k + 1]) for k in range(len(_LIBRARIES))]
    commands = [[sys.executable, "-c", f"import {modules}"] for modules in ladder]
    commands += [[sys.executable, "-c", "pass"], [sys.executable, "-S", "-c", "pass"]]
    for command in commands:
        _wall(command)  # fills the bytecode cache, untimed
    best = [math.inf] * len(commands)
    for _ in range(runs):  # interleaved, so a burst of load hits every row alike
        best = [min(seconds, _wall(command)[0]) for seconds, command in zip(best, commands)]
    print("what the solve process needs before its own modules (best of each), as ratios to importing numpy:")
    for modules, seconds in zip(ladder, best):
        print(f"    import {modules}: {seconds:.3f} s, {seconds / best[0]:.2f}")
    print(f"site at start (.pth files included): {1000 * (best[-2] - best[-1]):.0f} ms a process, floors too")


if __name__ == "__main__":
    main()
