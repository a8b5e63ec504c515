"""This heat's materials: switch one off or on, change its price or stock, lock it at an amount.

Changes belong to this heat only (Heat.switched_off, price_per_kg, stock_kg, locked_kg); the
recipe book on disk is never touched. Each change is checked at once and refused with its reason.
"""

from __future__ import annotations

from types import MappingProxyType

from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.content import Content
from textual.screen import ModalScreen
from textual.widgets import DataTable, Label

from meltfix.base.errors import InputError
from meltfix.plan.numbers import kg_text, money_text
from meltfix.shop.elements import parse_number
from meltfix.shop.heat import Heat, validate_heat
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.tui.keys import hint
from meltfix.tui.screens.prompt import BACKED_OUT, PromptDialog
from meltfix.tui.widgets.reason import ReasonLine

_OVERRIDES = {"price": "price_per_kg", "stock": "stock_kg", "lock": "locked_kg"}


class MaterialsDialog(ModalScreen[Heat]):
    """Returns the heat with its new overrides when closed with Escape."""

    CSS_PATH = "dialogs.tcss"
    BINDINGS = [
        Binding("escape", "done", "Done", id="materials.done"),
        Binding("space", "switch", "On/off", id="materials.switch"),
        Binding("p", "edit('price')", "Price", id="materials.price"),
        Binding("s", "edit('stock')", "Stock", id="materials.stock"),
        Binding("l", "edit('lock')", "Lock kg", id="materials.lock"),
        Binding("r", "reset", "Reset", id="materials.reset"),
    ]

    def __init__(self, book: RecipeBook, heat: Heat, grade: str) -> None:
        super().__init__()
        self.book = book
        self.heat = heat
        self.grade = grade

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog dialog-wide", id="materials-box") as box:
            box.border_title = f"Materials for heat {self.heat.heat_id} (this heat only)"
            yield Label(hint(self.BINDINGS, "* marks this heat's own value"), classes="dialog-help")
            yield ReasonLine(pointer=False)
            yield DataTable(id="materials-table", cursor_type="row", zebra_stripes=True)

    def on_mount(self) -> None:
        table = self.query_one(DataTable)
        cur, mass = self.book.settings.currency, self.book.settings.units.mass_unit
        for key, label, width in (("use", "use", 6), ("name", "material", None), ("price", f"{cur}/{mass}", 8),
                                  ("stock", f"stock {mass}", 10), ("lock", f"locked {mass}", 10)):
            table.add_column(label, key=key, width=width)
        for material in self.book.materials:
            table.add_row(*self._cells(material), key=material.name)
        table.focus()

    def _cells(self, material: Material) -> tuple[Content, str, Text, Text, Text]:
        """One row: on/off/barred, name, then price, stock and lock (a * marks this heat's own value)."""
        heat, name, units = self.heat, material.name, self.book.settings.units
        if name in self.book.grade(self.grade).forbidden and name not in heat.locked_kg:
            use = Content.styled("barred", "$foreground-muted")
        elif name in heat.switched_off:
            use = Content.styled("off", "$text-error")
        else:
            use = Content.styled("on", "$text-success")
        price = heat.material_price_per_kg(material)
        stock = heat.material_stock_kg(material)
        marks = {key: "*" if name in getattr(heat, field) else " " for key, field in _OVERRIDES.items()}
        return (use, name,
                Text(money_text(units.per_mass(price)) + marks["price"], justify="right"),
                Text(("unlimited" if stock is None else f"{units.mass(stock):,.6g}") + marks["stock"], justify="right"),
                Text(f"{units.mass(heat.locked_kg[name]):,.6g}*" if name in heat.locked_kg else "", justify="right"))

    def _selected(self) -> Material:
        table = self.query_one(DataTable)
        return self.book.materials[table.cursor_row]

    def _apply(self, candidate: Heat, material: Material) -> None:
        """Keep a change only if the heat still holds together; otherwise say why."""
        reason = self.query_one(ReasonLine)
        try:
            validate_heat(candidate.with_changes(grade=self.grade), self.book, "materials")
        except InputError as exc:
            reason.show(f"{material.name}: {exc.message}")
            return
        reason.show(None)
        self.heat = candidate
        table = self.query_one(DataTable)
        for key, value in zip(("use", "name", "price", "stock", "lock"), self._cells(material)):
            table.update_cell(material.name, key, value)

    def action_switch(self) -> None:
        material = self._selected()
        off = set(self.heat.switched_off) ^ {material.name}
        locked = {k: v for k, v in self.heat.locked_kg.items() if k not in off}  # off wins over a lock
        self._apply(self.heat.with_changes(switched_off=frozenset(off), locked_kg=MappingProxyType(locked)), material)

    def action_edit(self, what: str) -> None:
        material = self._selected()
        field = _OVERRIDES[what]
        units = self.book.settings.units  # typed in the shop's units, kept in SI
        mass = units.mass_unit
        shown = units.per_mass if what == "price" else units.mass
        to_si = units.price_per_kg if what == "price" else units.kg
        current = getattr(self.heat, field).get(material.name)
        questions = {
            "price": (f"Price of {material.name} for this heat [{self.book.settings.currency}/{mass}]",
                      f"empty = the book's {money_text(units.per_mass(material.price_per_kg))}"),
            "stock": (f"Stock of {material.name} for this heat [{mass}]",
                      "empty = the book's " + ("unlimited" if material.stock_kg is None
                                               else kg_text(units.mass(material.stock_kg)))),
            "lock": (f"Lock {material.name} at a fixed amount [{mass}]", "empty = not locked; the plan then chooses"),
        }
        question, hint = questions[what]

        def parse(text: str) -> float | None:
            if not text.strip():
                return None
            value = parse_number(text, "materials", field)
            if value < 0:
                raise InputError("materials", field, "must not be negative")
            return to_si(value)

        def done(value: object) -> None:
            if value is BACKED_OUT:
                return
            changes = dict(getattr(self.heat, field))
            changes.pop(material.name, None)
            if value is not None:
                changes[material.name] = value
            candidate = self.heat.with_changes(**{field: MappingProxyType(changes)})
            if what == "lock" and value is not None:  # locking a material switches it on
                candidate = candidate.with_changes(switched_off=self.heat.switched_off - {material.name})
            self._apply(candidate, material)

        self.app.push_screen(PromptDialog(material.name, question, "" if current is None else f"{shown(current):g}", parse,
                                          hint=f"{hint} · Enter accepts · Esc backs out"), done)

    def action_reset(self) -> None:
        material = self._selected()
        name = material.name
        self._apply(self.heat.with_changes(
            switched_off=self.heat.switched_off - {name},
            **{field: MappingProxyType({k: v for k, v in getattr(self.heat, field).items() if k != name})
               for field in _OVERRIDES.values()}), material)

    def action_done(self) -> None:
        self.dismiss(self.heat)
