"""The footer of keys, rebuilt only when a key it shows changes."""

from __future__ import annotations

from typing import Any

from textual.app import ComposeResult
from textual.screen import Screen
from textual.widgets import Footer
from textual.widgets._footer import FooterKey  # the framework's key, not exported by textual.widgets


class KeysFooter(Footer):
    """Textual's footer, which rebuilds every key it holds at each change of the screen's bindings.

    Focus moving from one field to the next changes the bindings without changing a key shown (the
    fields bring none of their own to the footer), and at start-up that rebuilt the whole footer
    four times before the first plan. Here it is rebuilt only when a key, its name or whether it is
    lit has changed, and changes that come before the rebuild they asked for share it.
    """

    _shown: tuple[tuple[str, str, bool, str], ...] | None = None
    _rebuild_asked = False

    def compose(self) -> ComposeResult:
        if self._bindings_ready:
            self._shown = _keys_shown(self.screen)
        for widget in super().compose():
            if isinstance(widget, FooterKey):
                # Born compact rather than made so once mounted, which restyles each key a second time.
                widget.set_class(self.compact, "-compact", update=False)
            yield widget

    def bindings_changed(self, screen: Screen[Any]) -> None:
        self._bindings_ready = True
        if not (screen.app.app_focus and self.is_attached and screen is self.screen):
            return
        shown = _keys_shown(screen)
        if shown != self._shown and not self._rebuild_asked:
            self._rebuild_asked = True
            self.call_after_refresh(self._rebuild)

    async def _rebuild(self) -> None:
        self._rebuild_asked = False
        await self.recompose()


def _keys_shown(screen: Screen[Any]) -> tuple[tuple[str, str, bool, str], ...]:
    """What the footer shows of ``screen``'s bindings: each key, its name, whether it is lit, its tooltip."""
    return tuple((binding.key, binding.description, enabled, tooltip)
                 for _, binding, enabled, tooltip in screen.active_bindings.values() if binding.show)
