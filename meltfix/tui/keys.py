"""One way to write a key, everywhere: footer, help screen, command palette and dialog hints.

"F1", "Ctrl+P", "Shift+Tab", "Esc", "Space", "Enter", "↑", "PgDn"; a plain letter key is written
as the small letter it types ("n"), so a capital never suggests Shift.
"""

from __future__ import annotations

from collections.abc import Iterable

from textual.binding import Binding, BindingType

_NAMED = {
    "escape": "Esc", "space": "Space", "enter": "Enter", "tab": "Tab", "backspace": "Backspace",
    "delete": "Del", "insert": "Ins", "home": "Home", "end": "End", "pageup": "PgUp", "pagedown": "PgDn",
    "up": "↑", "down": "↓", "left": "←", "right": "→", "asterisk": "*", "plus": "+", "minus": "-",
}
_MODIFIERS = {"ctrl": "Ctrl", "shift": "Shift", "alt": "Alt", "meta": "Meta", "super": "Super"}


def key_name(key: str) -> str:
    """A Textual key id ("ctrl+p", "f1", "escape", "n") in the house spelling."""
    *modifiers, base = key.split("+")
    if base[0] == "f" and base[1:].isdigit():
        name = base.upper()
    elif base in _NAMED:
        name = _NAMED[base]
    elif len(base) == 1:
        name = base.upper() if modifiers else base
    else:
        name = base.replace("_", " ").title()
    return "+".join([*(_MODIFIERS.get(m, m.title()) for m in modifiers), name])


def hint(bindings: Iterable[BindingType], *extra: str) -> str:
    """A dialog's one-line hint from its own bindings: "Space on/off · p price · Esc done"."""
    parts = [f"{key_name(b.key)} {b.description.lower()}" for b in Binding.make_bindings(bindings) if b.description]
    return " · ".join([*parts, *extra])
