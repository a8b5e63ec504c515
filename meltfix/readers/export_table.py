"""The table inside an export: the header row and its roles (sample, burn, grade, heat, elements), the
decimal style and one cell read."""

from __future__ import annotations

import functools
import itertools
import re
from collections.abc import Sequence
from dataclasses import dataclass

from meltfix.base.errors import InputError
from meltfix.readers.export_layout import ExportLayout, header_key, unit_is_ppm
from meltfix.readers.export_lines import Head, read_rows
from meltfix.shop.analysis import Reading, parse_reading
from meltfix.shop.elements import PPM_ELEMENTS, normalise_symbol

_SAMPLE_NAMES = ("sample", "sample id", "sample no", "sample no.", "sample number", "sample name",
                 "sampleid", "sample_id", "id")
BURN_NAMES = ("burn", "burn no", "burn no.", "burn number", "spark", "spark no", "spark no.", "replicate")
GRADE_NAMES = ("grade", "steel grade")
HEAT_NAMES = ("heat", "heat no", "heat no.", "heat id", "heat number")
# Element-shaped headers that are not elements in an export ("No" would otherwise be nobelium).
_NOT_ELEMENTS = frozenset({"no", "nr", "id"})
# Rows an instrument adds with its own statistics; meltfix averages the burns itself.
_STATISTIC_WORDS = frozenset({"mean", "average", "avg", "x̄", "ø", "⌀", "sd", "std", "stdev", "s.d.",
                              "rsd", "rsd%", "rsd %", "min", "max", "range"})


@functools.lru_cache(maxsize=256)
def is_statistic(cell: str) -> bool:
    """True for an instrument's statistic label; cached, as burn labels repeat on every row."""
    return header_key(cell) in _STATISTIC_WORDS


_BLANK_MARKERS = frozenset({"", "-", "--", "---", "—", "n.a.", "n/a", "na"})
# An element header: "C", "%C", "Mn %", "Mn[%]", "N (ppm)", "S wt%"; the unit, if any, is checked later.
_ELEMENT_HEADER = re.compile(
    r"^(?:%\s*)?(?P<symbol>[A-Za-z]{1,2})\s*"
    r"(?:\[(?P<unit1>[^\]]*)\]|\((?P<unit2>[^)]*)\)|(?P<unit3>%|ppm|wt\.?\s*%))?$",
    re.IGNORECASE)



@dataclass(frozen=True)
class Column:
    index: int
    name: str
    symbol: str
    ppm: bool


# The header is looked for in this many non-blank rows at the top (instrument preambles are a few
# lines): scanning a whole 50 MB export once per candidate separator cost most of its reading time.
_HEADER_SEARCH_ROWS = 200


def _sample_index(cells: Sequence[str], layout: ExportLayout) -> int | None:
    wanted = (header_key(layout.sample_column),) if layout.sample_column else _SAMPLE_NAMES
    for name in wanted:  # the first name of the list wins over a later generic "ID"
        for index, cell in enumerate(cells):
            if header_key(cell) == name:
                return index
    return None


def find_table(head: Head, source: object, layout: ExportLayout) -> tuple[str, list[tuple[int, list[str]]], int, int]:
    """Pick the separator under which a header with a sample column appears near the top.

    Returns the separator, the rows up to the header, the header's position among them and the
    sample column's index.
    """
    candidates = [head.forced] if head.forced else ([layout.delimiter] if layout.delimiter else ["\t", ";", ","])
    best: tuple[int, str, list[tuple[int, list[str]]], int, int] | None = None
    any_rows = False
    for delimiter in candidates:
        rows = list(itertools.islice(read_rows(head.replay(), delimiter, source), _HEADER_SEARCH_ROWS))
        any_rows = any_rows or bool(rows)
        for position, (_, cells) in enumerate(rows):
            sample_col = _sample_index(cells, layout) if len(cells) >= 2 else None
            if sample_col is not None:
                if best is None or len(cells) > best[0]:
                    best = (len(cells), delimiter, rows[:position + 1], position, sample_col)
                break
    if not any_rows:
        raise InputError(source, "", "the file is empty")
    if best is None:
        if layout.sample_column:
            raise InputError(source, "header",
                             f"no column '{layout.sample_column}' (shop.toml spectrometer.sample_column)")
        raise InputError(source, "header", "no sample column found (looked for 'Sample', 'Sample ID', 'ID'); "
                         "name it with sample_column in shop.toml [spectrometer]")
    return best[1], best[2], best[3], best[4]


