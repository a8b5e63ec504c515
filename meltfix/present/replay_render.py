"""Rich renderables for a replayed heat, shared by the command line and the terminal screen.

Kept out of the domain objects (meltfix.records.replay) as meltfix.present.render is kept out of the plan.
"""

from __future__ import annotations

from collections.abc import Sequence

from rich.console import Console, Group, RenderableType
from rich.measure import Measurement
from rich.table import Table
from rich.text import Text

from meltfix.base.units import Units
from meltfix.plan.numbers import (content_text, kg_text, limit_text, margin_text, mass_text, money_text, recovery_text,
                                  temperature_text)
from meltfix.plan.result import Addition, is_outside
from meltfix.records.replay import ActualAddition, ElementPath, ReplayStep, summarise
from meltfix.records.training import TrainingScore
from meltfix.shop.elements import element_sort_key

# Longest and shortest bar of the chemistry path chart [characters]: the longest reads best, the
# shortest still shows where each sample fell against the window.
_BAR_WIDTHS = (36, 12)
# Sample markers on the chart: 1-9, then letters, so a long heat still gets one character each.
_MARKS = "123456789ABCDEFGHJKLMNPQRSTUVWXYZ"
_WINDOW_STYLE = "on #1f4d2b"
_OUTSIDE_STYLE = "grey42"


def _content(symbol: str, value: float | None) -> str:
    """A content in the element's unit (ppm for N, O, B, H), "–" when not measured."""
    return "–" if value is None else content_text(symbol, value)


def _window(symbol: str, low: float, high: float) -> str:
    return f"≤ {limit_text(symbol, high)}" if low <= 0 else f"{limit_text(symbol, low)}–{limit_text(symbol, high)}"


def _outside(value: float, low: float, high: float | None) -> bool:
    return is_outside(value - low) or (high is not None and is_outside(high - value))


def sample_mark(index: int) -> str:
    """The chart's marker for the sample at ``index`` (0 = first)."""
    return _MARKS[index] if index < len(_MARKS) else "+"


def additions_table(title: str, rows: Sequence[Addition | ActualAddition], currency: str,
                    units: Units = Units()) -> Table:
    """A compact table of additions (planned or actual) with their total, masses in ``units``."""
    table = Table(title=title, title_justify="left", expand=False)
    table.add_column("Material")
    table.add_column(units.mass_unit, justify="right")
    table.add_column(currency, justify="right")
    for row in rows:
        table.add_row(row.material, kg_text(units.mass(row.kg)), money_text(row.cost))
    if not rows:
        table.add_row("(nothing)", "", "")
    table.add_section()
    table.add_row("Total", kg_text(units.mass(sum(r.kg for r in rows))), money_text(sum(r.cost for r in rows)))
    return table


def chemistry_table(step: ReplayStep, window: dict[str, tuple[float, float]], outcome: bool = True) -> Table:
    """Measured now, predicted from the actual additions, measured next, and the gap, per element.

    ``outcome=False`` leaves out what followed the sample (for a trainee who has not answered yet).
    """
    nxt = step.next_sample
    table = Table(title="Chemistry (wt %, ppm for N O B H)", title_justify="left")
    names = ["Element", "min", "max", f"now {step.sample.sample_id}"]
    if outcome:
        names += ["predicted", f"next {nxt.sample_id}" if nxt else "next", "gap"]
    for name in names:
        table.add_column(name, justify="left" if name == "Element" else "right")
    measured = step.measured_next_pct or {}
    symbols = sorted(set(window) | set(step.sample.analysis.pct), key=element_sort_key)
    for symbol in symbols:
        low, high = window.get(symbol, (None, None))
        now = step.sample.analysis.pct.get(symbol)
        after = measured.get(symbol)
        gap = step.gap_pct.get(symbol)
        cells = [symbol, "" if low is None or low == 0 else limit_text(symbol, low),
                 "" if high is None else limit_text(symbol, high), _content(symbol, now)]
        if outcome:
            gap_text = "" if gap is None else margin_text(symbol, gap)
            cells += [_content(symbol, step.predicted_pct.get(symbol)), _content(symbol, after), gap_text]
        # Red marks the latest reading shown that lies outside its window.
        latest = after if outcome else now
        red = latest is not None and low is not None and _outside(latest, low, high)
        table.add_row(*cells, style="red" if red else "")
    return table


