"""The one error type for bad input: it always names where the problem is."""

from __future__ import annotations

import re
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

# C0 controls (tab and newline too: an error is one line), DEL, C1 controls (0x9b starts a terminal
# command on its own), and the bidirectional overrides that reorder what a reader sees.
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u202a-\u202e\u2066-\u2069]")


def visible(text: str) -> str:
    """``text`` with every control character shown as an escape (``\\x1b``), so it prints as one
    harmless line whatever a file or an instrument put in it."""
    return _CONTROL.sub(lambda found: f"\\x{ord(found.group()):02x}" if ord(found.group()) < 0x100
                        else f"\\u{ord(found.group()):04x}", text)


def control_character(text: str) -> str | None:
    """The first control character in ``text`` as its escape, or None."""
    found = _CONTROL.search(text)
    return None if found is None else visible(found.group())


class InputError(Exception):
    """Bad input from a file or a field, reported to the user as one plain line.

    ``source`` is a file name (or another origin such as ``"command line"``), ``field`` the key,
    row or column at fault, ``message`` what is wrong in plain words.
    """

    def __init__(self, source: object, field: str, message: str) -> None:
        self.source = str(source)
        self.field = field
        self.message = message
        super().__init__(str(self))

    def __str__(self) -> str:
        where = f"{self.source}: {self.field}" if self.field else self.source
        return visible(f"{where}: {self.message}")


@contextmanager
def file_refusals(path: Path) -> Iterator[None]:
    """Turn the operating system's refusal to open or read ``path`` into one InputError naming it."""
    try:
        yield
    except FileNotFoundError:
        raise InputError(path, "", "file not found") from None
    except IsADirectoryError:
        raise InputError(path, "", "is a folder, not a file") from None
    except OSError as exc:
        raise InputError(path, "", f"cannot be read ({exc.strerror})") from None
