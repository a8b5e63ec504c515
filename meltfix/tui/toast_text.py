"""A toast's text with no file path broken in the middle of a name.

A toast wraps at spaces and folds a word longer than its width wherever the width ends, so a long
path came out as "/tmp/tickets/KB-2410" over "1-ticket.txt". A path (with the punctuation that
hugs it) no wider than the toast is moved whole to the next line by that wrapping; a longer one is
shortened here to the toast's width, keeping its start and its file name with "…" between them.
The message keeps its lines: a one-line error stays one line.
"""

from __future__ import annotations

import re

# A run without spaces holding a slash, with the punctuation that may hug it kept apart.
_TOKEN = re.compile(r"(?P<lead>[(“\"']*)(?P<body>[^\s(“\"']*/[^\s]*?)(?P<tail>[:;,.)”\"']*)(?=\s|$)")
_ELLIPSIS = "…"


def _is_path(body: str) -> bool:
    """A path, not a unit such as "EUR/t" or "kg/t": rooted, or a folder deep, or a file with an extension."""
    return body[0] in "/~." or body.count("/") >= 2 or "." in body.rsplit("/", 1)[1].strip(".")


def shorten_path(path: str, width: int) -> str:
    """``path`` in at most ``width`` characters where it can be: its start, "…", then "/" and its file name.

    The file name is always kept whole (the result is then longer than ``width`` only when the
    name alone is).
    """
    if len(path) <= width or "/" not in path:
        return path
    folder, name = path.rsplit("/", 1)
    room = width - len(name) - len(_ELLIPSIS) - 1
    return f"{folder[:max(room, 0)]}{_ELLIPSIS}/{name}"


def fit_paths(message: str, width: int) -> str:
    """``message`` for a toast ``width`` characters wide: every path, with what hugs it, fits on a line."""
    def fitted(found: re.Match[str]) -> str:
        lead, body, tail = found["lead"], found["body"], found["tail"]
        if not _is_path(body):
            return found[0]
        return lead + shorten_path(body, width - len(lead) - len(tail)) + tail

    return _TOKEN.sub(fitted, message)
