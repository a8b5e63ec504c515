"""The line under a field that says why its value is refused."""

from __future__ import annotations

from textual.content import Content
from textual.widget import Widget
from textual.widgets import Static


class ReasonLine(Static):
    """Hidden until there is a reason; styled by the ``reason`` class (app.tcss)."""

    def __init__(self, *, id: str | None = None, pointer: bool = True) -> None:
        """``pointer``: start with an arrow up to the field above (dialogs' lines go without)."""
        super().__init__(id=id, classes="reason")
        self.reason: str | None = None
        self.pointer = pointer

    def show(self, reason: str | None) -> None:
        """Show ``reason`` (None hides the line). Left alone when nothing changed: the grid calls
        this for every cell on every key press, and each real update costs a layout pass."""
        if reason == self.reason:
            return
        self.reason = reason
        self.update(Content.styled(("↑ " if self.pointer else "") + reason, "$text-error") if reason else "")
        self.display = reason is not None


def show_reason(parent: Widget, line_id: str, reason: str | None, *, after: str | None = None) -> None:
    """Show ``reason`` on ``parent``'s line ``line_id`` (None hides it), mounting the line (``after`` the
    child this selects, else last) the first time there is a reason: most fields never have one, and a hidden
    line still costs its styling and mounting when the screen starts."""
    found = parent.query_children(f"#{line_id}")
    if found:
        found.first(ReasonLine).show(reason)
    elif reason is not None:
        line = ReasonLine(id=line_id)
        parent.mount(line, after=after)
        line.show(reason)
