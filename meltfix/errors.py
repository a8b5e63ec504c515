"""The one error type for bad input: it always names where the problem is."""

from __future__ import annotations


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
        return f"{where}: {self.message}"
