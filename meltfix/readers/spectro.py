"""Spectrometer exports: burns read, checked against each other and averaged into one analysis per sample.

An export is a CSV or TSV table, one row per burn (spark), with a column naming the sample. The
reader accepts what instruments actually write: comma, semicolon or tab separators, a decimal
point or a decimal comma, a UTF-8 byte-order mark, blank cells, "<0.001" below a detection limit,
element headers such as ``C``, ``Mn %``, ``Mn[%]``, ``N ppm``, preamble lines above the header and
the instrument's own mean rows. A shop's own layout comes from ``[spectrometer]`` in ``shop.toml``
(see :class:`ExportLayout`). Any problem rejects the whole file with one :class:`InputError`
naming the row (the line of the file) and the column: nothing is half-imported.

Averaging rule for values below a detection limit, per element over the accepted burns:
all burns quantified -> arithmetic mean; all below a limit -> upper bound at the largest limit;
some of each -> upper bound at the larger of the largest limit and the mean of the quantified burns,
so the bound is never lower than what was actually measured (the planner reads it as "at most").
"""

from __future__ import annotations

import codecs
import csv
import functools
import io
import itertools
import math
import re
import statistics
from collections import Counter, OrderedDict
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any, NamedTuple

import numpy as np

from meltfix.base.errors import InputError, file_refusals
from meltfix.shop.analysis import Analysis, Reading, parse_reading
from meltfix.shop.elements import PPM_ELEMENTS, PPM_PER_PCT, element_sort_key, normalise_symbol
from meltfix.shop.recipes import ShopSettings, number, table, text
from meltfix.shop.repeatability import RepeatabilityCurve, default_curve

# ---------------------------------------------------------------------------------------------
# The shop's layout


def _key(name: str) -> str:
    """Header names compare case-blind with runs of spaces collapsed ("Sample  ID" == "sample id")."""
    return " ".join(name.split()).casefold()


_SAMPLE_NAMES = ("sample", "sample id", "sample no", "sample no.", "sample number", "sample name",
                 "sampleid", "sample_id", "id")
_BURN_NAMES = ("burn", "burn no", "burn no.", "burn number", "spark", "spark no", "spark no.", "replicate")
_GRADE_NAMES = ("grade", "steel grade")
_HEAT_NAMES = ("heat", "heat no", "heat no.", "heat id", "heat number")
# Element-shaped headers that are not elements in an export ("No" would otherwise be nobelium).
_NOT_ELEMENTS = frozenset({"no", "nr", "id"})
# Rows an instrument adds with its own statistics; meltfix averages the burns itself.
_STATISTIC_WORDS = frozenset({"mean", "average", "avg", "x̄", "ø", "⌀", "sd", "std", "stdev", "s.d.",
                              "rsd", "rsd%", "rsd %", "min", "max", "range"})


@functools.lru_cache(maxsize=256)
def _is_statistic(cell: str) -> bool:
    """True for an instrument's statistic label; cached, as burn labels repeat on every row."""
    return _key(cell) in _STATISTIC_WORDS


_BLANK_MARKERS = frozenset({"", "-", "--", "---", "—", "n.a.", "n/a", "na"})
_LAYOUT_KEYS = ("sample_column", "burn_column", "grade_column", "heat_column", "delimiter", "decimal",
                "encoding", "columns", "units", "ignore_columns", "repeatability")
_UNIT_WORDS = {"%": False, "wt%": False, "wt.%": False, "mass%": False, "m%": False, "ppm": True,
               "mg/kg": True}


def _unit_is_ppm(unit: str, source: object, field_name: str) -> bool:
    cleaned = "".join(unit.split()).casefold()
    if cleaned not in _UNIT_WORDS:
        raise InputError(source, field_name, f"unknown unit '{unit}' (use % or ppm)")
    return _UNIT_WORDS[cleaned]


