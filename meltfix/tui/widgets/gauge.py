"""The chemistry gauges: one line per element of the grade (and per index), the window as a rail.

Each line reads ``Mn  0.620 → 0.880  0.75 ─═══┿═●══─ 1.00``: the rail spans the window (═) with a
margin either side (─); ``┿`` marks the aim, ``○`` where the bath is now, ``●`` where the plan
takes it. A marker beyond the rail's reach sits at its end as an arrow. A limit the plan is less
than 99 % sure to land inside shows its odds after the rail. On a narrow panel the
min and max labels give way to a longer rail (the analysis grid shows the window in figures).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from itertools import groupby
from operator import itemgetter

from textual.content import Content
from textual.geometry import Size
from textual.widget import Widget

from meltfix.plan.numbers import content_text, limit_text, unit_of
from meltfix.plan.result import LIMIT_TOL_PCT
from meltfix.shop.grades import Grade

_LABEL = 5  # width of the min and max labels either side of the rail
_FIXED = 6 + 3 + 6 + 1  # now, arrow, after, space (the name column is as wide as the longest name)
_LABELS = 2 * _LABEL + 2
_RAIL_MIN = 16  # below this the min/max labels give way to the rail (the grid shows the window too)


@dataclass(frozen=True)
class GaugeRow:
    """One element: its window and aim, and the bath now and after the plan [wt %]."""

    symbol: str
    low_pct: float
    high_pct: float
    aim_pct: float | None
    now_pct: float | None
    after_pct: float | None
    odds: float | None = None
    """Probability [0..1] that the plan lands inside this row's window (its weaker limit)."""


_SHOW_ODDS_BELOW = 0.99  # a gauge shows its odds only when they are worth a look
_ODDS = 5  # width of " 87%"-style odds after the rail


def gauge_rows(grade: Grade, now_pct: Mapping[str, float], after_pct: Mapping[str, float],
               odds: Mapping[str, float] | None = None) -> list[GaugeRow]:
    """A row per element of the grade's window, then one per index (carbon equivalent, ...);
    ``odds`` by limit ("Mn min") give each row the odds of its weaker limit."""
    def weaker(name: str) -> float | None:
        found = [odds[label] for label in (f"{name} min", f"{name} max") if odds and label in odds]
        return min(found) if found else None

    rows = [GaugeRow(symbol, *grade.window_pct[symbol], grade.aim_pct.get(symbol), now_pct.get(symbol),
                     after_pct.get(symbol, 0.0), weaker(symbol))
            for symbol in grade.elements]
    for index in grade.indices:
        low = index.min_value or 0.0
        high = index.max_value if index.max_value is not None else 2 * max(low, index.value(after_pct))
        rows.append(GaugeRow(index.name, low, high, None, index.value(now_pct), index.value(after_pct),
                             weaker(index.name)))
    return rows


def _doubtful(row: GaugeRow) -> bool:
    return row.odds is not None and row.odds < _SHOW_ODDS_BELOW


def _cell(value: float, start: float, stop: float, cells: int) -> int:
    """Rail cell of a value; -1 or ``cells`` when it lies beyond either end."""
    if value < start:
        return -1
    if value > stop:
        return cells
    return min(cells - 1, int((value - start) / (stop - start) * cells))


def gauge_line(row: GaugeRow, rail_cells: int, labels: bool = True, name_width: int = 3) -> Content:
    """The line for one element, ``rail_cells`` wide in its rail; ``labels`` writes min and max beside it."""
    low, high = row.low_pct, row.high_pct
    margin = max((high - low) * 0.4, high * 0.05, 1e-6)
    start = 0.0 if low <= 0 else max(0.0, low - margin)
    stop = high + margin
    rail = []
    for k in range(rail_cells):
        middle = start + (k + 0.5) / rail_cells * (stop - start)
        rail.append(("═", "$text-success") if low <= middle <= high else ("─", "$foreground-muted"))
    if row.aim_pct is not None:
        rail[max(0, min(rail_cells - 1, _cell(row.aim_pct, start, stop, rail_cells)))] = ("┿", "$text-success")
    inside = row.after_pct is not None and low - LIMIT_TOL_PCT <= row.after_pct <= high + LIMIT_TOL_PCT
    for value, mark, style in ((row.now_pct, "○", "$foreground"),
                               (row.after_pct, "●", "bold $text-success" if inside else "bold $text-error")):
        if value is None:
            continue
        k = _cell(value, start, stop, rail_cells)
        if k < 0:
            mark, k = "◀", 0
        elif k >= rail_cells:
            mark, k = "▶", rail_cells - 1
        rail[k] = (mark, style)
    now = "—" if row.now_pct is None else content_text(row.symbol, row.now_pct)
    after = "" if row.after_pct is None else content_text(row.symbol, row.after_pct)
    after_style = "$text-success" if inside else "bold $text-error"
    low_label = limit_text(row.symbol, low) if low > 0 else "0"
    parts: list[tuple[str, str] | str] = [
        (f"{row.symbol:<{name_width}}", "bold"), f"{now:>6}", (" → " if after else "   ", "$foreground-muted"),
        (f"{after:<6}", after_style), " ",
    ]
    # The rail as runs of one style, not a span per cell: each span is styled on every paint.
    runs = [("".join(mark for mark, _ in cells), style) for style, cells in groupby(rail, key=itemgetter(1))]
    if labels:
        parts += [(f"{low_label:>{_LABEL}} ", "$foreground-muted"), *runs,
                  (f" {limit_text(row.symbol, high):<{_LABEL}}", "$foreground-muted")]
    else:
        parts += runs
    if _doubtful(row):
        parts.append((f"{100 * row.odds:>{_ODDS - 1}.0f}%", "bold $text-warning"))  # type: ignore[operator]
    return Content.assemble(*parts)


class ChemistryGauges(Widget):
    """All gauges of a grade; the parent sets the rows, the widget only draws them."""

    def __init__(self, *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._rows: Sequence[GaugeRow] = ()

    def show(self, rows: Sequence[GaugeRow]) -> None:
        self._rows = tuple(rows)
        # The legend rides in the border title: one row less, so every gauge fits at 80x24.
        ppm = [row.symbol for row in self._rows if unit_of(row.symbol) == "ppm"]
        self.border_title = "○ now ● after ┿ aim ═ window" + (f" · {' '.join(ppm)} in ppm" if ppm else "")
        self.refresh(layout=True)

    def get_content_height(self, container: Size, viewport: Size, width: int) -> int:
        return len(self._rows)

    def render(self) -> Content:
        name_width = max([3, *(len(row.symbol) + 1 for row in self._rows)])
        # Room for the odds only when a row shows them.
        free = self.size.width - _FIXED - name_width - (_ODDS if any(map(_doubtful, self._rows)) else 0)
        labels = free - _LABELS >= _RAIL_MIN
        rail_cells = max(6, free - (_LABELS if labels else 0))
        return Content("\n").join(gauge_line(row, rail_cells, labels, name_width) for row in self._rows)
