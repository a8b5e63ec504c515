"""`meltfix solve HEAT.toml [HEAT.toml ...] [--recipes DIR] [--json]` (DESIGN §6).

``--odds`` adds the plan's in-spec odds from a seeded Monte Carlo run (meltfix.uncertainty);
``--sure P`` plans in robust mode, tightening the windows until the odds reach P.
"""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from meltfix.cli import EXIT_BAD_INPUT, EXIT_CLOSEST, EXIT_OK
from meltfix.errors import InputError

# "Worst" status of a batch: a heat that could not be read at all outranks a closest plan.
_SEVERITY = {EXIT_OK: 0, EXIT_CLOSEST: 1, EXIT_BAD_INPUT: 2}
# Memory grows with draws x elements x materials (about 5 kB a draw for the demo shop).
_MAX_DRAWS = 20_000


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("heats", nargs="+", metavar="HEAT.toml", help="heat files (grade, bath_kg, [analysis])")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--json", action="store_true", help="one JSON object per heat (JSON Lines)")
    parser.add_argument("--no-aim", action="store_true", help="cheapest plan inside the windows, ignoring aims")
    parser.add_argument("--continuous", action="store_true", help="allow part packs (bags, bales, coils)")
    parser.add_argument("--odds", action="store_true",
                        help="add the odds of landing inside each limit and the grade (recoveries ±10 %%, "
                             "bath weight ±3 %%, spectrometer repeatability)")
    parser.add_argument("--sure", metavar="P", type=float,
                        help="robust mode: tighten the windows until the heat lands inside with probability P "
                             "(e.g. 0.95); implies --odds")
    parser.add_argument("--draws", metavar="N", type=int, default=2000, help="Monte Carlo draws per heat (default 2000)")
    parser.add_argument("--seed", metavar="S", type=int, default=0, help="seed of the draws (default 0)")


def run(args: argparse.Namespace) -> int:
    from meltfix.heat import load_heat
    from meltfix.planner import PlanOptions, Planner
    from meltfix.recipes import load_recipes

    if args.sure is not None and not 0.0 < args.sure < 1.0:
        raise InputError("command line", "--sure", f"{args.sure:g} is not a probability between 0 and 1 (e.g. 0.95)")
    if not 1 <= args.draws <= _MAX_DRAWS:
        raise InputError("command line", "--draws", f"{args.draws} is outside 1..{_MAX_DRAWS:,}")
    book = load_recipes(args.recipes)  # a bad recipe book is bad input for every heat: exit 2 at once
    planner = Planner(book)
    options = PlanOptions(use_aim=not args.no_aim, continuous=args.continuous)
    worst = EXIT_OK
    for name in args.heats:
        odds = sure = None
        try:
            heat = load_heat(name, book)
            try:
                if args.sure is not None:
                    from meltfix.uncertainty import robust_plan

                    robust = robust_plan(heat, book, args.sure, options, draws=args.draws, seed=args.seed)
                    plan, odds = robust.plan, robust.odds
                    sure = {"level": robust.level, "reached": robust.reached, "inset_sigmas": robust.inset_sigmas}
                else:
                    plan = planner.plan(heat, options)
                    if args.odds:
                        from meltfix.uncertainty import plan_odds

                        odds = plan_odds(heat, book, plan, draws=args.draws, seed=args.seed)
            except InputError as exc:  # the planner knows the heat, not its file: name the file
                raise InputError(name, exc.field, exc.message) from None
        except InputError as exc:
            print(f"meltfix: {exc}", file=sys.stderr)
            if args.json:
                print(json.dumps({"heat": Path(name).stem, "status": "error", "error": str(exc)}))
            status = EXIT_BAD_INPUT
        else:
            status = EXIT_OK if plan.status == "optimal" else EXIT_CLOSEST
            if args.json:
                line = plan.to_json()
                if odds is not None:
                    line["odds"] = odds.to_json()
                if sure is not None:
                    line["sure"] = sure
                print(json.dumps(line))
            else:
                from meltfix.render import print_plan

                print_plan(plan, odds=odds)
        worst = max(worst, status, key=_SEVERITY.__getitem__)
    return worst
