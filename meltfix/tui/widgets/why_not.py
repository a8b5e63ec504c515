"""Say why a key did nothing: one line under a screen's status, shared by every screen.

A binding whose ``check_action`` declines it lets the key fall through to the screen's ``on_key``;
``say_why_declined`` finds that binding and writes, on the screen's ``WhyNot`` line, which key it
was and what it waits for, so a greyed key never just does nothing.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from textual import events
from textual.actions import parse
from textual.binding import Binding
from textual.content import Content
from textual.screen import Screen
from textual.widgets import Static


class WhyNot(Static):
    """The line saying why the last key did nothing; hidden until there is something to say."""

    DEFAULT_CSS = """
    WhyNot {
        display: none;
        height: auto;
        padding: 0 1;
    }
    """

    def say(self, text: str | None) -> None:
        """Show ``text``, or hide the line (``None``) when what it explained has changed."""
        self.update(Content.styled(text or "", "$text-warning"))
        self.display = text is not None


def key_for(screen: Screen[Any], action: str) -> str:
    """How the footer writes the key of ``screen``'s own ``action`` ("F6"), to name it in a reason."""
    return next(screen.app.get_key_display(b) for b in Binding.make_bindings(screen.BINDINGS) if b.action == action)


def say_why_declined(screen: Screen[Any], event: events.Key, line: WhyNot,
                     why: Callable[[str, tuple[object, ...]], str]) -> None:
    """If ``event`` is one of ``screen``'s keys that cannot act now, say so on ``line``.

    ``why(action, parameters)`` words what the action waits for; the key and its footer name
    are put before it ("F8 Added: accept a plan first (F6), …").
    """
    for binding in Binding.make_bindings(screen.BINDINGS):
        if binding.key != event.key or not binding.description:
            continue
        _, name, parameters = parse(binding.action)
        if screen.check_action(name, parameters):
            return
        line.say(f"{screen.app.get_key_display(binding)} {binding.description}: {why(name, parameters)}")
        event.stop()
        return
