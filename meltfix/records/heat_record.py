"""A recorded heat: the samples taken and the additions actually made, read from a file or the logbook.

A recorded heat is a TOML file of our own::

    heat = "KB-24211"           # optional; default: the file's name
    grade = "SAE 4140"          # a grade of the recipe book
    bath_kg = 80000             # liquid bath at the FIRST sample [kg]
    capacity_kg = 86000         # optional: most the vessel holds [kg]
    max_temp_drop_c = 25        # optional: largest drop additions may cause [°C]; default: the shop's
    stage = "ladle"             # optional: a stage shop.toml lists (default: shop.toml default_stage,
                                # else the shop's first stage)
    date = 2026-03-09           # optional: the day of the heat (a TOML date or a text)

    [[sample]]                  # one per spectrometer result, listed in time order
    id = "S1"                   # unique within the heat
    time = "10:02"              # "HH:MM", "HH:MM:SS", a TOML time or a TOML date-time
    temperature_c = 1612        # optional [°C]
    [sample.analysis]           # element = wt %, as in HEAT.toml ("<0.001" and "68 ppm" allowed)
    C = 0.33
    Mn = 0.62

    [[addition]]                # one per material actually added, in any order
    time = "10:05"
    material = "HC FeMn"        # a material of the recipe book
    kg = 120

Every time in a file is written the same way: all clock times (one day; a heat across midnight
needs full date-times) or all date-times. An addition belongs to the last sample taken at or
before its time: it was made in answer to that sample, and the next sample shows its effect. An
addition before the first sample is refused (its effect is already in that sample); one after the
last sample is replayed with no next sample to check it. The bath at a later sample is the first
bath grown by the mass balance of every addition before it (catalogue recoveries), because melt
shops weigh the bath once and rarely again. Unknown keys are refused, not ignored.

Replayed by :mod:`meltfix.records.replay`.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Mapping
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

from meltfix.base.errors import InputError
from meltfix.shop.analysis import Analysis, analysis_from_table
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import stage_name
from meltfix.shop.toml_values import identifier, known_keys, number, read_toml, require, table, text

if TYPE_CHECKING:  # a replay from a file never opens the logbook
    from meltfix.records.logbook import HeatHistory

_RECORD_KEYS = {"heat", "grade", "bath_kg", "capacity_kg", "max_temp_drop_c", "stage", "date", "sample", "addition"}
_SAMPLE_KEYS = {"id", "time", "temperature_c", "analysis"}
_ADDITION_KEYS = {"time", "material", "kg"}


@dataclass(frozen=True)
class RecordedSample:
    """One spectrometer result of the recorded heat."""

    sample_id: str
    clock: str
    """The time as shown to people ("10:02" or "2026-03-14 23:58")."""
    minute: float
    """Minutes after the first sample [min]."""
    analysis: Analysis
    temperature_c: float | None = None
    """Bath temperature at the sample [°C], when measured."""


@dataclass(frozen=True)
class RecordedAddition:
    """One material actually added."""

    clock: str
    minute: float
    """Minutes after the first sample [min]."""
    material: str
    kg: float
    """Mass added [kg]."""
    entry: int = 0
    """Its place among the file's [[addition]] entries (1 = first), for messages."""


@dataclass(frozen=True)
class HeatRecord:
    """A recorded heat: its samples in time order and the additions actually made, in time order."""

    heat_id: str
    grade: str
    bath_kg: float
    """Liquid bath at the first sample [kg]."""
    samples: tuple[RecordedSample, ...]
    additions: tuple[RecordedAddition, ...]
    capacity_kg: float | None = None
    """Most liquid the vessel holds [kg]; None = not limited."""
    max_temp_drop_c: float | None = None
    """Largest drop the additions may cause [°C]; None = the shop's setting."""
    stage: str = "ladle"
    date: str = ""
    source: str = "record"
    """Where the record came from (its file), for messages."""


@dataclass(frozen=True)
class _Moment:
    """A parsed time: its kind (times of different kinds cannot be compared), minutes and display."""

    kind: str
    minute: float
    clock: str