def step_renderable(step: ReplayStep, window: dict[str, tuple[float, float]], currency: str,
                    units: Units = Units()) -> Group:
    """One step of the replay: the plan beside the actual additions, the chemistry, hints and costs;
    masses and temperatures in the shop's ``units``."""
    sample = step.sample
    head = Text.assemble(
        (f"Sample {sample.sample_id}", "bold"), f" · {sample.clock}",
        "" if sample.temperature_c is None else f" · {temperature_text(sample.temperature_c, units)}",
        f" · bath {mass_text(step.bath_kg, units)}")
    side = Table.grid(padding=(0, 3))
    side.add_row(plan_renderable(step, currency, units), additions_table("Actually added", step.actual, currency, units))
    parts: list[RenderableType] = [head, side, chemistry_table(step, window)]
    if step.recovery_hints:
        parts.append(hints_table(step, units))
    if step.predicted_misses:
        parts.append(Text("The actual additions should have missed: " + "; ".join(step.predicted_misses),
                          style="red"))
    if step.measured_misses:
        parts.append(Text("The next sample misses: " + "; ".join(step.measured_misses), style="red"))
    parts.append(cost_line(step, currency))
    return Group(*parts)


def hints_table(step: ReplayStep, units: Units = Units()) -> Table:
    """Recovery the catalogue assumes against the one the next sample implies, per element added."""
    table = Table(title="Recovery: catalogue against the next sample", title_justify="left")
    for name in ("Element", f"added {units.mass_unit}", "catalogue", "implied"):
        table.add_column(name, justify="left" if name == "Element" else "right")
    for hint in step.recovery_hints:
        # More than 10 points apart is more than the spectrometer's scatter on these rises (common practice).
        far = abs(hint.implied - hint.catalogue) > 0.1
        table.add_row(hint.element, kg_text(units.mass(hint.added_kg)), recovery_text(hint.catalogue), recovery_text(hint.implied),
                      style="yellow" if far else "")
    return table


def plan_renderable(step: ReplayStep, currency: str, units: Units = Units()) -> Table | Group:
    """The plan meltfix makes at the step, or why it made none there."""
    if step.inside:
        return Group(Text("Plan meltfix makes", style="italic"),
                     Text("none: this sample is inside every limit at the target odds already", style="green"))
    if step.plan is None:
        return Group(Text("Plan meltfix makes", style="italic"), Text(f"no plan: {step.plan_error}", style="red"))
    title = "Plan meltfix makes" + ("" if step.plan.status == "optimal" else " (closest: windows missed)")
    return additions_table(title, step.plan.additions, currency, units)


def cost_line(step: ReplayStep, currency: str) -> Text:
    """Planned against actual cost of the step."""
    actual = f"actual {money_text(step.actual_cost)} {currency}"
    if step.inside:
        return Text(f"Cost: {actual} (inside already: meltfix would add nothing)", style="bold")
    if step.planned_cost is None:
        return Text(f"Cost: {actual} (no plan to compare)", style="bold")
    difference = step.actual_cost - step.planned_cost
    return Text(f"Cost: meltfix {money_text(step.planned_cost)} {currency} · {actual} "
                f"({'+' if difference >= 0 else '-'}{money_text(abs(difference))})", style="bold")


def _axis(path: ElementPath, values: Sequence[float]) -> tuple[float, float]:
    low = min([path.low_pct, *values])
    high = max([path.high_pct, *values])
    pad = 0.15 * (high - low) or 0.01
    return max(0.0, low - pad), high + pad


def path_chart(paths: Sequence[ElementPath], sample_ids: Sequence[str], upto: int | None = None,
               current: int | None = None, width: int = 36) -> Table:
    """Each element's path through the heat against its window, one line per element.

    The window is the shaded band, the aim a dotted bar, each sample its number (1, 2, 3 ...), and
    "∘" what the additions before a sample should have given. ``upto`` hides later samples (the
    trainee must not see the future); ``current`` is drawn reversed.
    """
    last = len(sample_ids) - 1 if upto is None else upto
    table = Table(title="Chemistry path: " + " → ".join(f"{sample_mark(k)}={sid}" for k, sid in
                                                       enumerate(sample_ids[: last + 1])),
                  title_justify="left", box=None, padding=(0, 1))
    table.add_column("El")
    table.add_column("window", justify="right", no_wrap=True)
    table.add_column("path", no_wrap=True)
    table.add_column("values")  # the one column that folds (between values) when the chart is narrow
    for path in paths:
        measured = list(path.measured_pct[: last + 1])
        predicted = list(path.predicted_pct[: last + 1])
        if all(v is None for v in measured):
            continue  # never measured in this heat: nothing to draw
        shown = [v for v in measured + predicted if v is not None]
        start, stop = _axis(path, shown)

        def cell(value: float, start: float = start, stop: float = stop) -> int:
            return min(width - 1, max(0, int((value - start) / (stop - start) * width)))

        chars = ["─"] * width
        styles = [_OUTSIDE_STYLE] * width
        for i in range(width):
            middle = start + (i + 0.5) * (stop - start) / width
            if path.low_pct <= middle <= path.high_pct:
                chars[i], styles[i] = " ", _WINDOW_STYLE
        if path.aim_pct is not None:
            chars[cell(path.aim_pct)] = "┊"
        for value in predicted:
            if value is not None:
                i = cell(value)
                chars[i], styles[i] = "∘", styles[i] + " yellow"
        for k, value in enumerate(measured):
            if value is not None:
                i = cell(value)
                inside = not _outside(value, path.low_pct, path.high_pct)
                style = ("bold white" if inside else "bold red") + (" reverse" if k == current else "")
                chars[i], styles[i] = sample_mark(k), style + (" " + _WINDOW_STYLE if inside else "")
        strip = Text()
        for char, style in zip(chars, styles):
            strip.append(char, style)
        values = Text()
        for k, value in enumerate(measured):
            if k:
                values.append(" → ", "dim")
            red = value is not None and _outside(value, path.low_pct, path.high_pct)
            values.append(_content(path.element, value), "red" if red else "")
        window = _window(path.element, path.low_pct, path.high_pct)
        table.add_row(path.element, window, strip, values)
    return table


