"""The footer of keys, rebuilt only when a key it shows changes."""

from __future__ import annotations

from typing import Any

from textual.screen import Screen
from textual.widgets import Footer


class KeysFooter(Footer):
    """Textual's footer, which rebuilds every key it holds at each change of the screen's bindings.

    Focus moving from one field to the next changes the bindings without changing a key shown (the
    fields bring none of their own to the footer), and at start-up that rebuilt the whole footer
    four times before the first plan; here it is rebuilt only when a key, its name or whether it is
    lit has changed.
    """

    _shown: tuple[tuple[str, str, bool, str], ...] | None = None

    def bindings_changed(self, screen: Screen[Any]) -> None:
        if screen.app.app_focus and self.is_attached and screen is self.screen:
            shown = tuple((binding.key, binding.description, enabled, tooltip)
                          for _, binding, enabled, tooltip in screen.active_bindings.values() if binding.show)
            if shown == self._shown and self._bindings_ready:
                return
            self._shown = shown
        super().bindings_changed(screen)
