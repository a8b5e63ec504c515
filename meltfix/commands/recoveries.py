"""`meltfix recoveries [--logbook PATH | --demo] [--from DATE] [--to DATE] [--min-cases N] [--json] [--recipes DIR]`.

Each material's real recovery of each element, learnt from consecutive samples in the logbook and
the additions made between them, with a 95 % confidence interval; where the interval excludes the
recipe book's value (and there are enough cases) an update is proposed as lines to paste into
materials.toml. The recipes are never edited. The maths is in :mod:`meltfix.records.recovery_fit`.

``--json`` prints one object ``{"estimates": [{"material", "element", "catalogue", "estimate",
"ci_low", "ci_high", "cases", "propose"}], "skipped": N, "notes": [...]}`` (``ci_low`` and
``ci_high`` are null for a single case). Exit 0; 2 for bad input (no logbook, a bad date).
"""

from __future__ import annotations

import argparse
import json
from typing import TYPE_CHECKING

from meltfix.base.errors import InputError
from meltfix.commands.logbook_args import add_logbook_arguments, date_range, logbook_to_read
from meltfix.plan.numbers import recovery_text

if TYPE_CHECKING:
    from rich.console import JustifyMethod, RenderableType

    from meltfix.records.logbook.location import LogbookLocation
    from meltfix.records.recovery_fit import RecoveryEstimate, RecoveryFit
    from meltfix.shop.recipes import RecipeBook


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_logbook_arguments(parser)
    parser.add_argument("--min-cases", metavar="N", default="5",
                        help="fewest cases (sample pairs) before an update is proposed (default: 5)")
    parser.add_argument("--recipes", metavar="DIR", help="recipes folder (default: the built-in demo shop)")
    parser.add_argument("--json", action="store_true", help="print one JSON object instead of tables")


def _min_cases(value: object) -> int:
    text = str(value).strip()
    if not text.isdigit() or int(text) < 2:
        raise InputError("command line", "--min-cases",
                         f"'{value}' is not a whole number of at least 2 (an interval needs two cases)")
    return int(text)


def run(args: argparse.Namespace) -> int:
    from meltfix.records.logbook import Logbook
    from meltfix.shop.recipes import load_recipes

    date_from, date_to = date_range(args)
    min_cases = _min_cases(args.min_cases)
    book = load_recipes(args.recipes)
    path = logbook_to_read(args, "recoveries")
    from meltfix.records.recovery_fit import fit_logbook

    with Logbook(path, create=False) as logbook:
        fit = fit_logbook(logbook, book, date_from, date_to, min_cases)
    if args.json:
        print(json.dumps(fit.to_json()))
        return 0

    from rich.console import Console

    console = Console()
    console.print(fit_renderable(fit, path))
    snippet = toml_snippet(fit, book)
    if snippet:
        console.print("\n[bold]Proposed lines for materials.toml[/] [dim](check them first; nothing was "
                      "changed)[/]")
        console.print(snippet, markup=False, highlight=False, soft_wrap=True)
    console.print("[dim]meltfix advises; a qualified person decides, under local codes and the shop's own "
                  "procedures.[/]")
    return 0


def fit_renderable(fit: RecoveryFit, logbook_path: LogbookLocation) -> RenderableType:
    """The estimates as a rich table, with the notes under it."""
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    head = Text.assemble(("Recoveries learnt from the logbook\n", "bold"), (f"logbook {logbook_path}", "dim"))
    notes = Text("\n".join(f"· {note}" for note in fit.notes), style="dim")
    if not fit.estimates:
        return Group(head, Text("No case to learn from: no sample pair with additions between them "
                                "passed the checks below.", style="yellow"), notes)
    level = f"{fit.confidence * 100:g} % CI"
    table = Table(box=box.SIMPLE_HEAD, collapse_padding=True, pad_edge=False)
    # Figures never wrap; a long material name does, so the table fits 80 columns.
    table.add_column("Material", max_width=22)
    columns: tuple[tuple[str, JustifyMethod], ...] = (("El", "left"), ("Catalogue", "right"), ("Estimate", "right"),
                          (level, "right"), ("Cases", "right"), ("Proposal", "left"))
    for name, justify in columns:
        table.add_column(name, justify=justify, no_wrap=True, min_width=len(name))
    for found in fit.estimates:
        interval = "–" if found.ci_low is None else f"{recovery_text(found.ci_low)}–{recovery_text(found.ci_high)}"
        if found.propose:
            # The figure to write in materials.toml, where recoveries are fractions.
            proposal = Text(f"→ {found.proposed:g}", style="bold green")
        elif found.cases < fit.min_cases:
            proposal = Text("too few cases", style="dim")
        elif found.ci_low is not None and found.ci_high is not None and found.ci_low <= found.catalogue <= found.ci_high:
            proposal = Text("keep", style="dim")
        else:
            proposal = Text("data contradict the balance", style="yellow")
        table.add_row(found.material, found.element, recovery_text(found.catalogue), recovery_text(found.estimate),
                      interval, str(found.cases), proposal)
    return Group(head, table, notes)


# What the metallurgist pastes into materials.toml, where recoveries are fractions.
def _toml_number(value: float) -> str:
    return f"{value:.3f}".rstrip("0").rstrip(".") if value != 1.0 else "1.0"


def toml_snippet(fit: RecoveryFit, book: RecipeBook) -> str:
    """Lines for materials.toml: per material with a proposal, its whole ``recovery = {...}`` line
    (unchanged elements keep their catalogue values, so the line can replace the material's own),
    with what it was and the evidence in a comment. Empty when nothing is proposed."""
    proposals: dict[str, list[RecoveryEstimate]] = {}
    for found in fit.proposals:
        proposals.setdefault(found.material, []).append(found)
    lines = []
    for name, changes in proposals.items():
        material = book.material(name)
        new = {found.element: found.proposed for found in changes}
        recovery = {s: new.get(s, r) for s, r in material.recovery.items() if s != "Fe"}
        evidence = "; ".join(f"{f.element} was {_toml_number(f.catalogue)}, {f.cases} cases, "
                             f"{fit.confidence * 100:g} % CI {f.ci_low:.3f}-{f.ci_high:.3f}" for f in changes)
        lines += [f'# [[material]] name = "{name}": replace its recovery line with',
                  "recovery = { " + ", ".join(f"{s} = {_toml_number(r)}" for s, r in recovery.items())
                  + f" }}  # {evidence}"]
    return "\n".join(lines)
