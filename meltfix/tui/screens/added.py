"""Record what actually went into the bath, which may differ from the plan (for the logbook)."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Label

from meltfix.base.errors import InputError
from meltfix.base.units import Units
from meltfix.plan.result import Plan
from meltfix.shop.elements import parse_number
from meltfix.tui.widgets.reason import ReasonLine


class AddedDialog(ModalScreen[list[tuple[str, float]] | None]):
    """One field per planned material, filled with the planned amount in the shop's mass unit; Enter
    on the last one records (in kg)."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("escape", "back_out", "Back", id="added.back"),
        Binding("down", "app.focus_next", "Next", show=False, id="added.next"),
        Binding("up", "app.focus_previous", "Previous", show=False, id="added.previous"),
    ]

    def __init__(self, plan: Plan, units: Units = Units()) -> None:
        super().__init__()
        self.plan = plan
        self.units = units

    def _shown(self, kg: float) -> str:
        return f"{self.units.mass(kg):.1f}"

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog") as box:
            box.border_title = f"What went into heat {self.plan.heat_id} [{self.units.mass_unit}]"
            for number, addition in enumerate(self.plan.additions):
                with Horizontal(classes="form-row"):
                    yield Label(addition.material, classes="added-label")
                    yield Input(self._shown(addition.kg), id=f"added-{number}", compact=True, classes="added-kg")
            yield ReasonLine(id="added-reason", pointer=False)
            yield Label("0 = not added · Enter: next, on the last records · Esc backs out", classes="dialog-help")

    def on_mount(self) -> None:
        self.query_one(Input).focus()

    @on(Input.Submitted)
    def _next_or_record(self, event: Input.Submitted) -> None:
        fields = list(self.query(Input))
        if event.input is not fields[-1]:
            fields[fields.index(event.input) + 1].focus()
            return
        made: list[tuple[str, float]] = []
        for addition, field in zip(self.plan.additions, fields):
            try:
                typed = parse_number(field.value or "0", "added", addition.material)
                if typed < 0:
                    raise InputError("added", addition.material, "must not be negative")
            except InputError as exc:
                self.query_one(ReasonLine).show(f"{addition.material}: {exc.message}")
                field.focus()
                return
            if typed > 0:  # the planned amount itself while its field shows it as written
                kg = addition.kg if field.value.strip() == self._shown(addition.kg) else self.units.kg(typed)
                made.append((addition.material, kg))
        if not made:
            self.query_one(ReasonLine).show("nothing to record: every amount is 0 (Esc backs out)")
            return
        self.dismiss(made)

    def action_back_out(self) -> None:
        self.dismiss(None)