def _moment(value: Any, source: object, field_name: str) -> _Moment:
    # TOML gives times and date-times as objects; people also write "10:02" (not valid TOML time).
    if isinstance(value, str):
        raw = value.strip()
        try:
            value = dt.time.fromisoformat(raw) if len(raw) <= 8 else dt.datetime.fromisoformat(raw)
        except ValueError:
            raise InputError(source, field_name,
                             f"'{value}' is not a time (write HH:MM, HH:MM:SS or YYYY-MM-DD HH:MM)") from None
    if isinstance(value, dt.datetime):
        if value.tzinfo is not None:
            return _Moment("date-time with offset", value.timestamp() / 60.0, value.strftime("%Y-%m-%d %H:%M"))
        minutes = (value - dt.datetime(2000, 1, 1)).total_seconds() / 60.0
        return _Moment("date-time", minutes, value.strftime("%Y-%m-%d %H:%M"))
    if isinstance(value, dt.time):
        if value.tzinfo is not None:
            raise InputError(source, field_name, "a clock time cannot carry a time zone; write a full date-time")
        shown = value.strftime("%H:%M:%S" if value.second else "%H:%M")
        return _Moment("clock time", value.hour * 60 + value.minute + value.second / 60.0, shown)
    raise InputError(source, field_name, f"expected a time such as \"10:02\", got {value!r}")


def _entries(data: Mapping[str, Any], key: str, source: object) -> list[Mapping[str, Any]]:
    entries = data.get(key, [])
    if not isinstance(entries, list) or not all(isinstance(e, Mapping) for e in entries):
        raise InputError(source, key, f"expected [[{key}]] entries")
    return entries


def parse_record(data: Mapping[str, Any], source: object, default_id: str,
                 default_stage: str = HeatRecord.stage) -> HeatRecord:
    """Build a HeatRecord from parsed TOML; every problem raises InputError naming the field."""
    known_keys(data, _RECORD_KEYS, source, "")
    capacity = data.get("capacity_kg")
    drop = data.get("max_temp_drop_c")
    stage = text(data.get("stage", default_stage), source, "stage")  # checked against the shop's stages
    date = data.get("date", "")
    bath_kg = number(require(data, "bath_kg", source, ""), source, "bath_kg", positive=True)
    capacity_kg = None if capacity is None else number(capacity, source, "capacity_kg", positive=True)
    if capacity_kg is not None and capacity_kg < bath_kg:
        raise InputError(source, "capacity_kg", f"{capacity_kg:g} kg is less than the bath itself ({bath_kg:g} kg)")

    samples, moments = _parse_samples(data, source)
    additions = _parse_additions(data, source, moments)

    return HeatRecord(
        heat_id=identifier(data.get("heat", default_id), source, "heat"),
        grade=text(require(data, "grade", source, ""), source, "grade"),
        bath_kg=bath_kg,
        samples=tuple(samples),
        additions=tuple(sorted(additions, key=lambda a: a.minute)),
        capacity_kg=capacity_kg,
        max_temp_drop_c=None if drop is None else number(drop, source, "max_temp_drop_c"),
        stage=stage,
        date=str(date),
        source=str(source),
    )


def _parse_samples(data: Mapping[str, Any], source: object) -> tuple[list[RecordedSample], list[_Moment]]:
    """The record's [[sample]] entries in time order, and their parsed times."""
    raw_samples = _entries(data, "sample", source)
    if not raw_samples:
        raise InputError(source, "sample", "the record has no [[sample]]; a replay needs at least one")
    kind = ""
    samples: list[RecordedSample] = []
    moments: list[_Moment] = []
    seen: set[str] = set()
    for n, entry in enumerate(raw_samples, start=1):
        where = f"sample #{n}."
        known_keys(entry, _SAMPLE_KEYS, source, where)
        sample_id = identifier(require(entry, "id", source, where), source, f"{where}id")
        where = f"sample '{sample_id}'."
        if sample_id in seen:
            raise InputError(source, f"{where}id", "the same sample id is used twice")
        seen.add(sample_id)
        moment = _moment(require(entry, "time", source, where), source, f"{where}time")
        kind = kind or moment.kind
        if moment.kind != kind:
            raise InputError(source, f"{where}time", f"is a {moment.kind} but the first sample's is a {kind}; "
                             "write every time the same way")
        if moments and moment.minute <= moments[-1].minute:
            raise InputError(source, f"{where}time", f"{moment.clock} is not after the sample before it "
                             f"({moments[-1].clock}); list samples in time order (a heat across midnight "
                             "needs full date-times)")
        temperature = entry.get("temperature_c")
        analysis = table(require(entry, "analysis", source, where), source, f"{where}analysis")
        if not analysis:
            raise InputError(source, f"{where}analysis", "lists no element")
        moments.append(moment)
        samples.append(RecordedSample(
            sample_id=sample_id,
            clock=moment.clock,
            minute=moment.minute - moments[0].minute,
            analysis=analysis_from_table(analysis, source, f"{where}analysis"),
            temperature_c=None if temperature is None else number(temperature, source, f"{where}temperature_c",
                                                                  positive=True),
        ))
    return samples, moments


