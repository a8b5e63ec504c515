"""A bath analysis: element contents in wt %, some of them only known as an upper bound."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

from meltfix.base.errors import InputError
from meltfix.shop.elements import PPM_PER_PCT, element_sort_key, normalise_symbol, parse_number


@dataclass(frozen=True)
class Analysis:
    """The chemistry of the bath at one sample.

    ``pct`` maps element symbol to content [wt %]. Symbols in ``below_limit`` were reported below
    the analyser's detection limit ("<0.001"): their value in ``pct`` is that limit, an upper bound
    on the true content. Iron is the balance and is never listed.
    """

    pct: Mapping[str, float]
    below_limit: frozenset[str] = frozenset()

    def __post_init__(self) -> None:
        ordered = dict(sorted(self.pct.items(), key=lambda item: element_sort_key(item[0])))
        object.__setattr__(self, "pct", MappingProxyType(ordered))
        object.__setattr__(self, "below_limit", frozenset(self.below_limit))

    @property
    def total_pct(self) -> float:
        """Sum of the listed elements [wt %] (iron excluded)."""
        return math.fsum(self.pct.values())

    def get(self, symbol: str, default: float = 0.0) -> float:
        return self.pct.get(symbol, default)

    @property
    def lowest_pct(self) -> dict[str, float]:
        """Contents [wt %] with each below-limit reading at 0, the low end of what it may be: the
        safe reading against a minimum."""
        return {s: 0.0 if s in self.below_limit else v for s, v in self.pct.items()}


@dataclass(frozen=True)
class Reading:
    """One parsed analysis value [wt %], with whether it is only an upper bound."""

    pct: float
    below_limit: bool = False


def parse_reading(value: object, source: object, field_name: str, *, ppm: bool = False) -> Reading:
    """Read one analysis value from a file cell or a TOML value.

    Accepts numbers, strings with a decimal comma, a trailing "%" or "ppm", and "<0.001" for a
    value below the detection limit. ``ppm=True`` means a bare number is in ppm, not wt %.
    """
    if isinstance(value, bool):
        raise InputError(source, field_name, "expected a number, got true/false")
    if isinstance(value, int) and abs(value) > 1_000_000:  # float() of a 400-digit integer overflows
        raise InputError(source, field_name, f"{str(value)[:20]}... is far above 100 %")
    if isinstance(value, (int, float)):
        number, below, unit_ppm = float(value), False, ppm
    elif isinstance(value, str):
        text = value.strip()
        below = text.startswith("<")
        if below:
            text = text[1:].strip()
        unit_ppm = ppm
        lowered = text.lower()
        if lowered.endswith("ppm"):
            unit_ppm, text = True, text[:-3].strip()
        elif lowered.endswith("%"):
            unit_ppm, text = False, text[:-1].strip()
        if not text:
            raise InputError(source, field_name, f"'{value}' has no number")
        number = parse_number(text, source, field_name)
    else:
        raise InputError(source, field_name, f"expected a number, got {type(value).__name__}")
    if not math.isfinite(number):
        raise InputError(source, field_name, f"{value!r} is not a finite number")
    if number < 0:
        raise InputError(source, field_name, f"{value!r} is negative; a content cannot be below 0")
    pct = number / PPM_PER_PCT if unit_ppm else number
    if pct > 100:
        raise InputError(source, field_name, f"{value!r} is above 100 %")
    return Reading(pct=pct, below_limit=below)


def analysis_from_table(table: Mapping[str, object], source: object, field_prefix: str) -> Analysis:
    """Build an Analysis from a TOML table of ``symbol = wt %`` (strings allowed, see parse_reading)."""
    pct: dict[str, float] = {}
    below: set[str] = set()
    for key, value in table.items():
        where = f"{field_prefix}.{key}"
        symbol = normalise_symbol(key, source, where)
        if symbol == "Fe":
            raise InputError(source, where, "iron is the balance; list only the other elements")
        if symbol in pct:
            raise InputError(source, where, f"{symbol} is given twice")
        reading = parse_reading(value, source, where)
        pct[symbol] = reading.pct
        if reading.below_limit:
            below.add(symbol)
    analysis = Analysis(pct=pct, below_limit=frozenset(below))
    if analysis.total_pct > 100:
        raise InputError(source, field_prefix, f"the elements add up to {analysis.total_pct:.3f} %, over 100 %")
    return analysis
