"""`meltfix replay RECORD [--json] [--recipes DIR]`: a recorded heat beside the plans meltfix would make.

`meltfix replay --heat ID [--logbook PATH]` replays a heat from the logbook instead of a file
(its samples and the additions actually made; see meltfix.records.heat_record.record_from_history).

``--json`` prints one object ``{"heat": ID, "steps": [{"sample", "planned", "actual", "predicted",
"measured_next", "planned_cost", "actual_cost", ...}], ...}`` (see ReplayStep.to_json for every field).
When the planner refuses a sample, that step keeps its actual additions and outcome, with
``"planned": []``, ``"planned_cost": null`` and the reason in ``"plan_error"``; a sample already inside
every limit at the shop's target odds (as the risk planner judges it) gets no plan either (``"plan_status": "inside"``, ``"plan_needed": false``).
``"planned_total"`` is meltfix along the same path, its plan at ``"first_needed"`` (the plans of
later samples replace it, so they are not added), against ``"actual_total"``. Exit 0 whether or not
the heat met its grade (a replay reports history); 2 for a bad record or recipe book.
The record format is described in meltfix.records.heat_record's docstring.
"""

from __future__ import annotations

import argparse
import json
from typing import TYPE_CHECKING

from meltfix.base.errors import InputError
from meltfix.commands.logbook_args import LOGBOOK_HELP, given_logbook

if TYPE_CHECKING:
    from meltfix.records.heat_record import HeatRecord
    from meltfix.shop.recipes import RecipeBook


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("record", metavar="RECORD", nargs="?",
                        help="a recorded heat (TOML: samples and additions made); or give --heat")
    parser.add_argument("--heat", metavar="ID", help="replay this heat from the logbook instead of a file")
    parser.add_argument("--logbook", metavar="PATH|URL", help="the " + LOGBOOK_HELP + " to read --heat from")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of tables")


def run(args: argparse.Namespace) -> int:
    from meltfix.records.replay import element_paths, replay, replay_json
    from meltfix.shop.recipes import load_recipes

    if args.record and args.heat:
        raise InputError("command line", "RECORD", "give a record file or --heat ID, not both")
    if not args.record and not args.heat:
        raise InputError("command line", "RECORD", "give a record file, or --heat ID to replay a heat from the logbook")
    if args.logbook and not args.heat:
        raise InputError("command line", "--logbook", "only says where to read --heat ID from; give --heat too")
    book = load_recipes(args.recipes)
    record = _record(args, book)
    steps = replay(record, book)
    if args.json:
        print(json.dumps(replay_json(record, steps, book)))
        return 0

    from rich.console import Console
    from rich.rule import Rule

    from meltfix.present.replay_render import fitted_path_chart, step_renderable, summary_table

    console = Console()
    grade = book.grade(record.grade)
    currency = book.settings.currency
    date = f" · {record.date}" if record.date else ""
    console.print(Rule(f"Replay of heat {record.heat_id} · {grade.name} · {record.stage}{date}"))
    for step in steps:
        console.print(step_renderable(step, dict(grade.window_pct), currency, book.settings.units))
        console.print()
    console.print(fitted_path_chart(element_paths(steps, grade), [s.sample.sample_id for s in steps], console,
                                    console.width))
    console.print()
    console.print(summary_table(steps, currency))
    console.print("[dim]meltfix advises; a qualified person decides, under local codes and the shop's own "
                  "procedures.[/]")
    return 0


def _record(args: argparse.Namespace, book: RecipeBook) -> HeatRecord:
    """The heat to replay: the record file, or the heat's history in the logbook."""
    from meltfix.records.heat_record import load_record, record_from_history

    if args.record:
        return load_record(args.record, book)
    from meltfix.records.logbook import Logbook

    with Logbook(given_logbook(args.logbook), create=False) as logbook:
        history = logbook.heat_history(args.heat)
    return record_from_history(history, book)
