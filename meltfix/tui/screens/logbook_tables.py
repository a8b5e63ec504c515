"""What the logbook screen shows as Rich text: a shift's heats and totals, one heat's events in time
order (samples with their burns, plans, the additions made), in the shop's display units."""

from __future__ import annotations

import math
from datetime import datetime

from rich.table import Table
from rich.text import Text

from meltfix.base.units import Units
from meltfix.plan.numbers import content_text, mass_text, money_text, temperature_text, unit_of
from meltfix.records.logbook import (AdditionsRecord, HeatEvent, HeatHistory, HeatSummary, LineRecord, PlanRecord,
                                     SampleRecord, event_time)


def number_cell(text: str) -> Text:
    return Text(text, justify="right")


def heat_cells(heat: HeatSummary, units: Units) -> tuple[Text | str, ...]:
    per_t = heat.cost_per_t
    # A * marks a cost that leaves out additions recorded without a known price.
    actual = money_text(heat.actual_cost) + ("*" if heat.unpriced_lines else "")
    return (heat.heat_id, heat.grade or "–",
            number_cell("–" if heat.bath_kg is None else f"{units.tons(heat.bath_kg / 1000):,.1f}"),
            number_cell(str(heat.corrections)), number_cell(money_text(heat.planned_cost)), number_cell(actual),
            number_cell("–" if per_t is None else money_text(units.per_ton(per_t))))


def shift_totals(heats: tuple[HeatSummary, ...], currency: str, units: Units) -> Text:
    """The shift in one line: heats, corrections, planned and actual cost, cost per tonne."""
    if not heats:
        return Text("No heat in this shift.", style="dim")
    actual = math.fsum(h.actual_cost for h in heats)
    weighed_t = math.fsum(h.bath_kg for h in heats if h.bath_kg) / 1000.0
    weighed_cost = math.fsum(h.actual_cost for h in heats if h.bath_kg)
    per_t = (f" · {money_text(units.per_ton(weighed_cost / weighed_t))} {currency}/{units.ton_unit}"
             if weighed_t > 0 else "")
    repeated = sum(1 for h in heats if h.corrections > 1)
    text = Text.assemble(
        f"{count(len(heats), 'heat')} · {count(sum(h.corrections for h in heats), 'correction')} · "
        f"{count(repeated, 'heat')} corrected more than once\n"
        f"Planned {money_text(math.fsum(h.planned_cost for h in heats))} · ",
        (f"actual {money_text(actual)} {currency}", "bold"), per_t)
    if any(h.unpriced_lines for h in heats):
        text.append("\n* leaves out additions recorded without a known price", style="dim")
    return text


def count(n: int, noun: str) -> str:
    return f"{n} {noun}{'' if n == 1 else 's'}"


def _clock(when: datetime, start: datetime) -> str:
    return f"{when:%H:%M}" if when.date() == start.date() else f"{when:%d %b %H:%M}"


def _lines_text(lines: tuple[LineRecord, ...], units: Units) -> str:
    """One material a line, as on a ticket, so a plan and the additions made from it compare line by line."""
    return "\n".join(f"{line.material} {mass_text(line.kg, units)}" for line in lines)


def _event_row(event: HeatEvent, units: Units) -> tuple[str, str, Text]:
    """What happened, what it cost (plans and additions), and its details in words."""
    if isinstance(event, SampleRecord):
        # "C=0.155" holds together when a narrow screen wraps the line.
        values = "  ".join(
            f"{symbol}={'<' if symbol in event.analysis.below_limit else ''}{content_text(symbol, pct)}"
            f"{'ppm' if unit_of(symbol) == 'ppm' else ''}" for symbol, pct in event.analysis.pct.items())
        detail = Text(values)
        heading = [temperature_text(event.temperature_c, units)] if event.temperature_c is not None else []
        if event.burns:
            left_out = ", ".join(str(k) for k in sorted(event.rejected_burns))
            heading.append(f"{len(event.burns)} burns" + (f", left out: {left_out}" if left_out else ""))
        if heading:
            detail = Text.assemble((" · ".join(heading), "bold"), "  ", detail)
        for flag in event.flags:
            detail.append(f"\n{flag}", style="italic")
        return f"Sample {event.sample_id}", "", detail
    if isinstance(event, PlanRecord):
        detail = Text(_lines_text(event.lines, units) or "nothing to add")
        if event.status != "optimal":
            detail.append("\nclosest plan: the grade is NOT met", style="bold")
        return f"Plan {event.plan_id}", money_text(event.total_cost), detail
    assert isinstance(event, AdditionsRecord)
    detail = Text(_lines_text(event.lines, units))
    unpriced = sum(1 for line in event.lines if line.cost is None)
    if unpriced:
        detail.append(f"\n{unpriced} without a known price, left out of the cost", style="bold")
    detail.append("\nwithout a plan" if event.plan_id is None else f"\nfrom plan {event.plan_id}", style="italic")
    return "Added", money_text(event.total_cost), detail


def events_table(history: HeatHistory, currency: str, units: Units) -> Table:
    table = Table(expand=True, box=None, show_edge=False, pad_edge=False, header_style="bold")
    table.add_column("Time", no_wrap=True)
    table.add_column("What", no_wrap=True)
    table.add_column(currency, justify="right", no_wrap=True)
    table.add_column("Details", ratio=1, overflow="fold")
    for event in history.events:
        what, cost, detail = _event_row(event, units)
        table.add_row(_clock(event_time(event), history.started_at), what, cost, detail)
    if not history.events:
        table.add_row("", "", "", Text("Nothing recorded for this heat.", style="dim"))
    return table
