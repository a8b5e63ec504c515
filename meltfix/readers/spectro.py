"""Spectrometer exports: burns read, checked against each other and averaged into one analysis per sample.

An export is a CSV or TSV table, one row per burn (spark), with a column naming the sample. The
reader accepts what instruments actually write: comma, semicolon or tab separators, a decimal
point or a decimal comma, a UTF-8 byte-order mark, blank cells, "<0.001" below a detection limit,
element headers such as ``C``, ``Mn %``, ``Mn[%]``, ``N ppm``, preamble lines above the header and
the instrument's own mean rows. A shop's own layout comes from ``[spectrometer]`` in ``shop.toml``
(:mod:`meltfix.readers.export_layout`). Any problem rejects the whole file with one :class:`InputError`
naming the row (the line of the file) and the column: nothing is half-imported.

This module reads the rows as a stream and hands on samples; the lines of the file are in
:mod:`~meltfix.readers.export_lines`, the header and cells in :mod:`~meltfix.readers.export_table`,
the check and the mean of one sample's burns in :mod:`~meltfix.readers.burns` and what is handed on
in :mod:`~meltfix.readers.samples`.
"""

from __future__ import annotations

import csv
import math
from collections import OrderedDict
from collections.abc import Iterator, Sequence
from pathlib import Path

import numpy as np

from meltfix.base.errors import InputError
from meltfix.readers.burns import build_sample
from meltfix.readers.export_layout import ExportLayout
from meltfix.readers.export_lines import FileLines, Head, TextLines, read_rows
from meltfix.readers.export_table import (BURN_NAMES, GRADE_NAMES, HEAT_NAMES, JOIN, DecimalStyle, element_columns,
                                          find_table, is_statistic, plain_row, read_cell, role_index)
from meltfix.readers.samples import NO_ELEMENTS, Burn, ImportResult, RawBurn, RawSample, Readings, SpectroSample
from meltfix.shop.analysis import Analysis
from meltfix.shop.elements import PPM_ELEMENTS, PPM_PER_PCT, element_sort_key
from meltfix.shop.settings import ShopSettings

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
    return SampleStream(FileLines(path, layout.encoding), path, layout, drop_flagged)


