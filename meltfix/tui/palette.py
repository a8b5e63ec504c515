"""Every action of the current screen in the command palette, taken from its bindings.

Built from the same bindings as the footer and the keys screen, so an action cannot be in one
and missing from another; actions the screen cannot run now (check_action) are left out.
"""

from __future__ import annotations

from collections.abc import Iterator
from functools import partial
from typing import Any

from textual.actions import parse
from textual.binding import Binding
from textual.command import DiscoveryHit, Hit, Hits, Provider


class ScreenActions(Provider):
    """The screen's described bindings as commands: the description is the name, the tooltip the help."""

    def _commands(self) -> Iterator[tuple[str, str, Binding]]:
        screen = self.screen
        seen: set[str] = set()
        for binding in Binding.make_bindings(screen.BINDINGS):
            if not binding.description or binding.action in seen:
                continue
            seen.add(binding.action)
            _, name, parameters = parse(binding.action)
            if not screen.check_action(name, parameters):
                continue
            key = self.app.get_key_display(binding)
            yield binding.description, f"{binding.tooltip} ({key})" if binding.tooltip else key, binding

    def _run(self, binding: Binding) -> partial[Any]:
        return partial(self.app.run_action, binding.action, self.screen)

    async def discover(self) -> Hits:
        for name, help_text, binding in self._commands():
            yield DiscoveryHit(name, self._run(binding), help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for name, help_text, binding in self._commands():
            # Match the help too: "spectrometer" finds "Spectro", "lock" finds "Materials".
            score = max(matcher.match(name), matcher.match(help_text) * 0.8)
            if score > 0:
                yield Hit(score, matcher.highlight(name), self._run(binding), text=name, help=help_text)
