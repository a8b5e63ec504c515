"""The burns of one sample checked against each other and averaged into one analysis.

Repeatability rule: two burns disagree when |b1 - b2| > r at their mean (nothing tells which is
wrong); of three or more, the burn farthest from the median of the others is the outlier when that
distance exceeds r at that median. Averaging rule for values below a detection limit, per element
over the accepted burns: all burns quantified -> arithmetic mean; all below a limit -> upper bound
at the largest limit; some of each -> upper bound at the larger of the largest limit and the mean
of the quantified burns, so the bound is never lower than what was actually measured (the planner
reads it as "at most").
"""

from __future__ import annotations

import math
import statistics
from collections import Counter
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

from meltfix.base.errors import InputError
from meltfix.plan.numbers import content_text, with_unit
from meltfix.readers.samples import NO_ELEMENTS, Burn, RawSample, Readings, SpectroSample
from meltfix.shop.analysis import Analysis, Reading
from meltfix.shop.elements import element_sort_key
from meltfix.shop.repeatability import RepeatabilityCurve


@dataclass(frozen=True)
class Disagreement:
    symbol: str
    burns: tuple[int, ...]
    """Positions in the sample's burn list."""
    singled_out: bool
    """True when ``burns`` holds the one burn that disagrees (it may be left out of the mean)."""
    message: str


def _fmt(symbol: str, pct: float) -> str:
    return with_unit(symbol, content_text(symbol, pct))


def _burn_names(burns: Sequence[Burn], positions: Sequence[int]) -> str:
    """"burn 2", "burns 1 and 3", "burns 1, 2 and 4"."""
    names = [burns[i].label for i in positions]
    return ("burn " if len(names) == 1 else "burns ") + ", ".join(names[:-1]) + \
        (" and " if len(names) > 1 else "") + names[-1]


def find_disagreement(symbol: str, burns: Sequence[Burn], curve: RepeatabilityCurve) -> Disagreement | None:
    """Apply the repeatability check to one element of one sample.

    Burns below a detection limit have no measured value and take no part, except that one reading
    "<L" against others averaging q is a disagreement when q - L > r.
    """
    quantified = [(i, b.readings[symbol].pct) for i, b in enumerate(burns)
                  if symbol in b.readings and not b.readings[symbol].below_limit]
    bounded = [(i, b.readings[symbol].pct) for i, b in enumerate(burns)
               if symbol in b.readings and b.readings[symbol].below_limit]
    found = None
    if len(quantified) == 2:
        found = _pair_disagreement(symbol, burns, quantified, curve)
    elif len(quantified) >= 3:
        found = _farthest_disagreement(symbol, burns, quantified, curve)
    if found is None and quantified and bounded:
        found = _bound_disagreement(symbol, burns, quantified, bounded, curve)
    return found


def _pair_disagreement(symbol: str, burns: Sequence[Burn], quantified: Sequence[tuple[int, float]],
                       curve: RepeatabilityCurve) -> Disagreement | None:
    (i, a), (j, b) = quantified
    limit = curve.limit_pct((a + b) / 2)
    if abs(a - b) <= limit:
        return None
    return Disagreement(symbol, (i, j), False, f"{symbol}: {_burn_names(burns, (i, j))} differ by "
                        f"{_fmt(symbol, abs(a - b))} (repeatability limit {_fmt(symbol, limit)}); spark a third "
                        "burn to tell which is wrong")


def _farthest_disagreement(symbol: str, burns: Sequence[Burn], quantified: Sequence[tuple[int, float]],
                           curve: RepeatabilityCurve) -> Disagreement | None:
    spread = []
    for k, (i, value) in enumerate(quantified):
        reference = statistics.median(v for m, (_, v) in enumerate(quantified) if m != k)
        spread.append((abs(value - reference), i, value, reference))
    farthest = max(spread)[0]
    worst = [s for s in spread if math.isclose(s[0], farthest, rel_tol=1e-9, abs_tol=1e-12)]
    if len(worst) == 1:
        distance, i, value, reference = worst[0]
        limit = curve.limit_pct(reference)
        if distance <= limit:
            return None
        return Disagreement(symbol, (i,), True, f"{symbol}: {_burn_names(burns, (i,))} reads {_fmt(symbol, value)}, "
                            f"{_fmt(symbol, distance)} from the others' median {_fmt(symbol, reference)} "
                            f"(repeatability limit {_fmt(symbol, limit)}); spark a fresh burn")
    limit = curve.limit_pct(statistics.median(v for _, v in quantified))
    if farthest <= limit:
        return None
    tied = tuple(sorted(s[1] for s in worst))
    return Disagreement(symbol, tied, False, f"{symbol}: {_burn_names(burns, tied)} are equally far "
                        f"({_fmt(symbol, farthest)}) from the others (repeatability limit {_fmt(symbol, limit)}); "
                        "spark again")


