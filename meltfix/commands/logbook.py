"""`meltfix logbook copy SOURCE TARGET [--skip-existing]`: move a shop's history between logbooks.

SOURCE and TARGET are each a SQLite file or a postgresql:// URL (SQLite to PostgreSQL and back).
Every heat, sample, burn, plan and addition is copied in one transaction and checked table by
table before it is committed (see :mod:`meltfix.records.logbook.copy`); a target that already holds any of
the same heats is refused unless ``--skip-existing``. Prints each table's rows; exit 0, or 2 with
one line naming the logbook for bad input (nothing written then).
"""

from __future__ import annotations

import argparse

from meltfix.base.errors import InputError
from meltfix.commands.logbook_args import given_logbook


def add_arguments(parser: argparse.ArgumentParser) -> None:
    actions = parser.add_subparsers(dest="action", metavar="ACTION")
    copy = actions.add_parser("copy", help="copy every heat of one logbook into another, checked table by table",
                              description="Copy every heat, sample, burn, plan and addition of SOURCE into TARGET "
                              "(each a SQLite file or a postgresql:// URL), checked table by table.")
    copy.add_argument("source", metavar="SOURCE", help="the logbook to copy from (it must exist)")
    copy.add_argument("target", metavar="TARGET", help="the logbook to copy into (created when new)")
    copy.add_argument("--skip-existing", action="store_true",
                      help="leave heats the target already holds as they are and copy the others "
                      "(without it such a target is refused)")


def run(args: argparse.Namespace) -> int:
    if args.action != "copy":
        raise InputError("command line", "ACTION", "give an action: `meltfix logbook copy SOURCE TARGET`")
    from meltfix.records.logbook import Logbook
    from meltfix.records.logbook.copy import copy_logbook

    with Logbook(given_logbook(args.source), create=False) as source:
        with Logbook(given_logbook(args.target)) as target:
            result = copy_logbook(source, target, skip_existing=args.skip_existing)
    print(f"Copied {result.heats} heats from {source.path} to {target.path}"
          + (f" ({len(result.skipped)} held there already, left as they were)" if result.skipped else "")
          + "; every table checked:")
    print(f"  {'table':<15} {'source':>8} {'target before':>14} {'target after':>13}")
    for table in result.tables:
        print(f"  {table.table:<15} {table.source_rows:>8} {table.target_before:>14} {table.target_after:>13}")
    return 0