@dataclass(frozen=True)
class ExportLayout:
    """How the shop's spectrometer writes its export: ``[spectrometer]`` in ``shop.toml``.

    Every field is optional; unset ones are detected from the file. ``columns`` maps a header
    as written to an element symbol, ``units`` maps a header or a symbol to "%" or "ppm" (for
    headers that carry no unit), ``repeatability`` overrides the built-in curves per element.
    """

    sample_column: str | None = None
    burn_column: str | None = None
    grade_column: str | None = None
    heat_column: str | None = None
    delimiter: str | None = None
    decimal: str | None = None
    encoding: str = "utf-8"
    columns: Mapping[str, str] = field(default_factory=dict)
    """Header key (see ``_key``) -> element symbol."""
    units_ppm: Mapping[str, bool] = field(default_factory=dict)
    """Header key or element symbol, compared as by ``_key`` -> True when the column is in ppm."""
    ignore_columns: frozenset[str] = frozenset()
    repeatability: Mapping[str, RepeatabilityCurve] = field(default_factory=dict)

    def curve(self, symbol: str) -> RepeatabilityCurve:
        return self.repeatability.get(symbol) or default_curve(symbol)

    @classmethod
    def from_settings(cls, raw: Mapping[str, Any], source: object = "shop.toml") -> ExportLayout:
        """Validate the ``[spectrometer]`` table; every mistake names its key."""
        where = "spectrometer."
        for key in raw:
            if key not in _LAYOUT_KEYS:
                raise InputError(source, f"{where}{key}",
                                 f"unknown key (expected one of: {', '.join(_LAYOUT_KEYS)})")

        def optional_text(key: str) -> str | None:
            return None if key not in raw else text(raw[key], source, f"{where}{key}")

        delimiter = raw.get("delimiter")
        if delimiter is not None:
            if delimiter in ("tab", "\\t"):
                delimiter = "\t"
            if not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in "\"\r\n.":
                raise InputError(source, f"{where}delimiter",
                                 f"expected one character such as \",\", \";\" or \"tab\", got {delimiter!r}")
        decimal = raw.get("decimal")
        if decimal is not None and decimal not in (".", ","):
            raise InputError(source, f"{where}decimal", f"expected \".\" or \",\", got {decimal!r}")
        if decimal == "," and delimiter == ",":
            raise InputError(source, f"{where}decimal", "a decimal comma cannot be read from a comma-separated file")
        encoding = text(raw.get("encoding", "utf-8"), source, f"{where}encoding")
        try:
            codecs.lookup(encoding)
        except LookupError:
            raise InputError(source, f"{where}encoding",
                             f"'{encoding}' is not a known text encoding (e.g. \"utf-8\", \"cp1252\")") from None

        columns: dict[str, str] = {}
        for header, symbol in table(raw.get("columns", {}), source, f"{where}columns").items():
            field_name = f"{where}columns.{header}"
            symbol = normalise_symbol(text(symbol, source, field_name), source, field_name)
            if symbol == "Fe":
                raise InputError(source, field_name,
                                 "iron is the balance and is not read; list the column under ignore_columns")
            columns[_key(header)] = symbol

        units: dict[str, bool] = {}
        for name, unit in table(raw.get("units", {}), source, f"{where}units").items():
            field_name = f"{where}units.{name}"
            units[_key(name)] = _unit_is_ppm(text(unit, source, field_name), source, field_name)

        ignore = raw.get("ignore_columns", [])
        if not isinstance(ignore, list) or not all(isinstance(item, str) for item in ignore):
            raise InputError(source, f"{where}ignore_columns", "expected a list of column names")

        curves: dict[str, RepeatabilityCurve] = {}
        for name, spec in table(raw.get("repeatability", {}), source, f"{where}repeatability").items():
            field_name = f"{where}repeatability.{name}"
            symbol = normalise_symbol(name, source, field_name)
            if isinstance(spec, Mapping):
                for key in spec:
                    if key not in ("floor_pct", "factor"):
                        raise InputError(source, f"{field_name}.{key}", "unknown key (expected floor_pct, factor)")
                base = default_curve(symbol)
                curves[symbol] = RepeatabilityCurve(
                    number(spec.get("floor_pct", base.floor_pct), source, f"{field_name}.floor_pct", positive=True),
                    number(spec.get("factor", base.factor), source, f"{field_name}.factor"))
            else:
                # A plain number is a fixed limit [wt %] at every content.
                curves[symbol] = RepeatabilityCurve(number(spec, source, field_name, positive=True), 0.0, 0.0)

        return cls(
            sample_column=optional_text("sample_column"),
            burn_column=optional_text("burn_column"),
            grade_column=optional_text("grade_column"),
            heat_column=optional_text("heat_column"),
            delimiter=delimiter,
            decimal=decimal,
            encoding=encoding,
            columns=MappingProxyType(columns),
            units_ppm=MappingProxyType(units),
            ignore_columns=frozenset(_key(item) for item in ignore),
            repeatability=MappingProxyType(curves),
        )


# ---------------------------------------------------------------------------------------------
# Results


@dataclass(frozen=True)
class Burn:
    """One spark on a sample: one row of the export."""

    label: str
    """Burn number as the export writes it, or 1, 2, ... in row order when it has none."""
    row: int
    """Line of the file the burn was read from (1 = first line)."""
    readings: Mapping[str, Reading]
    """Element -> content [wt %] (ppm converted); blank cells are absent."""
    outlier_in: frozenset[str] = frozenset()
    """Elements in which this burn alone disagrees with the others beyond the repeatability limit."""
    disputed_in: frozenset[str] = frozenset()
    """Elements in which this burn is part of a disagreement that cannot be pinned on one burn."""
    accepted: bool = True
    """False when the burn is not in the mean (blank, or flagged and flagged burns were dropped)."""

    @property
    def flagged(self) -> bool:
        return bool(self.outlier_in or self.disputed_in)


@dataclass(frozen=True)
class SpectroSample:
    """One sample of the bath: its burns and their mean."""

    sample_id: str
    burns: tuple[Burn, ...]
    """Every burn read, in file order, including those left out of the mean."""
    analysis: Analysis
    """Mean of the accepted burns [wt %]; elements in ``below_limit`` are upper bounds."""
    flags: tuple[str, ...] = ()
    """Plain-language warnings: disagreeing burns (spark again), left-out burns, single burns."""
    grade: str | None = None
    heat: str | None = None

    @property
    def accepted_burns(self) -> tuple[Burn, ...]:
        return tuple(burn for burn in self.burns if burn.accepted)


