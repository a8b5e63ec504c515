"""`meltfix report [--from DATE] [--to DATE] [--csv FILE] [--logbook PATH] [--demo] [--recipes DIR]`.

The supervisor's cost report from the logbook: the numbers come from :mod:`meltfix.records.report`,
the tables from :mod:`meltfix.present.report_render`; this module reads the arguments and prints.
"""

from __future__ import annotations

import argparse
from pathlib import Path

from meltfix.commands.logbook_args import add_logbook_arguments, date_range, logbook_to_read


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_logbook_arguments(parser)
    parser.add_argument("--recipes", metavar="DIR",
                        help="recipes folder whose shop.toml `units` the report is shown in (default: the built-in "
                             "demo shop); the CSV stays in t and kg")
    parser.add_argument("--csv", metavar="FILE", type=Path, help="also write one row per heat, with its cost, as CSV")


def run(args: argparse.Namespace) -> int:
    from rich.console import Console

    from meltfix.records.logbook import Logbook
    from meltfix.shop.recipes import load_recipes

    units = load_recipes(args.recipes).settings.units
    date_from, date_to = date_range(args)
    path = logbook_to_read(args, "report")
    from meltfix.present.report_render import report_renderable
    from meltfix.records.report import build_report, write_heats_csv

    with Logbook(path, create=False) as logbook:
        report = build_report(logbook, date_from, date_to)
    written = write_heats_csv(report, args.csv) if args.csv else None  # a bad CSV path fails before any output
    console = Console()
    console.print(report_renderable(report, path, max(console.width, 80), units))
    if written:
        console.print(f"Wrote {len(report.heats)} heats to {written}", markup=False)
    return 0