def _bound_disagreement(symbol: str, burns: Sequence[Burn], quantified: Sequence[tuple[int, float]],
                        bounded: Sequence[tuple[int, float]], curve: RepeatabilityCurve) -> Disagreement | None:
    mean = math.fsum(v for _, v in quantified) / len(quantified)
    bound = max(v for _, v in bounded)
    if mean - bound <= curve.limit_pct(mean):
        return None
    positions = tuple(i for i, _ in bounded)
    return Disagreement(symbol, positions, False, f"{symbol}: {_burn_names(burns, positions)} "
                        f"{'reads' if len(positions) == 1 else 'read'} below {_fmt(symbol, bound)} "
                        f"but the other burns average {_fmt(symbol, mean)}; spark again")


def mean_reading(quantified: Sequence[float], bounds: Sequence[float]) -> Reading:
    """Average per the module's rule for values below a detection limit."""
    # Rounded to 1e-10 wt % (1e-6 ppm) so binary noise such as 0.007350000000000001 never reaches a file.
    measured = round(math.fsum(quantified) / len(quantified), 10) if quantified else 0.0
    if not bounds:
        return Reading(measured)
    return Reading(max(max(bounds), measured), below_limit=True)


def build_sample(sample_id: str, raw: RawSample, curves: Mapping[str, RepeatabilityCurve], order: Sequence[str],
                 source: object, drop_flagged: bool) -> SpectroSample:
    """Check the burns of one sample against each other and average the accepted ones."""
    # A sample sparked again later restarts its burn numbers: name repeated ones by their row too.
    repeated = Counter(b.label for b in raw.burns)
    labels = [f"{b.label} (row {b.row})" if repeated[b.label] > 1 else b.label for b in raw.burns]
    usable = [k for k, b in enumerate(raw.burns) if b.readings]
    if not usable:
        raise InputError(source, f"sample '{sample_id}' ({_rows_text(raw)})",
                         "has no usable burn: every element cell is blank")
    flags: list[str] = [f"burn {labels[k]} (row {b.row}) has no values and is not counted"
                        for k, b in enumerate(raw.burns) if not b.readings]
    readings = [raw.burns[k].readings for k in usable]
    symbols = [s for s in order if any(s in r.pct for r in readings)]
    outlier, disputed = _disagreements(raw, labels, usable, symbols, curves, flags)

    left_out = set(outlier) if drop_flagged else set()
    for position in sorted(left_out):
        elements = ", ".join(sorted(outlier[position], key=element_sort_key))
        flags.append(f"burn {labels[usable[position]]} left out of the mean (flagged in {elements})")
    accepted = [r for position, r in enumerate(readings) if position not in left_out]
    if not accepted:
        raise InputError(source, f"sample '{sample_id}' ({_rows_text(raw)})",
                         "every burn was flagged and left out; spark the sample again")
    if len(accepted) == 1:
        flags.append("only one burn: repeatability not checked; spark a second burn")
    analysis = _average(accepted, symbols, flags)

    position_of = {k: position for position, k in enumerate(usable)}
    burns = []
    for k, b in enumerate(raw.burns):
        at = position_of.get(k)
        if at is None:
            burns.append(Burn(labels[k], b.row, b.readings, accepted=False))
        else:
            burns.append(Burn(labels[k], b.row, b.readings, frozenset(outlier.get(at, NO_ELEMENTS)),
                              frozenset(disputed.get(at, NO_ELEMENTS)), accepted=at not in left_out))
    return SpectroSample(sample_id, tuple(burns), analysis, tuple(flags), raw.grade, raw.heat)


def _rows_text(raw: RawSample) -> str:
    """The rows a sample was read from: "row 4", "rows 4–6", "rows 4, 9"."""
    lines = [b.row for b in raw.burns]
    if len(lines) == 1:
        return f"row {lines[0]}"
    if lines == list(range(lines[0], lines[-1] + 1)):
        return f"rows {lines[0]}–{lines[-1]}"
    return "rows " + ", ".join(map(str, lines))


def _disagreements(raw: RawSample, labels: Sequence[str], usable: Sequence[int], symbols: Sequence[str],
                   curves: Mapping[str, RepeatabilityCurve], flags: list[str]
                   ) -> tuple[dict[int, set[str]], dict[int, set[str]]]:
    """The burns singled out and the burns in a dispute, by position among the usable burns, per
    element; each disagreement's message goes onto ``flags``."""
    readings = [raw.burns[k].readings for k in usable]
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
        found = find_disagreement(symbol, probe, curve)
        if found is None:
            continue
        flags.append(found.message)
        target = outlier if found.singled_out else disputed
        for position in found.burns:
            target.setdefault(position, set()).add(symbol)
    return outlier, disputed


def _average(accepted: Sequence[Readings], symbols: Sequence[str], flags: list[str]) -> Analysis:
    """The mean of the accepted burns per element (the module's rule for values below a limit)."""
    pct: dict[str, float] = {}
    below: set[str] = set()
    for symbol in symbols:
        present = [r for r in accepted if symbol in r.pct]
        if not present:
            continue
        if len(present) < len(accepted):
            flags.append(f"{symbol}: read in {len(present)} of {len(accepted)} burns; the mean uses those")
        mean = mean_reading([r.pct[symbol] for r in present if symbol not in r.below],
                            [r.pct[symbol] for r in present if symbol in r.below])
        pct[symbol] = mean.pct
        if mean.below_limit:
            below.add(symbol)
    return Analysis(pct=pct, below_limit=frozenset(below))
