"""Rich tables of the supervisor's cost report (`meltfix report`), with bars for the figures a person
would rather look at than read (cost per tonne of each heat and grade). The numbers come from
:mod:`meltfix.records.report`; this module only draws them, masses, tons and costs per ton in the
shop's display units.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime

from rich import box
from rich.console import Group, JustifyMethod, RenderableType
from rich.table import Table
from rich.text import Text

from meltfix.base.errors import visible
from meltfix.base.units import Units
from meltfix.plan.numbers import kg_text, money_text
from meltfix.records.logbook.location import LogbookLocation
from meltfix.records.report import CostReport

_EIGHTHS = " ▏▎▍▌▋▊▉"
BAR_WIDTH = 24


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


def _data(value: object) -> Text:
    """A logbook's text, shown as it is, never read as markup."""
    return Text(visible(str(value)))


def _when(moment: datetime) -> str:
    return moment.strftime("%d %b %H:%M")


@dataclass(frozen=True)
class _Layout:
    """What every table of one report shares: the terminal's width, the currency and the units."""

    width: int
    currency: str
    units: Units

    @property
    def per_ton_unit(self) -> str:
        ton = self.units.ton_unit
        return f"{self.currency}/{ton}" if self.currency else f"per {ton}"

    @property
    def in_currency(self) -> str:
        return f" ({self.currency})" if self.currency else ""

    @property
    def grade_width(self) -> int:
        return 16 if self.width < 100 else 28  # room for a grade's full name on one line on a wide terminal

    def per_t(self, value: float) -> str:
        return "–" if math.isnan(value) else money_text(self.units.per_ton(value))

    def tons(self, value: float) -> str:
        return "–" if math.isnan(value) else f"{self.units.tons(value):,.0f}"

    def table(self, title: str, columns: list[tuple[str, JustifyMethod]]) -> Table:
        made = Table(title=title, title_justify="left", box=box.SIMPLE_HEAD, collapse_padding=True, pad_edge=False,
                     title_style="bold")
        for name, justify in columns:
            # Figures never wrap; a grade's name folds onto a second line rather than being cut.
            if name == "Grade":
                made.add_column(name, justify=justify, max_width=self.grade_width, overflow="fold")
            else:
                made.add_column(name, justify=justify, no_wrap=True)
        return made


def report_renderable(report: CostReport, logbook_path: LogbookLocation, width: int = 80,
                      units: Units = Units()) -> RenderableType:
    """The whole report as one rich renderable, laid out for a terminal ``width`` columns wide (80 or more),
    tons, masses and costs per ton in the shop's ``units``."""
    layout = _Layout(width, report.currency, units)
    period = (f"{report.date_from or 'the start'} to {report.date_to or 'the end'}"
              if report.date_from or report.date_to else "every heat in the logbook")
    shop = f" — {visible(report.shop_name)}" if report.shop_name else ""
    head = Text.assemble((f"Addition cost report{shop}\n", "bold"), (visible(f"{period} · logbook {logbook_path}"), "dim"))
    if not report.totals["heats"]:
        return Group(head, Text("No heats were recorded in this period.", style="yellow"))
    parts: list[RenderableType] = [head, _summary(report, layout), Text(""), _heats(report, layout)]
    if report.heats["cost_per_t"].notna().any():  # nothing to draw when no bath weight is known
        parts += [Text(f"Cost per {'short ton' if units.us else 'tonne'} by heat ({layout.per_ton_unit})",
                       style="bold"), *_heat_chart(report, layout), Text("")]
    parts += [_grades(report, layout), _materials(report, layout)]
    if len(report.repeat_heats):
        parts.append(_repeats(report, layout))
    if report.notes:
        parts.append(Text(visible("Notes: " + "; ".join(report.notes) + "."), style="dim"))
    return Group(*parts)


def _summary(report: CostReport, layout: _Layout) -> Text:
    totals = report.totals
    in_cur = f" {report.currency}" if report.currency else ""
    tonnes = (f"[b]{layout.tons(totals['tonnes'])}[/] {layout.units.tons_unit} of bath" if totals["tonnes"] > 0
              else "bath weights unknown")
    return Text.from_markup(
        f"[b]{totals['heats']}[/] heats · {tonnes} · [b]{totals['corrections']}[/] "
        f"corrections, [b]{totals['repeat_heats']}[/] heats needed more than one\n"
        f"Additions actually made [b]{_money(totals['cost'])}{in_cur}[/], "
        f"[b]{layout.per_t(totals['cost_per_t'])} {layout.per_ton_unit}[/]\n"
        f"Planned {_money(totals['planned_cost'])}{in_cur}; actual − planned {_signed(totals['difference'])}{in_cur}")


