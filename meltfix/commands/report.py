"""`meltfix report [--from DATE] [--to DATE] [--csv FILE] [--logbook PATH] [--demo] [--recipes DIR]`.

The supervisor's cost report from the logbook: rich tables, with bars for the figures a person
would rather look at than read (cost per tonne of each heat and grade, each material's share).
The numbers come from :mod:`meltfix.records.report`; this module only draws them.
"""

from __future__ import annotations

import argparse
import math
from pathlib import Path
from typing import TYPE_CHECKING

from meltfix.base.errors import visible
from meltfix.base.units import Units
from meltfix.commands.logbook_args import add_logbook_arguments, date_range, logbook_to_read
from meltfix.plan.numbers import kg_text, money_text

if TYPE_CHECKING:
    from rich.console import JustifyMethod, RenderableType

    from meltfix.records.logbook.location import LogbookLocation
    from meltfix.records.report import CostReport

_EIGHTHS = " ▏▎▍▌▋▊▉"
BAR_WIDTH = 24


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
    from meltfix.records.report import build_report, write_heats_csv

    with Logbook(path, create=False) as logbook:
        report = build_report(logbook, date_from, date_to)
    written = write_heats_csv(report, args.csv) if args.csv else None  # a bad CSV path fails before any output
    console = Console()
    console.print(report_renderable(report, path, max(console.width, 80), units))
    if written:
        console.print(f"Wrote {len(report.heats)} heats to {written}", markup=False)
    return 0


# ---------------------------------------------------------------------------------------------
# Drawing


