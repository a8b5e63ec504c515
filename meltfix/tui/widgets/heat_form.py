"""The heat's own fields: grade, bath weight, vessel capacity, stage and the sample's temperature."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from textual import events
from textual.app import ComposeResult
from textual.containers import Vertical
from textual.content import Content
from textual.message import Message
from textual.widget import Widget
from textual.widgets import Input, Static

from meltfix.base.units import Units
from meltfix.tui.draft import BATH, CAPACITY, GRADE, TEMPERATURE
from meltfix.tui.widgets.labelled import CompactInput, LabelledLine
from meltfix.tui.widgets.reason import show_reason


class GradeField(Static, can_focus=True):
    """Shows the grade; Enter, or typing a letter, asks for the grade picker (to filter by that letter)."""

    @dataclass
    class PickRequested(Message):
        typed: str
        """What the user had started typing: the picker's first filter text."""

    def __init__(self, grade: str, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.grade = grade

    def set_grade(self, grade: str) -> None:
        self.grade = grade
        self.refresh()

    def render(self) -> Content:
        return Content.assemble((self.grade, "bold"), ("  ▸", "$foreground-muted"))

    def on_key(self, event: events.Key) -> None:
        if event.key in ("enter", "space"):
            typed = ""
        elif event.is_printable and event.character:
            typed = event.character
        else:
            return
        event.stop()
        self.post_message(self.PickRequested(typed))


class CycleField(Static, can_focus=True):
    """One of a few fixed words; Space, Enter, ← or → step through them."""

    @dataclass
    class Changed(Message):
        field: "CycleField"
        value: str

    def __init__(self, choices: Sequence[str], value: str, *, id: str | None = None, classes: str | None = None) -> None:
        super().__init__(id=id, classes=classes)
        self.choices = tuple(choices) if value in choices else (*choices, value)
        self.value = value

    def render(self) -> Content:
        return Content.assemble(("◂ ", "$foreground-muted"), (self.value, "bold"), (" ▸", "$foreground-muted"))

    def on_key(self, event: events.Key) -> None:
        step = {"space": 1, "enter": 1, "right": 1, "left": -1}.get(event.key)
        if step is None:
            return
        event.stop()
        self.value = self.choices[(self.choices.index(self.value) + step) % len(self.choices)]
        self.refresh()
        self.post_message(self.Changed(self, self.value))


_LABEL = 10  # columns of a field's label (trim.tcss: .form-field's margin)


def _row(label: str, field: Widget) -> LabelledLine:
    return LabelledLine(f"{label:<{_LABEL}}", field, classes="form-row", id=f"row-{field.id}")


class HeatForm(Vertical):
    """Grade, bath, capacity, stage and temperature; typing posts Input.Changed, the screen does the rest."""

    def __init__(self, grade: str, bath_text: str, capacity_text: str, stage: str, temperature_text: str = "", *,
                 stages: tuple[str, ...] = ("furnace", "ladle"), units: Units = Units(), id: str | None = None) -> None:
        super().__init__(id=id)
        self._units = units
        """The shop's units: the fields are typed in them."""
        self._initial = (grade, bath_text, capacity_text, stage, temperature_text)
        self._stages = stages
        """The shop's stages, in its order (shop.toml ``[stage.NAME]``)."""

    def compose(self) -> ComposeResult:
        grade, bath_text, capacity_text, stage, temperature_text = self._initial
        yield _row("Grade", GradeField(grade, id="grade", classes="form-field"))
        yield _row(f"Bath {self._units.mass_unit}",
                   CompactInput(bath_text, id="bath", classes="form-field form-input"))
        yield _row(f"Vessel {self._units.mass_unit}",
                   CompactInput(capacity_text, id="capacity", classes="form-field form-input",
                                 placeholder="not limited"))
        yield _row("Stage", CycleField(self._stages, stage, id="stage", classes="form-field"))
        yield _row(f"Temp {self._units.temperature_unit}",
                   CompactInput(temperature_text, id="temperature", classes="form-field form-input",
                                 placeholder="no reading"))

    @property
    def grade(self) -> str:
        return self.query_one(GradeField).grade

    @property
    def bath_text(self) -> str:
        return self.query_one("#bath", Input).value

    @property
    def capacity_text(self) -> str:
        return self.query_one("#capacity", Input).value

    @property
    def stage(self) -> str:
        return self.query_one(CycleField).value

    @property
    def temperature_text(self) -> str:
        return self.query_one("#temperature", Input).value

    def set_values(self, grade: str, bath_text: str, capacity_text: str, stage: str, temperature_text: str = "") -> None:
        self.query_one(GradeField).set_grade(grade)
        with self.prevent(Input.Changed):
            self.query_one("#bath", Input).value = bath_text
            self.query_one("#capacity", Input).value = capacity_text
            self.query_one("#temperature", Input).value = temperature_text
        stage_field = self.query_one(CycleField)
        if stage not in stage_field.choices:
            stage_field.choices = (*stage_field.choices, stage)
        stage_field.value = stage
        stage_field.refresh()

    def set_temperature_text(self, text: str) -> None:
        with self.prevent(Input.Changed):
            self.query_one("#temperature", Input).value = text

    def show_errors(self, errors: Mapping[str, str]) -> None:
        """Mark each field at fault in place, with its reason on the line below."""
        for key, widget_id in ((GRADE, "grade"), (BATH, "bath"), (CAPACITY, "capacity"), (TEMPERATURE, "temperature")):
            reason = errors.get(key)
            self.query_one(f"#{widget_id}").set_class(reason is not None, "-bad")
            show_reason(self, f"reason-{widget_id}", reason, after=f"#row-{widget_id}")
