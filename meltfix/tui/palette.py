"""Every action of the current screen (and the app's own keys) in the command palette, from the bindings.

Built from the same bindings as the footer and the keys screen, so an action cannot be in one
and missing from another; actions that cannot run now (check_action) are left out.
"""

from __future__ import annotations

from collections.abc import Iterator
from functools import partial
from typing import Any

from textual.actions import parse
from textual.binding import Binding
from textual.command import DiscoveryHit, Hit, Hits, Provider
from textual.dom import DOMNode


class ScreenActions(Provider):
    """The screen's described bindings as commands: the description is the name, the tooltip the help."""

    def _commands(self) -> Iterator[tuple[str, str, partial[Any]]]:
        seen: set[str] = set()
        owners: tuple[DOMNode, ...] = (self.screen, self.app)
        for owner in owners:
            for binding in Binding.make_bindings(type(owner).BINDINGS):
                if not binding.description or binding.action in seen or binding.system:
                    continue
                seen.add(binding.action)
                _, name, parameters = parse(binding.action)
                if not owner.check_action(name, parameters):
                    continue
                key = self.app.get_key_display(binding)
                help_text = f"{binding.tooltip} ({key})" if binding.tooltip else key
                yield binding.description, help_text, partial(self.app.run_action, binding.action, owner)

    async def discover(self) -> Hits:
        for name, help_text, run in self._commands():
            yield DiscoveryHit(name, run, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for name, help_text, run in self._commands():
            # Match the help too: "spectrometer" finds "Spectro", "lock" finds "Materials".
            score = max(matcher.match(name), matcher.match(help_text) * 0.8)
            if score > 0:
                yield Hit(score, matcher.highlight(name), run, text=name, help=help_text)
