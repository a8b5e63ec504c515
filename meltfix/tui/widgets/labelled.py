"""A field with its words drawn by the line that holds it, rather than by widgets of their own.

Every widget on a screen is styled, laid out and painted on each pass, and the trim screen's rows
each had a container, a row and two labels around their one field. Here the row itself draws its
label (and, after the field, a hint) on its first line, with the field placed over the gap; the
words take their styles from the row's component classes, so the stylesheet still decides them.
"""

from __future__ import annotations

from rich.text import Text
from textual.reactive import reactive
from textual.widget import Widget
from textual.widgets import Input


class LabelledLine(Widget):
    """``label`` then the field (the first child, ``gap`` columns wide), then ``hint``; later children
    (a reason line) go under it."""

    COMPONENT_CLASSES = {"labelled-line--label", "labelled-line--hint"}
    DEFAULT_CSS = """
    LabelledLine {
        height: auto;
        text-wrap: nowrap;
        text-overflow: clip;
    }
    """

    def __init__(self, label: str, *children: Widget, gap: int = 0, hint: str = "", id: str | None = None,
                 classes: str | None = None) -> None:
        super().__init__(*children, id=id, classes=classes)
        self.label = label
        self.gap = gap
        self.hint = hint

    def render(self) -> Text:
        # Only the first line: the field covers the gap, and what is under it is the children's.
        return Text.assemble((self.label, self.get_component_rich_style("labelled-line--label")),
                             " " * self.gap,
                             (self.hint, self.get_component_rich_style("labelled-line--hint")))


class CompactInput(Input):
    """A compact Input born with the state classes its constructor would add one at a time (compact,
    valid): each add restyles the new Input and its four parts, before it is even mounted."""

    compact = reactive(True, toggle_class="-textual-compact")

    def __init__(self, value: str, *, id: str, classes: str, placeholder: str = "") -> None:
        super().__init__(value, id=id, compact=True, classes=f"{classes} -textual-compact -valid",
                         placeholder=placeholder)