def bar(value: float, largest: float, width: int = BAR_WIDTH) -> str:
    """A horizontal bar of ``value`` against ``largest``, in eighths of a character."""
    if not largest > 0 or not value > 0 or math.isnan(value):
        return ""
    eighths = round(min(value / largest, 1.0) * width * 8)
    return "█" * (eighths // 8) + (_EIGHTHS[eighths % 8] if eighths % 8 else "")


# Sums over many heats in whole units of the currency; costs per tonne with the decimals of any amount.
def _money(value: float) -> str:
    return "–" if math.isnan(value) else money_text(value, places=0)


def _signed(value: float) -> str:
    if math.isnan(value) or round(value) == 0:
        return "0"
    return money_text(value, places=0, signed=True)


def _per_t(value: float) -> str:
    return "–" if math.isnan(value) else money_text(value)


def report_renderable(report: CostReport, logbook_path: LogbookLocation, width: int = 80,
                      units: Units = Units()) -> RenderableType:
    """The whole report as one rich renderable, laid out for a terminal ``width`` columns wide (80 or more),
    tons, masses and costs per ton in the shop's ``units``."""
    from rich import box
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text

    cur = report.currency
    ton = units.ton_unit
    unit = f"{cur}/{ton}" if cur else f"per {ton}"

    def per_t(value: float) -> str:
        return _per_t(units.per_ton(value))

    def tons(value: float) -> str:
        return _tonnes(units.tons(value))

    period = (f"{report.date_from or 'the start'} to {report.date_to or 'the end'}"
              if report.date_from or report.date_to else "every heat in the logbook")
    shop = f" — {visible(report.shop_name)}" if report.shop_name else ""
    head = Text.assemble((f"Addition cost report{shop}\n", "bold"), (visible(f"{period} · logbook {logbook_path}"), "dim"))
    totals = report.totals
    if not totals["heats"]:
        return Group(head, Text("No heats were recorded in this period.", style="yellow"))

    in_cur = f" {cur}" if cur else ""
    tonnes = f"[b]{tons(totals['tonnes'])}[/] {units.tons_unit} of bath" if totals["tonnes"] > 0 else "bath weights unknown"
    summary = Text.from_markup(
        f"[b]{totals['heats']}[/] heats · {tonnes} · [b]{totals['corrections']}[/] "
        f"corrections, [b]{totals['repeat_heats']}[/] heats needed more than one\n"
        f"Additions actually made [b]{_money(totals['cost'])}{in_cur}[/], [b]{per_t(totals['cost_per_t'])} {unit}[/]\n"
        f"Planned {_money(totals['planned_cost'])}{in_cur}; actual − planned {_signed(totals['difference'])}{in_cur}")

    def table(title: str, columns: list[tuple[str, JustifyMethod]]) -> Table:
        made = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, collapse_padding=True, pad_edge=False,
                     title_style="bold")
        for name, justify in columns:
            # Figures never wrap; a grade's name folds onto a second line rather than being cut.
            if name == "Grade":
                made.add_column(name, justify=justify, max_width=grade_width, overflow="fold")
            else:
                made.add_column(name, justify=justify, no_wrap=True)
        return made

    money = f" ({cur})" if cur else ""
    grade_width = 16 if width < 100 else 28  # room for a grade's full name on one line on a wide terminal
    heats = table(f"Cost per heat{money}", [("Heat", "left"), ("Started", "left"), ("Grade", "left"), (ton, "right"),
                                            ("Corr", "right"), ("Planned", "right"), ("Actual", "right"),
                                            (unit, "right")])
    for row in report.heats.itertuples(index=False):
        heats.add_row(_data(row.heat), _when(row.started_at), _data(row.grade), tons(row.bath_t),
                      str(row.corrections), _money(row.planned_cost), _money(row.cost), per_t(row.cost_per_t))

    chart = Table.grid(padding=(0, 1))
    chart.add_column(no_wrap=True)
    chart.add_column(no_wrap=True)
    chart.add_column(justify="right", no_wrap=True)
    largest = report.heats["cost_per_t"].max()
    bar_width = min(60, max(10, width - 8 - 8 - 4))
    colours = {0: "dim", 1: "cyan", 2: "yellow"}
    for row in report.heats.itertuples(index=False):
        style = colours.get(row.corrections, "red")
        chart.add_row(_data(row.heat), Text(bar(row.cost_per_t, largest, bar_width), style=style), per_t(row.cost_per_t))
    legend = Text.assemble("bars: ", ("one correction", "cyan"), " · ", ("two", "yellow"), " · ",
                           ("three or more", "red"), " · ", ("none", "dim"), style="dim")

    grades = table(f"Per grade{money}", [("Grade", "left"), ("Heats", "right"), (ton, "right"), ("Planned", "right"),
                                         ("Actual", "right"), (unit, "right"), (">1 corr", "right"), ("", "left")])
    largest = report.grades["cost_per_t"].max()
    for row in report.grades.itertuples(index=False):
        grades.add_row(row.grade, str(row.heats), tons(row.tonnes), _money(row.planned_cost),
                       _money(row.cost), per_t(row.cost_per_t), str(row.repeat_heats),
                       Text(bar(row.cost_per_t, largest, min(40, max(6, width - 72 - grade_width + 16))), style="cyan"))

    materials = table(f"Per material, planned against actual{money}", [
        ("Material", "left"), (f"Planned {units.mass_unit}", "right"), (f"Actual {units.mass_unit}", "right"),
        ("Planned", "right"),
        ("Actual", "right"), ("Share", "right")])
    for row in report.materials.itertuples(index=False):
        materials.add_row(_data(row.material), kg_text(units.mass(row.planned_kg)), kg_text(units.mass(row.actual_kg)),
                          _money(row.planned_cost), _money(row.cost), f"{row.share:.0%}")

    parts: list[RenderableType] = [head, summary, Text(""), heats]
    if report.heats["cost_per_t"].notna().any():  # nothing to draw when no bath weight is known
        parts += [Text(f"Cost per {'short ton' if units.us else 'tonne'} by heat ({unit})", style="bold"), chart,
                  legend, Text("")]
    parts += [grades, materials]
    repeat = report.repeat_heats
    if len(repeat):
        again = table(f"Heats that needed more than one correction{money}", [
            ("Heat", "left"), ("Started", "left"), ("Grade", "left"), ("Corr", "right"), ("Actual", "right"),
            ("vs plan", "right"), (unit, "right")])
        for row in repeat.itertuples(index=False):
            again.add_row(_data(row.heat), _when(row.started_at), _data(row.grade), str(row.corrections),
                          _money(row.cost), _signed(row.difference), per_t(row.cost_per_t))
        parts.append(again)
    if report.notes:
        parts.append(Text(visible("Notes: " + "; ".join(report.notes) + "."), style="dim"))
    return Group(*parts)


def _data(value: object):  # -> Text; a logbook's text is shown as it is, never read as markup
    from rich.text import Text

    return Text(visible(str(value)))


def _when(moment) -> str:
    return moment.strftime("%d %b %H:%M")


def _tonnes(value: float) -> str:
    return "–" if math.isnan(value) else f"{value:,.0f}"
