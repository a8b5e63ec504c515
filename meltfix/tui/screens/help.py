"""Every key of the screen, read from the bindings themselves so the list cannot fall behind."""

from __future__ import annotations

from collections.abc import Iterable, Sequence

from rich import box
from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import VerticalScroll
from textual.screen import ModalScreen
from textual.widgets import Label, Static


class KeysScreen(ModalScreen[None]):
    """Sections of (title, bindings); keys bound together are shown on one line."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [Binding("escape,f1,q", "dismiss", "Close", id="keys.close")]

    def __init__(self, sections: Sequence[tuple[str, Iterable[BindingType]]], extra: Sequence[tuple[str, str]] = ()) -> None:
        """``extra``: (keys, what) lines for keys that are not bindings (typing, Tab)."""
        super().__init__()
        self.sections = [(title, list(Binding.make_bindings(bindings))) for title, bindings in sections]
        self.extra = extra

    def compose(self) -> ComposeResult:
        with VerticalScroll(classes="dialog dialog-wide", id="keys-body", can_focus=True) as body:
            body.border_title = "Keys"
            yield Static(self._table())
            yield Label("↑ ↓ PgUp PgDn scroll · Esc, F1 or q closes", classes="dialog-help")

    def on_mount(self) -> None:
        self.query_one("#keys-body").focus()

    def _table(self) -> Table:
        table = Table(box=box.SIMPLE, expand=True, show_header=False, padding=(0, 1))
        table.add_column("key", no_wrap=True, style="bold")
        table.add_column("what it does", ratio=1)
        table.add_row("[u]Moving and typing[/u]", "")
        for keys, what in self.extra:
            table.add_row(keys, what)
        for title, bindings in self.sections:
            table.add_row("", "")
            table.add_row(f"[u]{title}[/u]", "")
            merged: dict[str, list[str]] = {}
            for binding in bindings:
                if not (binding.tooltip or binding.description):
                    continue  # plain moves (↑ ↓) are explained under "Moving and typing"
                merged.setdefault(binding.tooltip or binding.description, []).append(self.app.get_key_display(binding))
            for what, key_names in merged.items():
                table.add_row(" ".join(dict.fromkeys(key_names)), what)
        return table