def _heats(report: CostReport, layout: _Layout) -> Table:
    heats = layout.table(f"Cost per heat{layout.in_currency}", [
        ("Heat", "left"), ("Started", "left"), ("Grade", "left"), (layout.units.ton_unit, "right"), ("Corr", "right"),
        ("Planned", "right"), ("Actual", "right"), (layout.per_ton_unit, "right")])
    for row in report.heats.itertuples(index=False):
        heats.add_row(_data(row.heat), _when(row.started_at), _data(row.grade), layout.tons(row.bath_t),
                      str(row.corrections), _money(row.planned_cost), _money(row.cost), layout.per_t(row.cost_per_t))
    return heats


def _heat_chart(report: CostReport, layout: _Layout) -> tuple[Table, Text]:
    """Each heat's cost per ton as a bar coloured by its corrections, and the legend."""
    chart = Table.grid(padding=(0, 1))
    chart.add_column(no_wrap=True)
    chart.add_column(no_wrap=True)
    chart.add_column(justify="right", no_wrap=True)
    largest = report.heats["cost_per_t"].max()
    bar_width = min(60, max(10, layout.width - 8 - 8 - 4))
    colours = {0: "dim", 1: "cyan", 2: "yellow"}
    for row in report.heats.itertuples(index=False):
        style = colours.get(row.corrections, "red")
        chart.add_row(_data(row.heat), Text(bar(row.cost_per_t, largest, bar_width), style=style),
                      layout.per_t(row.cost_per_t))
    legend = Text.assemble("bars: ", ("one correction", "cyan"), " · ", ("two", "yellow"), " · ",
                           ("three or more", "red"), " · ", ("none", "dim"), style="dim")
    return chart, legend


def _grades(report: CostReport, layout: _Layout) -> Table:
    grades = layout.table(f"Per grade{layout.in_currency}", [
        ("Grade", "left"), ("Heats", "right"), (layout.units.ton_unit, "right"), ("Planned", "right"),
        ("Actual", "right"), (layout.per_ton_unit, "right"), (">1 corr", "right"), ("", "left")])
    largest = report.grades["cost_per_t"].max()
    bar_width = min(40, max(6, layout.width - 72 - layout.grade_width + 16))
    for row in report.grades.itertuples(index=False):
        grades.add_row(row.grade, str(row.heats), layout.tons(row.tonnes), _money(row.planned_cost),
                       _money(row.cost), layout.per_t(row.cost_per_t), str(row.repeat_heats),
                       Text(bar(row.cost_per_t, largest, bar_width), style="cyan"))
    return grades


def _materials(report: CostReport, layout: _Layout) -> Table:
    mass = layout.units.mass_unit
    materials = layout.table(f"Per material, planned against actual{layout.in_currency}", [
        ("Material", "left"), (f"Planned {mass}", "right"), (f"Actual {mass}", "right"), ("Planned", "right"),
        ("Actual", "right"), ("Share", "right")])
    for row in report.materials.itertuples(index=False):
        materials.add_row(_data(row.material), kg_text(layout.units.mass(row.planned_kg)),
                          kg_text(layout.units.mass(row.actual_kg)), _money(row.planned_cost), _money(row.cost),
                          f"{row.share:.0%}")
    return materials


def _repeats(report: CostReport, layout: _Layout) -> Table:
    again = layout.table(f"Heats that needed more than one correction{layout.in_currency}", [
        ("Heat", "left"), ("Started", "left"), ("Grade", "left"), ("Corr", "right"), ("Actual", "right"),
        ("vs plan", "right"), (layout.per_ton_unit, "right")])
    for row in report.repeat_heats.itertuples(index=False):
        again.add_row(_data(row.heat), _when(row.started_at), _data(row.grade), str(row.corrections),
                      _money(row.cost), _signed(row.difference), layout.per_t(row.cost_per_t))
    return again
