"""Command-line options shared by the commands that read the logbook (`report`, `recoveries`)."""

from __future__ import annotations

import argparse
import re
from datetime import date
from pathlib import Path

from meltfix.errors import InputError

_ISO_DATE = re.compile(r"^\d{4}-\d{2}-\d{2}$")


def add_logbook_arguments(parser: argparse.ArgumentParser) -> None:
    """--logbook PATH or --demo, and the date range --from / --to."""
    source = parser.add_mutually_exclusive_group()
    source.add_argument("--logbook", metavar="PATH", type=Path,
                        help="logbook file (default: $MELTFIX_LOGBOOK, else meltfix/logbook.sqlite in the "
                        "user's data folder)")
    source.add_argument("--demo", action="store_true",
                        help="the demo shop's week of heats (built on first use, a few seconds)")
    parser.add_argument("--from", dest="date_from", metavar="DATE",
                        help="first day, YYYY-MM-DD (heats that started on or after it)")
    parser.add_argument("--to", dest="date_to", metavar="DATE", help="last day, YYYY-MM-DD (inclusive)")


def parse_date(text: str, option: str) -> date:
    """An ISO date (YYYY-MM-DD) from the command line, or an InputError naming the option."""
    if not _ISO_DATE.match(text):
        raise InputError("command line", option, f"'{text}' is not a date in the form YYYY-MM-DD")
    try:
        return date.fromisoformat(text)
    except ValueError as exc:
        raise InputError("command line", option, f"'{text}' is not a real date ({exc})") from None


def date_range(args: argparse.Namespace) -> tuple[date | None, date | None]:
    """The --from / --to days, checked to be real dates in order."""
    date_from = parse_date(args.date_from, "--from") if args.date_from else None
    date_to = parse_date(args.date_to, "--to") if args.date_to else None
    if date_from and date_to and date_from > date_to:
        raise InputError("command line", "--from", f"{date_from} is after --to {date_to}")
    return date_from, date_to


def logbook_to_read(args: argparse.Namespace, command: str) -> Path:
    """The logbook file the command reads: the demo week, --logbook, or the default, which must exist."""
    if args.demo:
        from meltfix.demo_logbook import demo_logbook_path

        return demo_logbook_path()
    from meltfix.logbook import default_logbook_path

    path = args.logbook or default_logbook_path()
    if not path.exists():
        raise InputError(path, "", "no logbook here yet (one is created when the first heat is recorded); "
                                   f"`meltfix {command} --demo` shows the demo shop's week")
    return path
