"""What leaves meltfix for a terminal, a spreadsheet or a disk: text from files is data.

Ids, names and notes come from files other people and instruments write. On their way out they are
made harmless: control characters shown as visible escapes (an ESC would let a sample id clear the
screen or write the clipboard), Rich markup escaped (``KB-1 [/]`` is a heat id, not a closing tag),
spreadsheet formulas neutralised, and files written whole or not at all.
"""

from __future__ import annotations

import os
import re
import tempfile
from pathlib import Path

from meltfix.base.errors import InputError, visible

__all__ = ["visible", "markup_safe", "csv_cell", "write_atomic"]

# OWASP "CSV Injection": a cell starting with one of these is run as a formula by spreadsheet programs.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"^[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?$")


def markup_safe(text: object) -> str:
    """``text`` ready to sit inside a Rich or Textual markup string: visible and escaped."""
    from rich.markup import escape

    return escape(visible(str(text)))


def csv_cell(value: object) -> object:
    """A CSV cell a spreadsheet shows as text, never runs: a text starting with ``= + - @``, a tab or a
    carriage return gets a leading single quote (OWASP's CSV-injection advice). Numbers stay numbers."""
    if not isinstance(value, str) or not value.startswith(_FORMULA_START) or _NUMBER.match(value):
        return value
    return "'" + value


def write_atomic(path: Path | str, text: str, *, what: str = "the file", overwrite: bool = True) -> Path:
    """Write ``text`` to ``path`` whole or not at all: a temporary file beside it, flushed and synced,
    then renamed over it. A full disk or a kill leaves the old file (or none), never a partial one.
    ``overwrite=False`` links the finished file into place instead, failing if the name is taken."""
    path = Path(path)
    if path.is_dir():
        raise InputError(path, "", f"is a folder; give a file name for {what}")
    folder = path.parent if str(path.parent) else Path(".")
    try:
        handle, temporary = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".partial", dir=folder)
    except OSError as exc:
        raise InputError(path, "", f"cannot write {what} ({exc.strerror or exc})") from None
    try:
        with os.fdopen(handle, "w", encoding="utf-8", newline="") as out:
            out.write(text)
            out.flush()
            os.fsync(out.fileno())
        if overwrite:
            os.replace(temporary, path)
        else:
            os.link(temporary, path)
    except FileExistsError:
        raise InputError(path, "", "already exists") from None
    except OSError as exc:
        raise InputError(path, "", f"cannot write {what} ({exc.strerror or exc})") from None
    finally:
        Path(temporary).unlink(missing_ok=True)
    return path
