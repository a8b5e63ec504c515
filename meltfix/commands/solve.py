"""`meltfix solve HEAT.toml [HEAT.toml ...] [--recipes DIR] [--json]` (DESIGN §6)."""

from __future__ import annotations

import argparse
import json
import sys
from pathlib import Path

from meltfix.errors import InputError

EXIT_OK, EXIT_BAD_INPUT, EXIT_CLOSEST = 0, 2, 3
# "Worst" status of a batch: a heat that could not be read at all outranks a closest plan.
_SEVERITY = {EXIT_OK: 0, EXIT_CLOSEST: 1, EXIT_BAD_INPUT: 2}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("heats", nargs="+", metavar="HEAT.toml", help="heat files (grade, bath_kg, [analysis])")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--json", action="store_true", help="one JSON object per heat (JSON Lines)")
    parser.add_argument("--no-aim", action="store_true", help="cheapest plan inside the windows, ignoring aims")
    parser.add_argument("--continuous", action="store_true", help="allow part packs (bags, bales, coils)")


def run(args: argparse.Namespace) -> int:
    from meltfix.heat import load_heat
    from meltfix.planner import PlanOptions, Planner
    from meltfix.recipes import load_recipes

    book = load_recipes(args.recipes)  # a bad recipe book is bad input for every heat: exit 2 at once
    planner = Planner(book)
    options = PlanOptions(use_aim=not args.no_aim, continuous=args.continuous)
    worst = EXIT_OK
    for name in args.heats:
        try:
            heat = load_heat(name, book)
            try:
                plan = planner.plan(heat, options)
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
                print(json.dumps(plan.to_json()))
            else:
                from meltfix.render import print_plan

                print_plan(plan)
        worst = max(worst, status, key=_SEVERITY.__getitem__)
    return worst
