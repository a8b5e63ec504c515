"""Values read from the shop's TOML files, each checked where it is read: one :class:`InputError`
naming the file and the field for anything out of place (a wrong type, an unknown key, a number too
large, a control character in a name)."""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from meltfix.base.errors import InputError, control_character, file_refusals

# Any other number from a file (a price, a stock, a penalty) is bounded too: 1e308 would overflow to
# infinity inside the solver and be blamed on an unrelated field.
MAX_MAGNITUDE = 1e9


def read_toml(path: Path) -> dict[str, Any]:
    """Parse a TOML file, turning every failure into one InputError naming the file."""
    with file_refusals(path):
        try:
            with path.open("rb") as handle:
                return tomllib.load(handle)
        except tomllib.TOMLDecodeError as exc:
            raise InputError(path, "", f"not valid TOML ({exc}){_decimal_comma_hint(path, str(exc))}") from None
        except RecursionError:
            raise InputError(path, "", "not valid TOML: tables or lists nested too deep") from None
        except UnicodeDecodeError:
            raise InputError(path, "", "not a UTF-8 text file") from None


_AT_LINE = re.compile(r"at line (\d+)")


_DECIMAL_COMMA = re.compile(r"=\s*[+-]?\d+,\d+\s*(#.*)?$")


def _decimal_comma_hint(path: Path, error: str) -> str:
    """A hint when the faulty line holds a bare decimal comma (``C = 0,45``), which TOML reads as nothing."""
    found = _AT_LINE.search(error)
    try:
        lines = path.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return ""
    if found is None or not 0 < int(found.group(1)) <= len(lines):
        return ""
    if _DECIMAL_COMMA.search(lines[int(found.group(1)) - 1]):
        return "; a decimal comma needs quotes (\"0,45\") or a point (0.45)"
    return ""


def require(table: Mapping[str, Any], key: str, source: object, where: str) -> Any:
    if key not in table:
        raise InputError(source, f"{where}{key}", "is missing")
    return table[key]


def number(value: Any, source: object, field_name: str, *, minimum: float | None = 0.0,
           positive: bool = False) -> float:
    """A finite number from TOML, checked against a lower bound and :data:`MAX_MAGNITUDE`."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(source, field_name, f"expected a number, got {short(value)}")
    # A TOML integer may have hundreds of digits: compare before float() overflows.
    if isinstance(value, int) and abs(value) > MAX_MAGNITUDE:
        raise InputError(source, field_name, f"{short(value)} is too large (at most {MAX_MAGNITUDE:g})")
    result = float(value)
    if math.isfinite(result) and abs(result) > MAX_MAGNITUDE:
        raise InputError(source, field_name, f"{value!r} is too large (at most {MAX_MAGNITUDE:g})")
    if not math.isfinite(result):
        raise InputError(source, field_name, f"{value!r} is not a finite number")
    if positive and result <= 0:
        raise InputError(source, field_name, f"must be above 0, got {value!r}")
    if minimum is not None and result < minimum:
        raise InputError(source, field_name, f"must not be negative, got {value!r}")
    return result


def short(value: Any) -> str:
    """A value quoted in a message, cut short: a 400-digit number or a 10,000-character text is not echoed."""
    shown = repr(value)
    return shown if len(shown) <= 40 else f"{shown[:37]}..."


# Longest id or name shown whole on a screen, a ticket or a report line.
MAX_NAME_CHARS = 200


def text(value: Any, source: object, field_name: str) -> str:
    """A name or id: non-empty, one line, no control characters, at most :data:`MAX_NAME_CHARS`."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(source, field_name, f"expected a non-empty text, got {short(value)}")
    control = control_character(value.strip())
    if control is not None:
        raise InputError(source, field_name, f"holds a control character ({control}); names and ids are plain text")
    if len(value.strip()) > MAX_NAME_CHARS:
        raise InputError(source, field_name, f"is {len(value.strip()):,} characters long (at most {MAX_NAME_CHARS})")
    return value.strip()


def identifier(value: Any, source: object, field_name: str) -> str:
    """A heat or sample id: a non-empty text, or a whole number written without quotes (24211)."""
    if isinstance(value, int) and not isinstance(value, bool):
        value = str(value)
    return text(value, source, field_name)


def table(value: Any, source: object, field_name: str) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise InputError(source, field_name, f"expected a table, got {short(value)}")
    return value


def known_keys(entry: Mapping[str, Any], allowed: set[str], source: object, where: str) -> None:
    # An unknown key is almost always a typing slip ("stok_kg"); silently ignoring it loses data.
    for key in entry:
        if key not in allowed:
            raise InputError(source, f"{where}{key}", f"unknown key (expected one of: {', '.join(sorted(allowed))})")


def optional_text(entry: Mapping[str, Any], key: str, source: object, where: str) -> str:
    value = entry.get(key, "")
    if not isinstance(value, str):
        raise InputError(source, f"{where}{key}", f"expected a text, got {short(value)}")
    control = control_character(value.replace("\n", " ").replace("\t", " "))
    if control is not None:
        raise InputError(source, f"{where}{key}", f"holds a control character ({control})")
    return value.strip()