def parse_export(body: str, source: object, layout: ExportLayout | None = None, *,
                 drop_flagged: bool = False) -> ImportResult:
    """Parse the text of an export (see :func:`read_export`)."""
    return SampleStream(TextLines(body), source, layout or ExportLayout(), drop_flagged).result()


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
            if (not sample_id or is_statistic(sample_id)
                    or (burn_col is not None and is_statistic(cells[burn_col]))
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

    def __init__(self, lines: FileLines | TextLines, source: object, layout: ExportLayout,
                 drop_flagged: bool) -> None:
        self.source = str(source)
        self._origin = source
        self._lines = lines
        self._layout = layout
        self._drop_flagged = drop_flagged
        self._head = Head(lines.open())
        self._delimiter, rows, header_at, self._sample_col = find_table(self._head, source, layout)
        self._header_line, header = rows[header_at]
        self._header = header
        self.notes: list[str] = []
        """What the reader skipped on purpose (preamble lines, the instrument's mean rows)."""
        if header_at:
            first, last = rows[0][0], self._header_line - 1
            self.notes.append(f"line {first} above the header was not read" if first == last
                              else f"lines {first}–{last} above the header were not read")
        self._burn_col = role_index(header, layout.burn_column, BURN_NAMES, "burn_column", source)
        self._grade_col = role_index(header, layout.grade_column, GRADE_NAMES, "grade_column", source)
        self._heat_col = role_index(header, layout.heat_column, HEAT_NAMES, "heat_column", source)
        taken = {i for i in (self._sample_col, self._burn_col, self._grade_col, self._heat_col) if i is not None}
        self._columns, ignored = element_columns(header, taken, layout, source)
        self.elements = tuple(sorted((c.symbol for c in self._columns), key=element_sort_key))
        """Element columns of the file, in analysis-sheet order."""
        self.ignored_columns = tuple(ignored)
        """Headers that were not read (time, operator, iron balance, ...), as written."""
        self._curves = {symbol: layout.curve(symbol) for symbol in self.elements}
        self._symbols = tuple(c.symbol for c in self._columns)
        self._indices = tuple(c.index for c in self._columns)
        self._ppm_at = tuple(k for k, c in enumerate(self._columns) if c.ppm)
        self._gas_at = tuple(k for k, c in enumerate(self._columns) if c.symbol in PPM_ELEMENTS)
        self._decimals = DecimalStyle(layout.decimal)
        self._plain = plain_row(self._decimals)
        curves = [self._curves[symbol] for symbol in self._symbols]
        self._curve_arrays = tuple(np.array([getattr(c, name) for c in curves])
                                   for name in ("floor_pct", "factor", "relative"))
        self._batch: list[tuple[str, RawSample]] = []
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
        pending: OrderedDict[str, RawSample] = OrderedDict()
        finished: set[str] = set()  # pending samples whose last burn has been read
        current: str | None = None
        last_line = 0
        for line, cells in read_rows(self._head.rest(), self._delimiter, source):
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
            if is_statistic(sample_id) or is_statistic(burn_label):
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
                raw = pending[sample_id] = RawSample()
            raw.burns.append(RawBurn(burn_label or str(len(raw.burns) + 1), line, readings))
            if grade_col is not None and cells[grade_col] and raw.grade is None:
                raw.grade = cells[grade_col]
            if heat_col is not None and cells[heat_col] and raw.heat is None:
                raw.heat = cells[heat_col]
            last_line = line
        if current is None:
            raise InputError(source, f"row {header_line}", "the header is not followed by any burn")
        finished.update(pending)
        yield from self._release(pending, finished, last=True)

    def _release(self, pending: OrderedDict[str, RawSample], finished: set[str], *,
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
                else build_sample(sample_id, raw, self._curves, self.elements, self._origin, self._drop_flagged)
                for k, (sample_id, raw) in enumerate(batch)]

    def _calm(self, batch: Sequence[tuple[str, RawSample]]) -> dict[int, list[float]]:
        """The samples of a batch that need none of the careful checks, with their mean contents in
        column order: two or more burns, each with every element quantified, no repeated burn label,
        and in every element a spread within the repeatability limit at the lowest burn. The limit
        grows with the content and no burn is farther from any middle value than the spread, so such
        a sample cannot be flagged (the careful check, :func:`find_disagreement`, would agree)."""
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

    def _quick_sample(self, sample_id: str, raw: RawSample, means: list[float]) -> SpectroSample:
        # Rounded as mean_reading rounds.
        pct = {symbol: round(mean, 10) for symbol, mean in zip(self._symbols, means)}
        burns = tuple(Burn(b.label, b.row, b.readings) for b in raw.burns)
        return SpectroSample(sample_id, burns, Analysis(pct=pct), (), raw.grade, raw.heat)

    def _read_row(self, cells: Sequence[str], line: int) -> Readings:
        texts = [cells[i] for i in self._indices]
        if self._plain is not None:
            joined = JOIN.join(texts)
            if self._plain.fullmatch(joined):
                # The same float() of the same text the careful parser would reach, and its checks.
                values = [float(text) for text in joined.replace(",", ".").split(JOIN)]
                for k in self._ppm_at:
                    values[k] /= PPM_PER_PCT
                if max(values) <= 100 and all(values[k] < 1.0 for k in self._gas_at):
                    pct = dict(zip(self._symbols, values))
                    self._check_total(pct, line)
                    return Readings(pct, NO_ELEMENTS)
        pct = {}
        below: set[str] = set()
        for column in self._columns:
            where = f"row {line}, column '{column.name}'"
            reading = read_cell(cells[column.index], column, self._decimals, self._origin, where)
            if reading is not None:
                pct[column.symbol] = reading.pct
                if reading.below_limit:
                    below.add(column.symbol)
        self._check_total(pct, line)
        if self._plain is None:
            self._plain = plain_row(self._decimals)
        return Readings(pct, frozenset(below) if below else NO_ELEMENTS)

    def _check_total(self, pct: dict[str, float], line: int) -> None:
        total = math.fsum(pct.values())
        if total > 100:
            raise InputError(self._origin, f"row {line}", f"the elements add up to {total:.3f} %, over 100 %")


