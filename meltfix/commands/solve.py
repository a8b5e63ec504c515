"""`meltfix solve HEAT.toml [HEAT.toml ...] [--recipes DIR] [--json]` (options, JSON and exit codes are a contract).

Every plan is the cheapest whose odds of landing inside every window reach the shop's
``target_odds`` (meltfix.plan.risk), judged by a seeded Monte Carlo run (meltfix.plan.uncertainty);
``--sure P`` sets the target for one run, ``--on-paper`` gives the exact-window plan.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from meltfix.base.errors import InputError
from meltfix.commands.exits import EXIT_BAD_INPUT, EXIT_CLOSEST, EXIT_OK, EXIT_SHORT
from meltfix.plan.result import RiskPlan

# "Worst" status of a batch: a heat that could not be read at all outranks a closest plan, which
# outranks a plan whose odds fall short.
_SEVERITY = {EXIT_OK: 0, EXIT_SHORT: 1, EXIT_CLOSEST: 2, EXIT_BAD_INPUT: 3}
# Memory grows with draws x elements x materials (about 5 kB a draw for the demo shop).
_MAX_DRAWS = 20_000
_MAX_JOBS = 64
# Heats go to the processes in runs of consecutive files, a few runs per process, so each run
# loads the recipe book once and plans on hot models, and a slow run does not hold the others up.
_RUNS_PER_JOB = 4


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("heats", nargs="+", metavar="HEAT.toml", help="heat files (grade, bath_kg, [analysis])")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--json", action="store_true", help="one JSON object per heat (JSON Lines)")
    parser.add_argument("--no-aim", action="store_true", help="cheapest plan inside the windows, ignoring aims")
    parser.add_argument("--continuous", action="store_true", help="allow part packs (bags, bales, coils)")
    parser.add_argument("--sure", metavar="P", type=float,
                        help="the odds of landing inside every window the plan must reach, for this run "
                             "(e.g. 0.99; default: shop.toml target_odds)")
    parser.add_argument("--on-paper", action="store_true",
                        help="plan to the exact windows with no margin for scatter (for comparison)")
    parser.add_argument("--to-aims", action="store_true",
                        help="pull a heat that is already inside at the target odds towards the aims "
                             "(otherwise its plan is empty)")
    parser.add_argument("--draws", metavar="N", type=int, default=2000, help="Monte Carlo draws per heat (default 2000)")
    parser.add_argument("--seed", metavar="S", type=int, default=0, help="seed of the draws (default 0)")
    parser.add_argument("--jobs", metavar="N", type=int, default=1,
                        help="plan the heats in N processes (output stays in the order given; default 1)")


def run(args: argparse.Namespace) -> int:
    if not 1 <= args.jobs <= _MAX_JOBS:
        raise InputError("command line", "--jobs", f"{args.jobs} is outside 1..{_MAX_JOBS}")
    if args.jobs > 1 and len(args.heats) > 1:
        return _run_in_processes(args)
    return _run_here(args)


def _run_here(args: argparse.Namespace) -> int:
    from meltfix.plan.result import PlanOptions
    from meltfix.plan.risk import RiskPlanner
    from meltfix.shop.heat import load_heat
    from meltfix.shop.recipes import load_recipes

    if args.sure is not None and not 0.0 < args.sure < 1.0:
        raise InputError("command line", "--sure", f"{args.sure:g} is not a probability between 0 and 1 (e.g. 0.95)")
    if not 1 <= args.draws <= _MAX_DRAWS:
        raise InputError("command line", "--draws", f"{args.draws} is outside 1..{_MAX_DRAWS:,}")
    if not 0 <= args.seed < 2**63:  # NumPy's generators take a seed of 0 or more
        raise InputError("command line", "--seed", f"{args.seed} is not a whole number from 0 up")
    book = load_recipes(args.recipes)  # a bad recipe book is bad input for every heat: exit 2 at once
    planner = RiskPlanner(book)
    options = PlanOptions(use_aim=not args.no_aim, continuous=args.continuous)
    worst = EXIT_OK
    for name in args.heats:
        try:
            heat = load_heat(name, book)
            try:
                risk = planner.plan(heat, args.sure, options, draws=args.draws, seed=args.seed, on_paper=args.on_paper,
                                    to_aims=args.to_aims)
            except InputError as exc:  # the planner knows the heat, not its file: name the file
                raise InputError(name, exc.field, exc.message) from None
        except InputError as exc:
            print(f"meltfix: {exc}", file=sys.stderr)
            if args.json:
                print(json.dumps({"heat": Path(name).stem, "status": "error", "error": str(exc)}))
            status = EXIT_BAD_INPUT
        else:
            status = exit_status(risk)
            if args.json:
                print(json.dumps(risk.to_json()))
            else:
                from meltfix.present.render import print_plan

                print_plan(risk.plan, odds=risk.odds, risk=risk, units=book.settings.units)
        worst = max(worst, status, key=_SEVERITY.__getitem__)
    return worst


def exit_status(risk: RiskPlan) -> int:
    """0: windows met and the target reached; 4: met on paper, odds short; 3: closest plan."""
    if risk.plan.status != "optimal":
        return EXIT_CLOSEST
    return EXIT_OK if risk.reached else EXIT_SHORT


def _run_in_processes(args: argparse.Namespace) -> int:
    """Plan runs of consecutive heats in ``args.jobs`` processes; print each run's output as it
    comes, in the order the heats were given."""
    import os
    import shutil
    from concurrent.futures import ProcessPoolExecutor

    heats = list(args.heats)
    size = -(-len(heats) // (args.jobs * _RUNS_PER_JOB))
    runs = [argparse.Namespace(**{**vars(args), "heats": heats[k:k + size], "jobs": 1})
            for k in range(0, len(heats), size)]
    # The workers print into buffers: they format as this terminal would (its width, colour or not).
    looks = {"COLUMNS": str(shutil.get_terminal_size().columns)}
    if sys.stdout.isatty() and "NO_COLOR" not in os.environ:
        looks["FORCE_COLOR"] = "1"
    worst = EXIT_OK
    with ProcessPoolExecutor(max_workers=args.jobs, initializer=os.environ.update, initargs=(looks,)) as pool:
        try:
            for status, out, err, error in pool.map(_run_captured, runs):
                sys.stdout.write(out)
                sys.stderr.write(err)
                sys.stdout.flush()
                if error is not None:  # bad input for every heat (the recipe book, an option): as without --jobs
                    raise InputError(*error)
                worst = max(worst, status, key=_SEVERITY.__getitem__)
        except BaseException:
            # Bad input, a reader gone (| head) or Ctrl+C: the runs not yet started are dropped rather
            # than planned for nobody (leaving the pool would wait for them all).
            pool.shutdown(wait=False, cancel_futures=True)
            raise
    return worst


def _run_captured(args: argparse.Namespace) -> tuple[int, str, str, tuple[str, str, str] | None]:
    """One run of heats in a worker process: (exit status, stdout, stderr, the bad-input error that
    stopped the whole run, if any)."""
    import contextlib
    import io

    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        try:
            status = _run_here(args)
        except InputError as exc:
            return EXIT_BAD_INPUT, out.getvalue(), err.getvalue(), (exc.source, exc.field, exc.message)
    return status, out.getvalue(), err.getvalue(), None
