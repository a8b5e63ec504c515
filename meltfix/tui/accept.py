"""Accepting a plan: the sample it answers goes into the logbook first, then the plan itself.

Without its samples a heat recorded from the screen could not be replayed
(``meltfix.records.heat_record.record_from_history`` starts from the first sample). Free of Textual, like
``draft.py``, so the rules are plain functions.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime
from itertools import count
from typing import TYPE_CHECKING

from meltfix.base.errors import InputError
from meltfix.plan.result import Plan
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat

if TYPE_CHECKING:
    from meltfix.readers.samples import SpectroSample
    from meltfix.records.logbook import Logbook, SampleRecord


@dataclass(frozen=True)
class Accepted:
    """What accepting a plan wrote to the logbook."""

    plan_id: int
    sample_id: str
    """The sample the plan answers: just recorded, or recorded before with the same analysis."""
    sample_is_new: bool


def record_accepted(records: Logbook, heat: Heat, plan: Plan, imported: SpectroSample | None = None,
                    when: datetime | None = None) -> Accepted:
    """Record the heat's sample (unless already recorded), then the plan, both at ``when``.

    ``imported`` is the spectrometer sample the analysis on screen came from: recorded with its
    burns under its own id. A typed analysis is recorded as sample "S<n>", the heat's n-th (the
    way the shop's recorded heats number them; ids are unique within a heat). A sample whose
    analysis is already recorded for the heat is that sample, not a new one, so accepting again
    for unchanged inputs records only the new plan.
    """
    when = datetime.now() if when is None else when
    analysis = heat.analysis if imported is None else imported.analysis
    recorded = _recorded_samples(records, heat.heat_id)
    same = next((s for s in recorded if _same_analysis(s.analysis, analysis)), None)
    if same is not None:
        return Accepted(records.record_plan(heat, plan, when), same.sample_id, sample_is_new=False)
    # The logbook picks the first id still free when it writes: another station accepting for the
    # same heat at the same moment may have taken the one this screen saw as next.
    if imported is None:
        first = len(recorded) + 1
        sample_id = records.record_sample(heat.heat_id, f"S{first}", analysis, when=when,
                                          temperature_c=heat.temperature_c,
                                          if_taken=(f"S{n}" for n in count(first + 1)))
    else:
        # Spectrometers restart their numbering; another sample of this heat may hold the id already.
        sample_id = records.record_spectro_sample(heat.heat_id, imported, when, temperature_c=heat.temperature_c,
                                                  if_taken=(f"{imported.sample_id}-{k}" for k in count(2)))
    return Accepted(records.record_plan(heat, plan, when), sample_id, sample_is_new=True)


def _recorded_samples(records: Logbook, heat_id: str) -> tuple[SampleRecord, ...]:
    try:
        return records.heat_history(heat_id).samples
    except InputError:
        # The heat is not in the logbook yet. A logbook that cannot be read at all fails again,
        # with its own message, on the write that follows.
        return ()


def _same_analysis(a: Analysis, b: Analysis) -> bool:
    return dict(a.pct) == dict(b.pct) and a.below_limit == b.below_limit
