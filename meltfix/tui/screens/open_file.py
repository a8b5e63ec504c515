"""Pick a file by typing its path; the files of the folder being typed are listed to choose from."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import Input, Label, OptionList
from textual.widgets.option_list import Option

from meltfix.base.errors import InputError, visible
from meltfix.tui.widgets.reason import ReasonLine

_LISTED = 200  # a folder with thousands of files lists its first ones; typing narrows it


class OpenFileDialog(ModalScreen[Any]):
    """Returns what ``read`` made of the chosen file, or None on Escape.

    ``read`` raises InputError for a bad file: its reason shows here and the dialog stays open.
    """

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("escape", "back_out", "Back", id="open.back"),
        Binding("down", "into_list", "To the list", show=False, id="open.down"),
    ]

    def __init__(self, title: str, folder: Path, suffixes: Sequence[str], read: Callable[[Path], Any]) -> None:
        super().__init__()
        self.read = read
        self.title_text = title
        self.folder = folder
        self.suffixes = tuple(s.lower() for s in suffixes)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog dialog-wide") as box:
            box.border_title = self.title_text
            yield Input(f"{self.folder}/", id="open-path")
            yield OptionList(id="open-list")
            yield ReasonLine(pointer=False)
            yield Label(f"files {' '.join(self.suffixes)} · ↓ into the list · Enter opens · Esc backs out",
                        classes="dialog-help")

    def on_mount(self) -> None:
        path_input = self.query_one(Input)
        path_input.focus()
        path_input.cursor_position = len(path_input.value)
        self._fill(path_input.value)

    def show_reason(self, reason: str) -> None:
        self.query_one(ReasonLine).show(reason)

    def _fill(self, typed: str) -> None:
        path = Path(typed).expanduser()
        folder, stem = (path, "") if typed.endswith(("/", "\\")) or path.is_dir() else (path.parent, path.name)
        options = self.query_one(OptionList)
        options.clear_options()
        try:
            entries = sorted(folder.iterdir())
        except OSError:
            return
        shown = [p for p in entries if p.name.lower().startswith(stem.lower())
                 and (p.is_dir() or p.suffix.lower() in self.suffixes)][:_LISTED]
        options.add_options([Option(Content(visible(p.name + ("/" if p.is_dir() else ""))), id=str(p)) for p in shown])
        if shown:
            options.highlighted = 0

    @on(Input.Changed, "#open-path")
    def _typed(self, event: Input.Changed) -> None:
        self._fill(event.value)

    @on(Input.Submitted, "#open-path")
    def _submit(self, event: Input.Submitted) -> None:
        path = Path(event.value).expanduser()
        if path.is_file():
            self._open(path)
            return
        options = self.query_one(OptionList)
        if options.highlighted is not None:
            self._choose(Path(options.get_option_at_index(options.highlighted).id or ""))
        else:
            self.show_reason(f"{path}: no such file")

    @on(OptionList.OptionSelected)
    def _selected(self, event: OptionList.OptionSelected) -> None:
        self._choose(Path(event.option.id or ""))

    def _choose(self, path: Path) -> None:
        if path.is_dir():  # step into the folder and keep typing
            path_input = self.query_one(Input)
            path_input.value = f"{path}/"
            path_input.cursor_position = len(path_input.value)
            path_input.focus()
        else:
            self._open(path)

    def _open(self, path: Path) -> None:
        try:
            result = self.read(path)
        except InputError as exc:
            self.show_reason(str(exc))
            return
        except Exception as exc:  # a reader's own bug must not take the whole screen down mid-heat
            self.show_reason(f"{path}: could not be read ({type(exc).__name__}: {exc})")
            return
        self.dismiss(result)

    def action_into_list(self) -> None:
        self.query_one(OptionList).focus()

    def action_back_out(self) -> None:
        self.dismiss(None)
