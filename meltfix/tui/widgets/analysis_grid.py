"""The element grid: one cell per element (wt %, or ppm for N, O, B, H), each with its reason when wrong."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from textual.app import ComposeResult
from textual.containers import Vertical
from textual.content import Content
from textual.widgets import Input, Static

from meltfix.plan.numbers import limit_text, unit_of
from meltfix.shop.grades import Grade
from meltfix.tui.draft import cell_key
from meltfix.tui.widgets.labelled import CompactInput, LabelledLine
from meltfix.tui.widgets.reason import show_reason

_SYMBOL = 3  # columns of the element's symbol before its cell (trim.tcss: .cell's margin)
_CELL = 11  # columns of the cell (trim.tcss: .cell's width)


@dataclass(frozen=True)
class CellSpec:
    """One row of the grid: the element, what its cell holds, and the grade's window as a hint."""

    symbol: str
    text: str
    hint: str


def window_hint(grade: Grade, symbol: str) -> str:
    """The grade's window for an element, in the element's unit ("" when the grade has none)."""
    if symbol not in grade.window_pct:
        return ""
    low, high = grade.window_pct[symbol]
    if low <= 0:
        return f"≤ {limit_text(symbol, high)}"
    return f"{limit_text(symbol, low)}–{limit_text(symbol, high)}"


class CellRow(LabelledLine):
    """One element: symbol, cell, then unit and window; the reason line appears under it."""

    def __init__(self, spec: CellSpec) -> None:
        super().__init__(f"{spec.symbol:<{_SYMBOL}}", CompactInput(spec.text, id=f"cell-{spec.symbol}", classes="cell"),
                         gap=_CELL + 1, hint=f"{unit_of(spec.symbol):<4}{spec.hint}", classes="cell-row",
                         id=f"row-{spec.symbol}")
        self.spec = spec

    @property
    def symbol(self) -> str:
        return self.spec.symbol

    def show_reason(self, reason: str | None) -> None:
        self.query_one(Input).set_class(reason is not None, "-bad")
        show_reason(self, f"reason-{self.symbol}", reason)


class AnalysisGrid(Vertical):
    """All cells of the bath analysis. The parent sets rows and errors; cells post Input.Changed."""

    def __init__(self, rows: Sequence[CellSpec], *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._rows = tuple(rows)

    @property
    def symbols(self) -> tuple[str, ...]:
        return tuple(row.symbol for row in self._rows)

    def compose(self) -> ComposeResult:
        yield Static(Content.assemble(("Analysis", "bold"), ("  wt %, ppm for N O B H", "$foreground-muted")),
                     id="grid-title")
        for spec in self._rows:
            yield CellRow(spec)

    async def set_rows(self, rows: Sequence[CellSpec]) -> None:
        """Rebuild the cells (another grade, another sample, one more element)."""
        self._rows = tuple(rows)
        await self.query(CellRow).remove()
        await self.mount_all([CellRow(spec) for spec in self._rows])

    def cell(self, symbol: str) -> Input:
        return self.query_one(f"#cell-{symbol}", Input)

    def texts(self) -> dict[str, str]:
        return {row.symbol: row.query_one(Input).value for row in self.query(CellRow)}

    def show_errors(self, errors: Mapping[str, str]) -> None:
        """Mark each bad cell in place and write its reason right under it; clear the others."""
        for row in self.query(CellRow):
            row.show_reason(errors.get(cell_key(row.symbol)))
        show_reason(self, "reason-analysis", errors.get("analysis"), after="#grid-title")