@dataclass(frozen=True)
class ImportResult:
    """Everything read from one export."""

    source: str
    samples: tuple[SpectroSample, ...]
    """In the order the samples first appear in the file."""
    elements: tuple[str, ...]
    """Element columns of the file, in analysis-sheet order."""
    ignored_columns: tuple[str, ...] = ()
    """Headers that were not read (time, operator, iron balance, ...), as written."""
    notes: tuple[str, ...] = ()
    """What the reader skipped on purpose (preamble lines, the instrument's mean rows)."""

    def sample(self, sample_id: str) -> SpectroSample:
        for sample in self.samples:
            if sample.sample_id == sample_id:
                return sample
        raise KeyError(sample_id)


def format_content(symbol: str, pct: float) -> str:
    """A content as a metallurgist writes it: ppm for N, O, B, H, else wt % to 4 decimals."""
    if symbol in PPM_ELEMENTS:
        return f"{pct * PPM_PER_PCT:.1f}".removesuffix(".0") + " ppm"
    if pct >= 10:
        return f"{pct:.2f}"
    return f"{pct:.{5 if pct < 0.01 else 4}f}".rstrip("0").rstrip(".")


# ---------------------------------------------------------------------------------------------
# Reading the file
#
# An export is read as a stream: the layout is detected from its first rows, then the rows are read
# one at a time and each sample is checked, averaged and handed on as soon as its last burn is read.
# Only the samples still being read are held, so memory does not grow with the file (a shop's
# export of a year of heats runs to tens of MB).


def read_export(path: Path | str, settings: ShopSettings | None = None, drop_flagged: bool = False) -> ImportResult:
    """Read one spectrometer export whole; ``drop_flagged`` leaves burns singled out as outliers out of the mean."""
    return iter_samples(path, settings, drop_flagged=drop_flagged).result()


def iter_samples(path: Path | str, settings: ShopSettings | None = None, *,
                 drop_flagged: bool = False) -> SampleStream:
    """Open an export to read it sample by sample (see :class:`SampleStream`).

    The header is read and checked here; a problem further down is raised while iterating.
    """
    path = Path(path)
    layout = ExportLayout.from_settings(settings.spectrometer if settings else {})
    return SampleStream(_FileLines(path, layout.encoding), path, layout, drop_flagged)


def parse_export(body: str, source: object, layout: ExportLayout | None = None, *,
                 drop_flagged: bool = False) -> ImportResult:
    """Parse the text of an export (see :func:`read_export`)."""
    return SampleStream(_TextLines(body), source, layout or ExportLayout(), drop_flagged).result()


class _TextLines:
    """An export already in memory."""

    def __init__(self, body: str) -> None:
        self.body = body

    def open(self) -> Iterator[str]:
        return iter(io.StringIO(self.body, newline=""))


class _FileLines:
    """An export on disk, decoded line by line; opened afresh for each pass over it."""

    def __init__(self, path: Path, encoding: str) -> None:
        self.path = path
        with file_refusals(path), path.open("rb") as file:
            start = file.read(4)
        if start.startswith(b"PK\x03\x04"):
            raise InputError(path, "", "is a spreadsheet workbook (.xlsx), not CSV text; save or export it as CSV")
        self.encoding = encoding
        if start.startswith((b"\xff\xfe", b"\xfe\xff")):
            # "Unicode text" exports announce UTF-16 with a byte-order mark: no guessing involved.
            self.encoding = "utf-16"
        elif codecs.lookup(encoding).name == "utf-8":
            self.encoding = "utf-8-sig"  # a byte-order mark is common and harmless

    def open(self) -> Iterator[str]:
        try:
            with self.path.open("r", encoding=self.encoding, newline="") as text:
                for number, line in enumerate(text, 1):
                    if "\x00" in line and self.encoding != "utf-16":
                        raise InputError(self.path, f"line {number}", "holds a NUL byte: this is not a text export")
                    yield line
        except UnicodeDecodeError:
            raise self._decoding_error() from None
        except OSError as exc:
            raise InputError(self.path, "", f"cannot be read ({exc.strerror})") from None

    def _decoding_error(self) -> InputError:
        # The text layer decodes in blocks, so the line of the first bad byte is found again here.
        # No silent fallback to cp1252: it decodes almost any bytes, so a wrong guess would turn
        # into wrong header names instead of an error. The shop states its encoding once.
        decoder = codecs.getincrementaldecoder(self.encoding)()
        name = "UTF-8" if self.encoding == "utf-8-sig" else self.encoding
        hint = ("; if the spectrometer writes Windows-1252 (ANSI), set encoding = \"cp1252\" in shop.toml "
                "[spectrometer]")
        with self.path.open("rb") as file:
            for number, raw in enumerate(file, 1):
                try:
                    decoder.decode(raw)
                except UnicodeDecodeError as exc:
                    return InputError(self.path, f"line {number}",
                                      f"byte 0x{exc.object[exc.start]:02X} is not {name} text{hint}")
        return InputError(self.path, "", f"is not {name} text{hint}")


