"""Accepting a plan: the sample it answers goes into the logbook first, then the plan itself.

Without its samples a heat recorded from the screen could not be replayed
(``meltfix.replay.record_from_history`` starts from the first sample). Free of Textual, like
``draft.py``, so the rules are plain functions.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import datetime
from itertools import chain, count
from typing import TYPE_CHECKING

from meltfix.analysis import Analysis
from meltfix.errors import InputError
from meltfix.heat import Heat

if TYPE_CHECKING:  # types only: the screen opens the logbook, and the planner pulls in SciPy
    from meltfix.logbook import Logbook, SampleRecord
    from meltfix.planner import Plan
    from meltfix.spectro import SpectroSample


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
    from meltfix.logbook import SampleTaken

    when = datetime.now() if when is None else when
    analysis = heat.analysis if imported is None else imported.analysis
    # Another station accepting for the same heat may take the sample number chosen here between
    # the read and the write: the logbook's unique constraint refuses the second, which numbers again.
    for attempt in range(_SAMPLE_ATTEMPTS):
        try:
            sample_id, is_new = _record_sample(records, heat, analysis, imported, when)
            break
        except SampleTaken:
            if attempt == _SAMPLE_ATTEMPTS - 1:
                raise
    return Accepted(records.record_plan(heat, plan, when), sample_id, sample_is_new=is_new)


_SAMPLE_ATTEMPTS = 10


def _record_sample(records: Logbook, heat: Heat, analysis: Analysis, imported: SpectroSample | None,
                   when: datetime) -> tuple[str, bool]:
    """The sample the plan answers: one already recorded with this analysis, else a new one."""
    recorded = _recorded_samples(records, heat.heat_id)
    same = next((s for s in recorded if _same_analysis(s.analysis, analysis)), None)
    if same is not None:
        return same.sample_id, False
    taken = {s.sample_id for s in recorded}
    if imported is None:
        ids = (f"S{n}" for n in count(len(recorded) + 1))
        sample_id = next(i for i in ids if i not in taken)
        records.record_sample(heat.heat_id, sample_id, analysis, when=when, temperature_c=heat.temperature_c)
    else:
        # Spectrometers restart their numbering; another sample of this heat may hold the id already.
        ids = chain([imported.sample_id], (f"{imported.sample_id}-{k}" for k in count(2)))
        sample_id = next(i for i in ids if i not in taken)
        records.record_spectro_sample(heat.heat_id, replace(imported, sample_id=sample_id), when,
                                      temperature_c=heat.temperature_c)
    return sample_id, True


def _recorded_samples(records: Logbook, heat_id: str) -> tuple[SampleRecord, ...]:
    try:
        return records.heat_history(heat_id).samples
    except InputError:
        # The heat is not in the logbook yet. A logbook that cannot be read at all fails again,
        # with its own message, on the write that follows.
        return ()


def _same_analysis(a: Analysis, b: Analysis) -> bool:
    return dict(a.pct) == dict(b.pct) and a.below_limit == b.below_limit