def fitted_path_chart(paths: Sequence[ElementPath], sample_ids: Sequence[str], console: Console, width: int,
                      upto: int | None = None, current: int | None = None) -> Table:
    """The path chart with its bars shortened until the whole chart fits ``width`` columns."""
    longest, shortest = _BAR_WIDTHS
    chart = path_chart(paths, sample_ids, upto=upto, current=current, width=longest)
    natural = Measurement.get(console, console.options.update_width(10_000), chart).maximum
    if natural > width:  # below the shortest bar the table folds its values instead
        chart = path_chart(paths, sample_ids, upto=upto, current=current,
                           width=max(shortest, longest - (natural - width)))
    return chart


def score_renderable(score: TrainingScore, window: dict[str, tuple[float, float]], currency: str) -> Group:
    """A trainee's score: in spec or not, what the entry gives, and its cost against the cheapest plan."""
    verdict = Text.assemble(
        (f"{score.points} points · ", "bold"),
        ("in spec" if score.in_spec else "out of spec", "bold green" if score.in_spec else "bold red"))
    gives = Text("Your additions give: ")
    for n, symbol in enumerate(s for s in score.predicted_pct if s in window):
        value = score.predicted_pct[symbol]
        red = _outside(value, *window[symbol])
        gives.append(("  " if n else "") + f"{symbol} {content_text(symbol, value)}", "red" if red else "")
    lines: list[RenderableType] = [verdict, gives]
    lines += [Text(f"misses {miss}", style="red") for miss in score.misses]
    lines += [Text(broken, style="red") for broken in score.breaks]
    extra = f"{'+' if score.extra_cost >= 0 else '-'}{money_text(abs(score.extra_cost))}"
    against = ("meltfix's plan at this sample costs" if score.best is not None
               else "this sample was inside already: meltfix adds nothing,")
    lines.append(Text(f"They cost {money_text(score.entry_cost)} {currency}; {against} "
                      f"{money_text(score.best_cost)} {currency} ({extra})"))
    return Group(*lines)


def summary_table(steps: Sequence[ReplayStep], currency: str) -> Table:
    """Per sample: meltfix's plan where one was needed, the actual additions, the next sample; then
    the totals along the same path (meltfix.records.replay.ReplaySummary: the plans are alternatives, never
    all made, so they are not added up)."""
    table = Table(title="Heat summary", title_justify="left")
    for name in ("Sample", f"meltfix {currency}", f"actual {currency}", "next sample"):
        table.add_column(name, justify="left" if name in ("Sample", "next sample") else "right")
    for step in steps:
        if step.next_sample is None:
            after = ""
        elif step.measured_misses:
            after = f"[red]{step.next_sample.sample_id}: {len(step.measured_misses)} limit(s) missed[/]"
        else:
            after = f"[green]{step.next_sample.sample_id}: in spec[/]"
        planned = "inside" if step.inside else "–" if step.planned_cost is None else money_text(step.planned_cost)
        table.add_row(step.sample.sample_id, planned, money_text(step.actual_cost), after)
    summary = summarise(steps)
    table.add_section()
    meltfix = "–" if summary.meltfix_cost is None else money_text(summary.meltfix_cost)
    where = "every sample inside" if summary.first_needed is None else f"its plan at {summary.first_needed}"
    table.add_row("Total", meltfix, money_text(summary.actual_cost), f"meltfix: {where}")
    if summary.ended_outside is not None:
        still = "–" if summary.still_to_add is None else money_text(summary.still_to_add)
        table.add_row(f"+ at {summary.ended_outside}", "", still, "still to add: the heat ended outside")
        table.add_row("To the grade", meltfix, money_text(summary.shop_cost), "")
    table.caption = ("A later sample's plan starts again from where the heat really was: it replaces the "
                     "earlier plan rather than adding to it.")
    return table