class _Head:
    """The first lines of an export, kept while its layout is detected so its rows can be read again."""

    def __init__(self, lines: Iterator[str]) -> None:
        self._lines = lines
        self._kept: list[str] = []
        self.forced: str | None = None
        first = next(lines, None)
        if first is not None:
            first = first.lstrip("\ufeff")
            sep = _SEP_LINE.match(first.strip())
            if sep:
                # Spreadsheet programs write "sep=;" as a first line; keep the line count by leaving it blank.
                self.forced, first = sep.group(1), "\n"
            self._kept.append(first)

    def replay(self) -> Iterator[str]:
        """The lines from the top, reading (and keeping) more as they are needed."""
        position = 0
        while True:
            if position == len(self._kept):
                line = next(self._lines, None)
                if line is None:
                    return
                self._kept.append(line)
            yield self._kept[position]
            position += 1

    def rest(self) -> Iterator[str]:
        """Every line from the top once more, keeping none."""
        kept, self._kept = self._kept, []
        yield from kept
        yield from self._lines


_SEP_LINE = re.compile(r"^sep=(.)\s*$", re.IGNORECASE)
# An element header: "C", "%C", "Mn %", "Mn[%]", "N (ppm)", "S wt%"; the unit, if any, is checked later.
_ELEMENT_HEADER = re.compile(
    r"^(?:%\s*)?(?P<symbol>[A-Za-z]{1,2})\s*"
    r"(?:\[(?P<unit1>[^\]]*)\]|\((?P<unit2>[^)]*)\)|(?P<unit3>%|ppm|wt\.?\s*%))?$",
    re.IGNORECASE)


@dataclass(frozen=True)
class _Column:
    index: int
    name: str
    symbol: str
    ppm: bool


# The header is looked for in this many non-blank rows at the top (instrument preambles are a few
# lines): scanning a whole 50 MB export once per candidate separator cost most of its reading time.
_HEADER_SEARCH_ROWS = 200


def _rows(lines: Iterable[str], delimiter: str, source: object) -> Iterator[tuple[int, list[str]]]:
    """Non-blank rows with the file line each starts on, one at a time (an export may be large)."""
    reader = csv.reader(lines, delimiter=delimiter)
    line = 1
    try:
        for cells in reader:
            stripped = [cell.strip() for cell in cells]
            if any(stripped):
                yield line, stripped
            line = reader.line_num + 1
    except csv.Error as exc:
        raise InputError(source, f"line {reader.line_num}", f"cannot be split into cells ({exc})") from None


def _sample_index(cells: Sequence[str], layout: ExportLayout) -> int | None:
    wanted = (_key(layout.sample_column),) if layout.sample_column else _SAMPLE_NAMES
    for name in wanted:  # the first name of the list wins over a later generic "ID"
        for index, cell in enumerate(cells):
            if _key(cell) == name:
                return index
    return None


def _find_table(head: _Head, source: object, layout: ExportLayout) -> tuple[str, list[tuple[int, list[str]]], int, int]:
    """Pick the separator under which a header with a sample column appears near the top.

    Returns the separator, the rows up to the header, the header's position among them and the
    sample column's index.
    """
    candidates = [head.forced] if head.forced else ([layout.delimiter] if layout.delimiter else ["\t", ";", ","])
    best: tuple[int, str, list[tuple[int, list[str]]], int, int] | None = None
    any_rows = False
    for delimiter in candidates:
        rows = list(itertools.islice(_rows(head.replay(), delimiter, source), _HEADER_SEARCH_ROWS))
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


def _role_index(header: Sequence[str], configured: str | None, known: Sequence[str], setting: str,
                source: object) -> int | None:
    if configured:
        for index, cell in enumerate(header):
            if _key(cell) == _key(configured):
                return index
        raise InputError(source, "header", f"no column '{configured}' (shop.toml spectrometer.{setting})")
    for index, cell in enumerate(header):
        if _key(cell) in known:
            return index
    return None


def _element_columns(header: Sequence[str], taken: set[int], layout: ExportLayout, source: object
                     ) -> tuple[list[_Column], list[str]]:
    columns: list[_Column] = []
    ignored: list[str] = []
    seen: dict[str, str] = {}
    for index, name in enumerate(header):
        if index in taken or not name:
            continue
        key = _key(name)
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
            ppm = _unit_is_ppm(header_unit, source, where)
        else:
            ppm = layout.units_ppm.get(key, layout.units_ppm.get(_key(symbol), False))
        columns.append(_Column(index, name, symbol, ppm))
    if not columns:
        raise InputError(source, "header", "no element column found (headers such as 'C', 'Mn %', 'N ppm')")
    return columns, ignored


class _DecimalStyle:
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


def _read_cell(cell: str, column: _Column, decimals: _DecimalStyle, source: object, where: str) -> Reading | None:
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


class _Readings(Mapping[str, Reading]):
    """One burn's readings, held as plain numbers: a :class:`Reading` is made only when one is looked
    up (a big export holds millions of cells, and averaging needs only the numbers)."""

    __slots__ = ("pct", "below")

    def __init__(self, pct: dict[str, float], below: frozenset[str]) -> None:
        self.pct = pct
        """Element -> content [wt %]; read only."""
        self.below = below
        """Elements read below a detection limit (their ``pct`` is that limit)."""

    def __getitem__(self, symbol: str) -> Reading:
        return Reading(self.pct[symbol], symbol in self.below)

    def __iter__(self) -> Iterator[str]:
        return iter(self.pct)

    def __len__(self) -> int:
        return len(self.pct)

    def __repr__(self) -> str:
        return repr(dict(self.items()))


_NONE: frozenset[str] = frozenset()
# Cells joined by a character no export holds, so one pattern checks a whole row of plain numbers.
_JOIN = "\x1f"


