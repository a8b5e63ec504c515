"""What an export reader hands on: the burns of a sample, as read and as checked, and the samples of a file."""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from dataclasses import dataclass, field
from typing import NamedTuple

from meltfix.shop.analysis import Analysis, Reading


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


# ---------------------------------------------------------------------------------------------
# Burns as read, before they are checked


class Readings(Mapping[str, Reading]):
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


NO_ELEMENTS: frozenset[str] = frozenset()


class RawBurn(NamedTuple):
    label: str
    row: int
    readings: Readings


@dataclass
class RawSample:
    burns: list[RawBurn] = field(default_factory=list)
    grade: str | None = None
    heat: str | None = None


