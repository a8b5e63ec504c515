"""A dialog that picks one item from a list, filtered as you type (grades, spectrometer samples)."""

from __future__ import annotations

from collections.abc import Sequence

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Input, Label, OptionList
from textual.widgets.option_list import Option

from meltfix.base.errors import visible


class ChoiceDialog(ModalScreen[str | None]):
    """Returns the chosen item's key, or None when the user backs out with Escape."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("escape", "dismiss_none", "Back", id="choice.back"),
        Binding("down", "into_list", "To the list", show=False, id="choice.down"),
    ]

    def __init__(self, title: str, items: Sequence[tuple[str, str]], *, typed: str = "",
                 current: str | None = None, noun: str = "items", searched: str = "text") -> None:
        """``items`` are (key, text) pairs; the filter matches anywhere in the text, any case.

        ``noun`` ("grades") and ``searched`` ("name, family and standard") word the line shown
        when the filter matches nothing, so an empty list never looks like a fault.
        """
        super().__init__()
        self.title_text = title
        self.items = tuple(items)
        self.typed = typed
        self.current = current
        self.noun = noun
        self.searched = searched

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog") as box:
            box.border_title = Content(visible(self.title_text))
            yield Input(self.typed, placeholder="type to filter", id="choice-filter")
            yield OptionList(id="choice-list")
            yield Label(id="choice-empty")
            yield Label("↓ into the list · Enter picks · Esc backs out", classes="dialog-help")

    def on_mount(self) -> None:
        self._fill(self.typed)
        self.query_one(Input).focus()

    def _fill(self, text: str) -> None:
        words = text.lower().split()
        options = self.query_one(OptionList)
        options.clear_options()
        shown = [(key, label) for key, label in self.items if all(w in label.lower() for w in words)]
        # Labels hold grade names and sample ids from files: plain text, never markup.
        options.add_options([Option(Content(visible(label)), id=key) for key, label in shown])
        keys = [key for key, _ in shown]
        if shown:
            options.highlighted = keys.index(self.current) if self.current in keys else 0
        empty = self.query_one("#choice-empty", Label)
        empty.update(f"Nothing matches “{text.strip()}”: searched the {self.searched} of all {len(self.items)} "
                     f"{self.noun}. Backspace widens the search." if not shown else "")
        empty.display = not shown
        options.display = bool(shown)

    @on(Input.Changed, "#choice-filter")
    def _filter(self, event: Input.Changed) -> None:
        self._fill(event.value)

    @on(Input.Submitted, "#choice-filter")
    def _pick_highlighted(self) -> None:
        options = self.query_one(OptionList)
        if options.highlighted is not None:
            self.dismiss(options.get_option_at_index(options.highlighted).id)

    @on(OptionList.OptionSelected)
    def _pick(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(event.option.id)

    def action_into_list(self) -> None:
        self.query_one(OptionList).focus()

    def action_dismiss_none(self) -> None:
        self.dismiss(None)