def _plain_row(decimals: _DecimalStyle) -> re.Pattern[str] | None:
    """A row of plain numbers ("0.123", "12") in the file's decimal style, once that style is known:
    such a row needs none of the careful parser's cases (below-limit marks, units, blanks)."""
    style = decimals.configured or (decimals.first[0] if decimals.first else None)
    if style is None:
        return None
    plain = f"[0-9]+(?:{re.escape(style)}[0-9]+)?"
    return re.compile(f"{plain}(?:{_JOIN}{plain})*")


class _Burn(NamedTuple):
    label: str
    row: int
    readings: _Readings


@dataclass
class _RawSample:
    burns: list[_Burn] = field(default_factory=list)
    grade: str | None = None
    heat: str | None = None


# Samples are averaged this many at a time: the common case is checked for all of them at once.
_BATCH = 256

# Ids of samples already seen are remembered in a fixed table of this many bits (a Bloom filter):
# constant memory whatever the file's size; a rare false alarm only costs an entry in a small dict.
_SEEN_BITS = 1 << 20


def _scattered_ends(lines: Iterator[str], delimiter: str, header: Sequence[str], header_line: int,
                    sample_col: int, burn_col: int | None) -> dict[str, int]:
    """Samples whose burns are not all in one run of rows, with the line their last burn starts on.

    A sample sparked again after other samples is still one sample; knowing where such a sample
    ends lets the reader hand on every other sample as soon as its run of rows ends. The rows are
    skipped as the reader skips them; a row the reader rejects stops it there anyway.
    """
    seen = bytearray(_SEEN_BITS // 8)
    mask = _SEEN_BITS - 1
    ends: dict[str, int] = {}
    width = max(i for i, name in enumerate(header) if name) + 1
    current: str | None = None
    scattered = False
    reader = csv.reader(lines, delimiter=delimiter)
    line = 1
    try:
        for cells in reader:
            start, line = line, reader.line_num + 1
            if start <= header_line or len(cells) < width:
                continue
            sample_id = cells[sample_col].strip()
            if (not sample_id or _is_statistic(sample_id)
                    or (burn_col is not None and _is_statistic(cells[burn_col]))
                    or (sample_id == header[sample_col] and [c.strip() for c in cells[:width]] == header[:width])):
                continue
            if sample_id != current:
                current = sample_id
                digest = hash(sample_id)
                bits = (digest & mask, (digest >> 24) & mask)
                scattered = all(seen[b >> 3] & (1 << (b & 7)) for b in bits)
                for b in bits:
                    seen[b >> 3] |= 1 << (b & 7)
            if scattered:
                ends[sample_id] = start
    except csv.Error:
        pass  # the reader names the line when it gets there
    return ends


class SampleStream:
    """An export being read: what its header says at once, its samples one at a time.

    Iterate it once for the samples, in the order each first appears in the file. ``notes`` grows
    while reading and is complete when the samples are. Any problem raises an :class:`InputError`
    naming the row and column; a caller that must not act on half a file collects the samples first
    (:meth:`result`) or holds its output until the end (as ``meltfix import --json`` does).
    """

    def __init__(self, lines: _FileLines | _TextLines, source: object, layout: ExportLayout,
                 drop_flagged: bool) -> None:
        self.source = str(source)
        self._origin = source
        self._lines = lines
        self._layout = layout
        self._drop_flagged = drop_flagged
        self._head = _Head(lines.open())
        self._delimiter, rows, header_at, self._sample_col = _find_table(self._head, source, layout)
        self._header_line, header = rows[header_at]
        self._header = header
        self.notes: list[str] = []
        """What the reader skipped on purpose (preamble lines, the instrument's mean rows)."""
        if header_at:
            first, last = rows[0][0], self._header_line - 1
            self.notes.append(f"line {first} above the header was not read" if first == last
                              else f"lines {first}–{last} above the header were not read")
        self._burn_col = _role_index(header, layout.burn_column, _BURN_NAMES, "burn_column", source)
        self._grade_col = _role_index(header, layout.grade_column, _GRADE_NAMES, "grade_column", source)
        self._heat_col = _role_index(header, layout.heat_column, _HEAT_NAMES, "heat_column", source)
        taken = {i for i in (self._sample_col, self._burn_col, self._grade_col, self._heat_col) if i is not None}
        self._columns, ignored = _element_columns(header, taken, layout, source)
        self.elements = tuple(sorted((c.symbol for c in self._columns), key=element_sort_key))
        """Element columns of the file, in analysis-sheet order."""
        self.ignored_columns = tuple(ignored)
        """Headers that were not read (time, operator, iron balance, ...), as written."""
        self._curves = {symbol: layout.curve(symbol) for symbol in self.elements}
        self._symbols = tuple(c.symbol for c in self._columns)
        self._indices = tuple(c.index for c in self._columns)
        self._ppm_at = tuple(k for k, c in enumerate(self._columns) if c.ppm)
        self._gas_at = tuple(k for k, c in enumerate(self._columns) if c.symbol in PPM_ELEMENTS)
        self._decimals = _DecimalStyle(layout.decimal)
        self._plain = _plain_row(self._decimals)
        curves = [self._curves[symbol] for symbol in self._symbols]
        self._curve_arrays = tuple(np.array([getattr(c, name) for c in curves])
                                   for name in ("floor_pct", "factor", "relative"))
        self._batch: list[tuple[str, _RawSample]] = []
        self._started = False

    def result(self) -> ImportResult:
        """Every sample read, checked and averaged."""
        samples = tuple(self)
        return ImportResult(self.source, samples, self.elements, self.ignored_columns, tuple(self.notes))

    def __iter__(self) -> Iterator[SpectroSample]:
        if self._started:
            raise RuntimeError("an export stream is read once")
        self._started = True
        return self._samples()

    def _samples(self) -> Iterator[SpectroSample]:
        source, header, header_line = self._origin, self._header, self._header_line
        sample_col, burn_col, grade_col, heat_col = self._sample_col, self._burn_col, self._grade_col, self._heat_col
        ends = _scattered_ends(self._lines.open(), self._delimiter, header, header_line, sample_col, burn_col)
        # Trailing separators leave unnamed columns at the end of the header; rows may stop before them.
        width = max(i for i, name in enumerate(header) if name) + 1
        unnamed = any(not name for name in header)
        pending: OrderedDict[str, _RawSample] = OrderedDict()
        finished: set[str] = set()  # pending samples whose last burn has been read
        current: str | None = None
        last_line = 0
        for line, cells in _rows(self._head.rest(), self._delimiter, source):
            if line <= header_line:
                continue
            if len(cells) < width:
                raise InputError(source, f"row {line}", f"has {len(cells)} cells but the header (row {header_line}) "
                                 f"has {width}: a ragged row")
            if unnamed or len(cells) > len(header):
                for index, cell in enumerate(cells):
                    if cell and (index >= len(header) or not header[index]):
                        raise InputError(source, f"row {line}, cell {index + 1}",
                                         f"'{cell}' stands under no column header")
            sample_id = cells[sample_col]
            if sample_id == header[sample_col] and cells[:width] == header[:width]:
                # Instruments that append each session to one file write the header again.
                self.notes.append(f"row {line}: a repeated header was not read")
                continue
            burn_label = cells[burn_col] if burn_col is not None else ""
            if _is_statistic(sample_id) or _is_statistic(burn_label):
                self.notes.append(f"row {line}: the instrument's '{burn_label or sample_id}' row was not read "
                                  "(meltfix averages the burns itself)")
                continue
            if not sample_id:
                raise InputError(source, f"row {line}, column '{header[sample_col]}'", "no sample id")
            if sample_id != current:
                if current is not None and ends.get(current, 0) <= last_line:
                    finished.add(current)
                    yield from self._release(pending, finished)
                current = sample_id
            readings = self._read_row(cells, line)
            raw = pending.get(sample_id)
            if raw is None:
                raw = pending[sample_id] = _RawSample()
            raw.burns.append(_Burn(burn_label or str(len(raw.burns) + 1), line, readings))
            if grade_col is not None and cells[grade_col] and raw.grade is None:
                raw.grade = cells[grade_col]
            if heat_col is not None and cells[heat_col] and raw.heat is None:
                raw.heat = cells[heat_col]
            last_line = line
        if current is None:
            raise InputError(source, f"row {header_line}", "the header is not followed by any burn")
        finished.update(pending)
        yield from self._release(pending, finished, last=True)

    def _release(self, pending: OrderedDict[str, _RawSample], finished: set[str], *,
                 last: bool = False) -> Iterator[SpectroSample]:
        """Hand on the finished samples at the front: samples leave in the order they first appeared,
        built a batch at a time (``last``: the file has ended, build what is left)."""
        while pending:
            sample_id = next(iter(pending))
            if sample_id not in finished:
                break
            finished.discard(sample_id)
            self._batch.append((sample_id, pending.pop(sample_id)))
            if len(self._batch) == _BATCH:
                yield from self._build_batch()
        if last:
            yield from self._build_batch()

    def _build_batch(self) -> list[SpectroSample]:
        batch, self._batch = self._batch, []
        quick = self._calm(batch)
        return [self._quick_sample(sample_id, raw, quick[k]) if k in quick
                else _build_sample(sample_id, raw, self._curves, self.elements, self._origin, self._drop_flagged)
                for k, (sample_id, raw) in enumerate(batch)]

    def _calm(self, batch: Sequence[tuple[str, _RawSample]]) -> dict[int, list[float]]:
        """The samples of a batch that need none of the careful checks, with their mean contents in
        column order: two or more burns, each with every element quantified, no repeated burn label,
        and in every element a spread within the repeatability limit at the lowest burn. The limit
        grows with the content and no burn is farther from any middle value than the spread, so such
        a sample cannot be flagged (the careful check, :func:`_find_disagreement`, would agree)."""
        width = len(self._symbols)
        candidates = [k for k, (_, raw) in enumerate(batch)
                      if len(raw.burns) >= 2 and len({b.label for b in raw.burns}) == len(raw.burns)
                      and all(len(b.readings.pct) == width and not b.readings.below for b in raw.burns)]
        if not candidates:
            return {}
        counts = [len(batch[k][1].burns) for k in candidates]
        values = np.array([list(b.readings.pct.values()) for k in candidates for b in batch[k][1].burns])
        starts = np.cumsum([0, *counts[:-1]])
        lowest = np.minimum.reduceat(values, starts, axis=0)
        spread = np.maximum.reduceat(values, starts, axis=0) - lowest
        floor, factor, relative = self._curve_arrays
        limit = np.maximum(np.maximum(floor, factor * np.sqrt(lowest)), relative * lowest)
        calm = (spread <= limit).all(axis=1)
        # Two burns: their sum is the correctly rounded one math.fsum gives; more: fsum itself.
        halves = (np.add.reduceat(values, starts, axis=0) / 2).tolist()
        means: dict[int, list[float]] = {}
        for position, k in enumerate(candidates):
            if calm[position]:
                if counts[position] == 2:
                    means[k] = halves[position]
                else:
                    burns = batch[k][1].burns
                    means[k] = [math.fsum(column) / len(burns) for column in zip(*(b.readings.pct.values() for b in burns))]
        return means

    def _quick_sample(self, sample_id: str, raw: _RawSample, means: list[float]) -> SpectroSample:
        # Rounded as _mean_reading rounds.
        pct = {symbol: round(mean, 10) for symbol, mean in zip(self._symbols, means)}
        burns = tuple(Burn(b.label, b.row, b.readings) for b in raw.burns)
        return SpectroSample(sample_id, burns, Analysis(pct=pct), (), raw.grade, raw.heat)

    def _read_row(self, cells: Sequence[str], line: int) -> _Readings:
        texts = [cells[i] for i in self._indices]
        if self._plain is not None:
            joined = _JOIN.join(texts)
            if self._plain.fullmatch(joined):
                # The same float() of the same text the careful parser would reach, and its checks.
                values = [float(text) for text in joined.replace(",", ".").split(_JOIN)]
                for k in self._ppm_at:
                    values[k] /= PPM_PER_PCT
                if max(values) <= 100 and all(values[k] < 1.0 for k in self._gas_at):
                    pct = dict(zip(self._symbols, values))
                    self._check_total(pct, line)
                    return _Readings(pct, _NONE)
        pct = {}
        below: set[str] = set()
        for column in self._columns:
            where = f"row {line}, column '{column.name}'"
            reading = _read_cell(cells[column.index], column, self._decimals, self._origin, where)
            if reading is not None:
                pct[column.symbol] = reading.pct
                if reading.below_limit:
                    below.add(column.symbol)
        self._check_total(pct, line)
        if self._plain is None:
            self._plain = _plain_row(self._decimals)
        return _Readings(pct, frozenset(below) if below else _NONE)

    def _check_total(self, pct: dict[str, float], line: int) -> None:
        total = math.fsum(pct.values())
        if total > 100:
            raise InputError(self._origin, f"row {line}", f"the elements add up to {total:.3f} %, over 100 %")


# ---------------------------------------------------------------------------------------------
# Checking and averaging the burns of one sample


@dataclass(frozen=True)
class _Disagreement:
    symbol: str
    burns: tuple[int, ...]
    """Positions in the sample's burn list."""
    singled_out: bool
    """True when ``burns`` holds the one burn that disagrees (it may be left out of the mean)."""
    message: str


def _find_disagreement(symbol: str, burns: Sequence[Burn], curve: RepeatabilityCurve) -> _Disagreement | None:
    """Apply the repeatability check to one element of one sample.

    Two burns: they disagree when |b1 - b2| > r at their mean; nothing tells which is wrong.
    Three or more: the burn farthest from the median of the others is the outlier when that
    distance exceeds r at that median. Burns below a detection limit have no measured value and
    take no part, except that one reading "<L" against others averaging q is a disagreement when
    q - L > r.
    """
    quantified = [(i, b.readings[symbol].pct) for i, b in enumerate(burns)
                  if symbol in b.readings and not b.readings[symbol].below_limit]
    bounded = [(i, b.readings[symbol].pct) for i, b in enumerate(burns)
               if symbol in b.readings and b.readings[symbol].below_limit]

    def fmt(pct: float) -> str:
        return format_content(symbol, pct)

    def label(positions: Sequence[int]) -> str:
        names = [burns[i].label for i in positions]
        return ("burn " if len(names) == 1 else "burns ") + ", ".join(names[:-1]) + \
            (" and " if len(names) > 1 else "") + names[-1]

    if len(quantified) == 2:
        (i, a), (j, b) = quantified
        limit = curve.limit_pct((a + b) / 2)
        if abs(a - b) > limit:
            return _Disagreement(symbol, (i, j), False, f"{symbol}: {label((i, j))} differ by "
                                 f"{fmt(abs(a - b))} (repeatability limit {fmt(limit)}); spark a third burn "
                                 "to tell which is wrong")
    elif len(quantified) >= 3:
        spread = []
        for k, (i, value) in enumerate(quantified):
            reference = statistics.median(v for m, (_, v) in enumerate(quantified) if m != k)
            spread.append((abs(value - reference), i, value, reference))
        farthest = max(spread)[0]
        worst = [s for s in spread if math.isclose(s[0], farthest, rel_tol=1e-9, abs_tol=1e-12)]
        if len(worst) == 1:
            distance, i, value, reference = worst[0]
            limit = curve.limit_pct(reference)
            if distance > limit:
                return _Disagreement(symbol, (i,), True, f"{symbol}: {label((i,))} reads {fmt(value)}, "
                                     f"{fmt(distance)} from the others' median {fmt(reference)} "
                                     f"(repeatability limit {fmt(limit)}); spark a fresh burn")
        else:
            limit = curve.limit_pct(statistics.median(v for _, v in quantified))
            if farthest > limit:
                tied = tuple(sorted(s[1] for s in worst))
                return _Disagreement(symbol, tied, False, f"{symbol}: {label(tied)} are equally far "
                                     f"({fmt(farthest)}) from the others (repeatability limit {fmt(limit)}); "
                                     "spark again")
    if quantified and bounded:
        mean = math.fsum(v for _, v in quantified) / len(quantified)
        bound = max(v for _, v in bounded)
        limit = curve.limit_pct(mean)
        if mean - bound > limit:
            positions = tuple(i for i, _ in bounded)
            return _Disagreement(symbol, positions, False, f"{symbol}: {label(positions)} "
                                 f"{'reads' if len(positions) == 1 else 'read'} below {fmt(bound)} but the other "
                                 f"burns average {fmt(mean)}; spark again")
    return None


def _mean_reading(quantified: Sequence[float], bounds: Sequence[float]) -> Reading:
    """Average per the module's rule for values below a detection limit."""
    # Rounded to 1e-10 wt % (1e-6 ppm) so binary noise such as 0.007350000000000001 never reaches a file.
    measured = round(math.fsum(quantified) / len(quantified), 10) if quantified else 0.0
    if not bounds:
        return Reading(measured)
    return Reading(max(max(bounds), measured), below_limit=True)


def _build_sample(sample_id: str, raw: _RawSample, curves: Mapping[str, RepeatabilityCurve], order: Sequence[str],
                  source: object, drop_flagged: bool) -> SpectroSample:
    # A sample sparked again later restarts its burn numbers: name repeated ones by their row too.
    repeated = Counter(b.label for b in raw.burns)
    labels = [f"{b.label} (row {b.row})" if repeated[b.label] > 1 else b.label for b in raw.burns]
    lines = [b.row for b in raw.burns]
    if len(lines) == 1:
        rows = f"row {lines[0]}"
    elif lines == list(range(lines[0], lines[-1] + 1)):
        rows = f"rows {lines[0]}–{lines[-1]}"
    else:
        rows = "rows " + ", ".join(map(str, lines))
    usable = [k for k, b in enumerate(raw.burns) if b.readings]
    if not usable:
        raise InputError(source, f"sample '{sample_id}' ({rows})",
                         "has no usable burn: every element cell is blank")
    flags: list[str] = [f"burn {labels[k]} (row {b.row}) has no values and is not counted"
                        for k, b in enumerate(raw.burns) if not b.readings]
    readings = [raw.burns[k].readings for k in usable]
    symbols = [s for s in order if any(s in r.pct for r in readings)]
    probe: list[Burn] | None = None
    outlier: dict[int, set[str]] = {}
    disputed: dict[int, set[str]] = {}
    for symbol in symbols:
        curve = curves[symbol]
        if not any(symbol in r.below for r in readings):
            values = [r.pct[symbol] for r in readings if symbol in r.pct]
            lowest = min(values)
            # No burn is farther from any middle value than the spread, and the limit grows with the
            # content: a spread within the limit at the lowest reading cannot be a disagreement.
            if len(values) < 2 or max(values) - lowest <= curve.limit_pct(lowest):
                continue
        if probe is None:
            probe = [Burn(labels[k], raw.burns[k].row, raw.burns[k].readings) for k in usable]
        found = _find_disagreement(symbol, probe, curve)
        if found is None:
            continue
        flags.append(found.message)
        target = outlier if found.singled_out else disputed
        for position in found.burns:
            target.setdefault(position, set()).add(symbol)

    left_out = set(outlier) if drop_flagged else set()
    for position in sorted(left_out):
        elements = ", ".join(sorted(outlier[position], key=element_sort_key))
        flags.append(f"burn {labels[usable[position]]} left out of the mean (flagged in {elements})")
    accepted = [r for position, r in enumerate(readings) if position not in left_out]
    if not accepted:
        raise InputError(source, f"sample '{sample_id}' ({rows})",
                         "every burn was flagged and left out; spark the sample again")
    if len(accepted) == 1:
        flags.append("only one burn: repeatability not checked; spark a second burn")

    pct: dict[str, float] = {}
    below: set[str] = set()
    for symbol in symbols:
        present = [r for r in accepted if symbol in r.pct]
        if not present:
            continue
        if len(present) < len(accepted):
            flags.append(f"{symbol}: read in {len(present)} of {len(accepted)} burns; the mean uses those")
        mean = _mean_reading([r.pct[symbol] for r in present if symbol not in r.below],
                             [r.pct[symbol] for r in present if symbol in r.below])
        pct[symbol] = mean.pct
        if mean.below_limit:
            below.add(symbol)
    position_of = {k: position for position, k in enumerate(usable)}
    burns = []
    for k, b in enumerate(raw.burns):
        at = position_of.get(k)
        if at is None:
            burns.append(Burn(labels[k], b.row, b.readings, accepted=False))
        else:
            burns.append(Burn(labels[k], b.row, b.readings, frozenset(outlier.get(at, _NONE)),
                              frozenset(disputed.get(at, _NONE)), accepted=at not in left_out))
    return SpectroSample(sample_id, tuple(burns), Analysis(pct=pct, below_limit=frozenset(below)), tuple(flags),
                         raw.grade, raw.heat)
