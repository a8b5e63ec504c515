"""A one-line question: the answer is checked as typed and refused with its reason, never guessed."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

from meltfix.base.errors import InputError
from meltfix.tui.widgets.reason import ReasonLine

BACKED_OUT = object()
"""The dialog's result when the user pressed Escape (None can be a real answer: "no override")."""


class PromptDialog(ModalScreen[Any]):
    """Ask for one value; ``parse`` turns the text into the result or raises InputError."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape", "back_out", "Back", id="prompt.back")]

    def __init__(self, title: str, question: str, value: str, parse: Callable[[str], Any], *, hint: str = "") -> None:
        super().__init__()
        self.title_text = title
        self.question = question
        self.value = value
        self.parse = parse
        self.hint = hint

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog dialog-small") as box:
            box.border_title = self.title_text
            yield Label(self.question)
            yield Input(self.value, id="prompt-input")
            yield ReasonLine(pointer=False)
            yield Label(self.hint or "Enter accepts · Esc backs out", classes="dialog-help")

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    @on(Input.Submitted)
    def _answer(self, event: Input.Submitted) -> None:
        try:
            result = self.parse(event.value)
        except InputError as exc:
            self.query_one(ReasonLine).show(exc.message)
            return
        self.dismiss(result)

    def action_back_out(self) -> None:
        self.dismiss(BACKED_OUT)
