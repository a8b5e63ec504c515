"""The line under a field that says why its value is refused."""

from __future__ import annotations

from textual.content import Content
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