def _parse_additions(data: Mapping[str, Any], source: object, moments: list[_Moment]) -> list[RecordedAddition]:
    """The record's [[addition]] entries; their times are written as the samples' are."""
    kind = moments[0].kind
    additions: list[RecordedAddition] = []
    for n, entry in enumerate(_entries(data, "addition", source), start=1):
        where = f"addition #{n}."
        known_keys(entry, _ADDITION_KEYS, source, where)
        moment = _moment(require(entry, "time", source, where), source, f"{where}time")
        if moment.kind != kind:
            raise InputError(source, f"{where}time", f"is a {moment.kind} but the samples' are {kind}s; "
                             "write every time the same way")
        if moment.minute < moments[0].minute:
            raise InputError(source, f"{where}time", f"{moment.clock} is before the first sample "
                             f"({moments[0].clock}); its effect is already in that sample, so leave it out")
        additions.append(RecordedAddition(
            clock=moment.clock,
            minute=moment.minute - moments[0].minute,
            material=text(require(entry, "material", source, where), source, f"{where}material"),
            kg=number(require(entry, "kg", source, where), source, f"{where}kg", positive=True),
            entry=n,
        ))
    return additions


def validate_record(record: HeatRecord, book: RecipeBook) -> HeatRecord:
    """Check the record's grade, stage and materials against the recipe book."""
    if record.grade not in book.grades:
        raise InputError(record.source, "grade",
                         f"unknown grade '{record.grade}' (the recipe book has: {', '.join(book.grades)})")
    stage_name(record.stage, record.source, "stage", book.settings.stages)
    names = set(book.material_names)
    for addition in sorted(record.additions, key=lambda a: a.entry):
        if addition.material not in names:
            raise InputError(record.source, f"addition #{addition.entry}.material",
                             f"no material named '{addition.material}' in the recipe book")
    return record


def load_record(path: Path | str, book: RecipeBook) -> HeatRecord:
    """Read and validate a recorded heat file against the recipe book."""
    path = Path(path)
    record = parse_record(read_toml(path), path, default_id=path.stem, default_stage=book.settings.heat_stage)
    return validate_record(record, book)


def record_from_history(history: HeatHistory, book: RecipeBook) -> HeatRecord:
    """The logbook's record of one heat as a HeatRecord, validated against the recipe book.

    Samples and actual additions carry over; the heat's first plan gives what a sample does not
    hold: the bath at the first sample (melt shops weigh the bath once, before the first trim),
    the vessel, the stage and the allowed temperature drop. The logbook's plans themselves are
    not carried: the replay plans every sample afresh, as for a file. Times show as "HH:MM"
    when the heat stays within one day, else as date-times.
    """
    source = f"logbook heat {history.heat_id}"
    if not history.samples:
        raise InputError(source, "samples", "no sample is recorded for this heat; a replay needs at least one")
    if history.grade is None or not history.plans:
        raise InputError(source, "plans", "the heat was never planned, so its grade and bath weight are not "
                                          "recorded; a replay needs both")
    first = history.samples[0].taken_at
    one_day = all(e.taken_at.date() == first.date() for e in history.samples) and all(
        a.added_at.date() == first.date() for a in history.additions)

    def clock(when: dt.datetime) -> str:
        return when.strftime("%H:%M" if one_day else "%Y-%m-%d %H:%M")

    def minute(when: dt.datetime) -> float:
        return (when - first).total_seconds() / 60.0

    for before, sample in zip(history.samples, history.samples[1:]):
        if sample.taken_at <= before.taken_at:
            raise InputError(source, f"sample '{sample.sample_id}'", f"taken at the same time as sample "
                             f"'{before.sample_id}' ({clock(before.taken_at)}); a replay needs samples in time order")
    early = next((a for a in history.additions if a.added_at < first), None)
    if early is not None:
        raise InputError(source, "additions", f"additions at {clock(early.added_at)} come before the first sample "
                         f"({clock(first)}); their effect is already in that sample, so the heat cannot be replayed")
    planned = history.plans[0].heat
    lines = [(batch.added_at, line) for batch in history.additions for line in batch.lines]
    record = HeatRecord(
        heat_id=history.heat_id,
        grade=history.grade,
        bath_kg=planned.bath_kg,
        samples=tuple(RecordedSample(s.sample_id, clock(s.taken_at), minute(s.taken_at), s.analysis, s.temperature_c)
                      for s in history.samples),
        additions=tuple(RecordedAddition(clock(when), minute(when), line.material, line.kg, entry=n)
                        for n, (when, line) in enumerate(lines, start=1)),
        capacity_kg=planned.capacity_kg,
        max_temp_drop_c=planned.max_temp_drop_c,
        stage=planned.stage,
        date=first.date().isoformat(),
        source=source,
    )
    return validate_record(record, book)