def role_index(header: Sequence[str], configured: str | None, known: Sequence[str], setting: str,
                source: object) -> int | None:
    if configured:
        for index, cell in enumerate(header):
            if header_key(cell) == header_key(configured):
                return index
        raise InputError(source, "header", f"no column '{configured}' (shop.toml spectrometer.{setting})")
    for index, cell in enumerate(header):
        if header_key(cell) in known:
            return index
    return None


def element_columns(header: Sequence[str], taken: set[int], layout: ExportLayout, source: object
                     ) -> tuple[list[Column], list[str]]:
    columns: list[Column] = []
    ignored: list[str] = []
    seen: dict[str, str] = {}
    for index, name in enumerate(header):
        if index in taken or not name:
            continue
        key = header_key(name)
        where = f"header, column '{name}'"
        header_unit: str | None = None
        if key in layout.ignore_columns:
            ignored.append(name)
            continue
        if key in layout.columns:
            symbol = layout.columns[key]
        else:
            match = _ELEMENT_HEADER.match(name)
            if not match or match["symbol"].casefold() in _NOT_ELEMENTS:
                ignored.append(name)
                continue
            symbol = normalise_symbol(match["symbol"], source, where)
            header_unit = match["unit1"] or match["unit2"] or match["unit3"]
        if symbol == "Fe":
            ignored.append(name)  # iron is the balance; the analysis never lists it
            continue
        if symbol in seen:
            raise InputError(source, where, f"{symbol} is already read from column '{seen[symbol]}'")
        seen[symbol] = name
        if header_unit is not None:
            ppm = unit_is_ppm(header_unit, source, where)
        else:
            ppm = layout.units_ppm.get(key, layout.units_ppm.get(header_key(symbol), False))
        columns.append(Column(index, name, symbol, ppm))
    if not columns:
        raise InputError(source, "header", "no element column found (headers such as 'C', 'Mn %', 'N ppm')")
    return columns, ignored


class DecimalStyle:
    """Tracks whether the file writes decimal points or decimal commas; one file may not mix them."""

    def __init__(self, configured: str | None) -> None:
        self.configured = configured
        self.first: tuple[str, str, str] | None = None  # (style, where, cell)

    def check(self, cell: str, source: object, where: str) -> None:
        style = "," if "," in cell else "." if "." in cell else None
        if style is None or ("," in cell and "." in cell):
            return  # no decimal separator, or a malformed number that parse_number will reject
        word = {".": "a decimal point", ",": "a decimal comma"}
        if self.configured:
            if style != self.configured:
                raise InputError(source, where, f"'{cell}' has {word[style]}, but shop.toml [spectrometer] "
                                 f"says this export uses {word[self.configured]}")
        elif self.first is None:
            self.first = (style, where, cell)
        elif self.first[0] != style:
            raise InputError(source, where, f"'{cell}' has {word[style]} but {self.first[1]} has "
                             f"{word[self.first[0]]} ('{self.first[2]}'); one export must use one style")


def read_cell(cell: str, column: Column, decimals: DecimalStyle, source: object, where: str) -> Reading | None:
    if cell.casefold() in _BLANK_MARKERS:
        return None
    if cell.startswith(">"):
        raise InputError(source, where, f"'{cell}' is above the instrument's calibrated range; this burn "
                         "cannot be averaged (re-spark or analyse the sample another way)")
    decimals.check(cell, source, where)
    reading = parse_reading(cell, source, where, ppm=column.ppm)
    if column.symbol in PPM_ELEMENTS and reading.pct >= 1.0:
        # Gases and boron at >= 1 wt % cannot be a steel bath: almost surely ppm read as wt %.
        raise InputError(source, where, f"'{cell}' would be {reading.pct:g} wt % {column.symbol}, which is not "
                         f"credible; if the column is in ppm, head it '{column.symbol} ppm' or set "
                         f"[spectrometer.units] {column.symbol} = \"ppm\" in shop.toml")
    return reading


# Cells joined by a character no export holds, so one pattern checks a whole row of plain numbers.
JOIN = "\x1f"


def plain_row(decimals: DecimalStyle) -> re.Pattern[str] | None:
    """A row of plain numbers ("0.123", "12") in the file's decimal style, once that style is known:
    such a row needs none of the careful parser's cases (below-limit marks, units, blanks)."""
    style = decimals.configured or (decimals.first[0] if decimals.first else None)
    if style is None:
        return None
    plain = f"[0-9]+(?:{re.escape(style)}[0-9]+)?"
    return re.compile(f"{plain}(?:{JOIN}{plain})*")


