"""The footer of keys: one widget that draws every key, redrawn only when a key it shows changes."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from rich.style import Style
from rich.text import Text
from textual import events
from textual.screen import Screen
from textual.widget import Widget


@dataclass(frozen=True)
class ShownKey:
    """One key as the footer shows it."""

    key: str
    display: str
    description: str
    enabled: bool
    tooltip: str

    @property
    def width(self) -> int:
        return len(self.display) + (len(self.description) + 1 if self.description else 0)


class KeysFooter(Widget):
    """The screen's keys on one line, drawn like Textual's compact footer (key, then its name, a
    space between keys; a key that cannot act now dimmed); a click on a key presses it.

    Textual's footer is a widget per key, composed again at each change of the screen's bindings:
    nine widgets to style, lay out and paint before the first plan, and all of them rebuilt when
    the first plan lights Accept and Ticket. Here a change of the keys is one repaint of one line.
    """

    COMPONENT_CLASSES = {"keys-footer--key", "keys-footer--description", "keys-footer--hover"}
    # Each key on the footer's background: no built-in theme gives $footer-item-background a colour.
    DEFAULT_CSS = """
    KeysFooter {
        dock: bottom;
        height: 1;
        color: $footer-foreground;
        background: $footer-background;
        text-wrap: nowrap;
        text-overflow: clip;
        .keys-footer--key {
            color: $footer-key-foreground;
            background: $footer-key-background;
            text-style: bold;
        }
        .keys-footer--description {
            color: $footer-description-foreground;
            background: $footer-description-background;
        }
        .keys-footer--hover {
            background: $block-hover-background;
        }
    }
    """

    def __init__(self) -> None:
        super().__init__()
        self._keys: tuple[ShownKey, ...] = ()
        self._hover: int | None = None

    def on_mount(self) -> None:
        self._keys = _keys_shown(self.screen)
        self.screen.bindings_updated_signal.subscribe(self, self._bindings_changed)

    def on_unmount(self) -> None:
        self.screen.bindings_updated_signal.unsubscribe(self)

    def _bindings_changed(self, screen: Screen[Any]) -> None:
        # Focus moving between fields changes the bindings but not a key shown: nothing to draw.
        keys = _keys_shown(screen)
        if keys != self._keys:
            self._keys = keys
            self.refresh()

    def render(self) -> Text:
        text = Text()
        for index, shown in enumerate(self._keys):
            if index:
                text.append(" ")
            hover = ("keys-footer--hover",) if index == self._hover else ()
            dim = Style() if shown.enabled else Style(dim=True)
            text.append(shown.display, self.get_component_rich_style(*hover, "keys-footer--key") + dim)
            if shown.description:
                text.append(" " + shown.description,
                            self.get_component_rich_style(*hover, "keys-footer--description") + dim)
        return text

    def _key_at(self, x: int) -> int | None:
        start = 0
        for index, shown in enumerate(self._keys):
            if start <= x < start + shown.width:
                return index
            start += shown.width + 1
        return None

    def on_mouse_move(self, event: events.MouseMove) -> None:
        index = self._key_at(event.x)
        if index != self._hover:
            self._hover = index
            self.tooltip = None if index is None else self._keys[index].tooltip or None
            self.refresh()

    def on_leave(self) -> None:
        self._hover = None
        self.refresh()

    def on_mouse_down(self, event: events.MouseDown) -> None:
        index = self._key_at(event.x)
        if index is None:
            return
        if self._keys[index].enabled:
            self.app.simulate_key(self._keys[index].key)
        else:
            self.app.bell()


def _keys_shown(screen: Screen[Any]) -> tuple[ShownKey, ...]:
    """``screen``'s bindings that show in a footer, one per action (its first key), as Textual's footer lists them."""
    shown: dict[str, ShownKey] = {}
    for _, binding, enabled, tooltip in screen.active_bindings.values():
        if binding.show and binding.action not in shown:
            shown[binding.action] = ShownKey(binding.key, screen.app.get_key_display(binding), binding.description,
                                             enabled, tooltip)
    return tuple(shown.values())
