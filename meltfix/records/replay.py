"""Replay of a recorded heat: at every sample, the plan meltfix makes beside what was actually done.

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

For every sample a :class:`ReplayStep` holds the plan meltfix makes there (none at a sample already
inside at the shop's target odds, as the risk planner judges it: nothing is needed there), the additions actually
made before the next sample, the chemistry those additions should have produced (the mass balance
with the catalogue's recoveries) against the next sample's measured chemistry, and both costs. The
gap between predicted and measured hints at the real recovery (:class:`RecoveryHint`).
:func:`score_entry` scores a trainee's own additions at a sample: in spec or not, and the cost
against the plan meltfix makes there. :func:`summarise` compares the heat's actual additions with
meltfix along the same path (its plan at the first sample that needed one).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

from meltfix.base.errors import InputError
from meltfix.plan.massbalance import bath_after, temperature_drop_c
from meltfix.plan.numbers import content_text, limit_text, unit_of
# limit_checks is the planner's own window and index test; reused so "in spec" means one thing.
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, Addition, Plan, PlanOptions, limit_checks
from meltfix.plan.risk import RiskPlanner
from meltfix.shop.analysis import Analysis, analysis_from_table
from meltfix.shop.elements import parse_number
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, stage_material
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import stage_name
from meltfix.shop.toml_values import identifier, known_keys, number, read_toml, require, table, text

if TYPE_CHECKING:  # a replay from a file never opens the logbook
    from meltfix.records.logbook import HeatHistory

_RECORD_KEYS = {"heat", "grade", "bath_kg", "capacity_kg", "max_temp_drop_c", "stage", "date", "sample", "addition"}
_SAMPLE_KEYS = {"id", "time", "temperature_c", "analysis"}
_ADDITION_KEYS = {"time", "material", "kg"}
# Below this catalogue-predicted rise [wt %] a recovery read from two samples is mostly the
# spectrometer's scatter (a few thousandths of a per cent, common practice), so none is hinted.
_HINT_MIN_RISE_PCT = 0.01


# ---------------------------------------------------------------------------------------------
# The record


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


# ---------------------------------------------------------------------------------------------
# The steps


@dataclass(frozen=True)
class ActualAddition:
    """An addition actually made, priced from the catalogue."""

    clock: str
    material: str
    kg: float
    """Mass added [kg]."""
    cost: float
    """kg x the catalogue price [currency]."""


@dataclass(frozen=True)
class RecoveryHint:
    """The recovery of one element that the next sample implies, beside the catalogue's."""

    element: str
    added_kg: float
    """Element mass put in with the additions, before any loss [kg]."""
    catalogue: float
    """Recovery the catalogue assumes, weighted over the materials that carry the element [0..1]."""
    implied: float
    """Recovery that makes the mass balance meet the next sample [0..1, may fall outside]."""


@dataclass(frozen=True)
class ReplayStep:
    """One sample of the recorded heat, with the plan, the actual additions and what followed."""

    sample: RecordedSample
    heat: Heat
    """The heat as meltfix sees it at this sample (bath grown by the additions before it)."""
    plan: Plan | None
    """The plan meltfix makes at this sample; None when the planner refused (see ``plan_error``)."""
    actual: tuple[ActualAddition, ...]
    """Additions actually made after this sample and before the next."""
    actual_cost: float
    """Cost of the actual additions [currency]."""
    final_kg: float
    """Bath after the actual additions, catalogue recoveries [kg]."""
    predicted_pct: Mapping[str, float]
    """Chemistry the actual additions should have produced, catalogue recoveries [wt %]."""
    predicted_misses: tuple[str, ...]
    """Limits the predicted chemistry misses (empty = the actual additions should have met the grade)."""
    next_sample: RecordedSample | None
    """The sample that shows the additions' effect; None after the last sample."""
    measured_misses: tuple[str, ...]
    """Limits the next sample's measured chemistry misses (empty when in spec or no next sample)."""
    recovery_hints: tuple[RecoveryHint, ...]
    plan_error: str = ""
    """Why meltfix could not plan at this sample (the rest of the step still stands)."""
    inside: bool = False
    """The sample is inside every limit at the shop's target odds as it stands: the risk planner
    plans nothing there (nothing is needed), so the step has no plan."""
    in_spec: bool = False
    """The sample's measured analysis meets every limit (its odds may still be short of the target)."""

    @property
    def bath_kg(self) -> float:
        """Bath at this sample [kg]."""
        return self.heat.bath_kg

    @property
    def planned_cost(self) -> float | None:
        return None if self.plan is None else self.plan.total_cost

    @property
    def planned(self) -> tuple[Addition, ...]:
        return () if self.plan is None else self.plan.additions

    @property
    def measured_next_pct(self) -> Mapping[str, float] | None:
        return None if self.next_sample is None else self.next_sample.analysis.pct

    @property
    def gap_pct(self) -> dict[str, float]:
        """Measured next minus predicted, for the elements in both [wt %]."""
        measured = self.measured_next_pct or {}
        return {s: measured[s] - p for s, p in self.predicted_pct.items() if s in measured}

    def to_json(self) -> dict[str, object]:
        """The step as the replay command's JSON (see meltfix.commands.replay)."""
        nxt = self.next_sample
        return {
            "sample": self.sample.sample_id,
            "time": self.sample.clock,
            "temperature_c": self.sample.temperature_c,
            "bath_kg": self.bath_kg,
            "measured": dict(self.sample.analysis.pct),
            "plan_status": "inside" if self.inside else "error" if self.plan is None else self.plan.status,
            "plan_needed": not self.inside,
            "plan_error": self.plan_error,
            "planned": [{"material": a.material, "kg": a.kg, "cost": a.cost, "packs": a.packs}
                        for a in self.planned],
            "actual": [{"time": a.clock, "material": a.material, "kg": a.kg, "cost": a.cost} for a in self.actual],
            "final_kg": self.final_kg,
            "predicted": dict(self.predicted_pct),
            "predicted_misses": list(self.predicted_misses),
            "next_sample": None if nxt is None else nxt.sample_id,
            "measured_next": None if nxt is None else dict(nxt.analysis.pct),
            "measured_next_misses": list(self.measured_misses),
            "gap": self.gap_pct,
            "recovery_hints": [{"element": h.element, "added_kg": h.added_kg, "catalogue": h.catalogue,
                                "implied": h.implied} for h in self.recovery_hints],
            "planned_cost": self.planned_cost,
            "actual_cost": self.actual_cost,
        }


def limit_misses(grade: Grade, pct: Mapping[str, float]) -> tuple[str, ...]:
    """The grade's limits (windows and indices) that ``pct`` [wt %] misses, in words."""
    return tuple(f"{c.element} {c.limit} {limit_text(c.element, c.limit_pct)} {unit_of(c.element)} "
                 f"(is {content_text(c.element, c.predicted_pct)} {unit_of(c.element)})"
                 for c in limit_checks(grade, pct) if c.margin_pct < -LIMIT_TOL_PCT)


def _recovery_hints(bath_kg: float, now: Analysis, used: Sequence[tuple[Material, float]], final_kg: float,
                    predicted: Mapping[str, float], measured: Mapping[str, float]) -> tuple[RecoveryHint, ...]:
    hints = []
    for symbol, measured_pct in measured.items():
        added = math.fsum(kg * m.composition_pct.get(symbol, 0.0) / 100.0 for m, kg in used)
        dissolved = math.fsum(kg * m.yield_pct(symbol) / 100.0 for m, kg in used)
        if added <= 0 or predicted.get(symbol, 0.0) - now.get(symbol) < _HINT_MIN_RISE_PCT:
            continue
        # Element in the bath at the next sample minus what was there: what really dissolved.
        # The bath mass is the catalogue's; a recovery error moves it by far less than the element.
        implied = (final_kg * measured_pct - bath_kg * now.get(symbol)) / 100.0 / added
        hints.append(RecoveryHint(symbol, added, dissolved / added, implied))
    return tuple(hints)


def replay(record: HeatRecord, book: RecipeBook, options: PlanOptions = PlanOptions(),
           planner: Planner | None = None) -> tuple[ReplayStep, ...]:
    """Walk the recorded heat sample by sample (see the module's docstring)."""
    validate_record(record, book)
    # Each sample is planned as the shop plans today: to its target odds (meltfix.plan.risk).
    to_target = RiskPlanner(book, planner or Planner(book))
    grade = book.grade(record.grade)
    steps: list[ReplayStep] = []
    bath_kg = record.bath_kg
    for k, sample in enumerate(record.samples):
        nxt = record.samples[k + 1] if k + 1 < len(record.samples) else None
        if record.capacity_kg is not None and bath_kg > record.capacity_kg * (1 + 1e-9):
            raise InputError(record.source, f"sample '{sample.sample_id}'",
                             f"the additions before it grow the bath to {bath_kg:,.0f} kg, above capacity_kg "
                             f"({record.capacity_kg:,.0f} kg); check the additions' kg or the capacity")
        heat = Heat(heat_id=record.heat_id, grade=record.grade, bath_kg=bath_kg, analysis=sample.analysis,
                    capacity_kg=record.capacity_kg, temperature_c=sample.temperature_c,
                    max_temp_drop_c=record.max_temp_drop_c, stage=record.stage)
        # A sample the risk planner finds inside at the target odds needs no plan (it plans nothing
        # there, as `meltfix solve` would): adding a plan up beside the real corrections would count
        # money nobody had to spend. One inside every limit but with odds short of the target gets
        # its plan. A step the planner refuses is still a step of the heat: keep it, with the reason.
        inside, in_spec = False, not limit_misses(grade, sample.analysis.pct)
        plan: Plan | None = None
        plan_error = ""
        try:
            judged = to_target.plan(heat, options=options).plan
        except InputError as exc:
            plan_error = exc.message
        else:
            inside = not judged.additions and in_spec
            plan = None if inside else judged
        made = [a for a in record.additions
                if a.minute >= sample.minute and (nxt is None or a.minute < nxt.minute)]
        actual = tuple(ActualAddition(a.clock, a.material, a.kg, a.kg * book.material(a.material).price_per_kg)
                       for a in made)
        used = [(stage_material(heat, book, a.material), a.kg) for a in made]
        final_kg, predicted = bath_after(bath_kg, sample.analysis.pct, used)
        measured = {} if nxt is None else nxt.analysis.pct
        steps.append(ReplayStep(
            sample=sample,
            heat=heat,
            plan=plan,
            actual=actual,
            actual_cost=math.fsum(a.cost for a in actual),
            final_kg=final_kg,
            predicted_pct=MappingProxyType(predicted),
            predicted_misses=limit_misses(grade, predicted),
            next_sample=nxt,
            measured_misses=() if nxt is None else limit_misses(grade, measured),
            recovery_hints=_recovery_hints(bath_kg, sample.analysis, used, final_kg, predicted, measured),
            plan_error=plan_error,
            inside=inside,
            in_spec=in_spec,
        ))
        bath_kg = final_kg
    return tuple(steps)


@dataclass(frozen=True)
class ReplaySummary:
    """The heat's cost the way it was run against meltfix's along the same path.

    Each sample's plan starts again from where the heat really was, so the plans of a heat are
    alternatives, never all made: adding them up would count the same correction several times.
    meltfix's cost is its plan at the first sample that needed one (had it been followed, the
    later samples would not have needed theirs); the shop's is everything actually added, plus
    what meltfix would still add when the heat ended outside the grade. Both then take the heat
    from that first sample into the grade, so the two figures compare like with like.
    """

    actual_cost: float
    """Everything actually added [currency]."""
    first_needed: str | None
    """The first sample that needed a plan, not inside at the target odds (None: every sample was inside)."""
    meltfix_cost: float | None
    """meltfix's plan at ``first_needed`` [currency]; 0 when no sample needed one; None when it could not plan."""
    ended_outside: str | None
    """The last sample, when it is still outside the grade (None: the heat ended inside)."""
    still_to_add: float | None
    """meltfix's plan at ``ended_outside`` [currency]; None when the heat ended inside or it could not plan."""

    @property
    def shop_cost(self) -> float:
        """What the heat's own way costs to reach the grade: actual plus still to add [currency]."""
        return self.actual_cost + (self.still_to_add or 0.0)


def summarise(steps: Sequence[ReplayStep]) -> ReplaySummary:
    """Actual additions against meltfix along the same path (see :class:`ReplaySummary`)."""
    first = next((s for s in steps if not s.inside), None)
    # A heat tapped on a sample that meets every limit ended inside, even with odds short of the target.
    last = steps[-1] if steps and not steps[-1].in_spec else None
    return ReplaySummary(
        actual_cost=math.fsum(s.actual_cost for s in steps),
        first_needed=None if first is None else first.sample.sample_id,
        meltfix_cost=0.0 if first is None else first.planned_cost,
        ended_outside=None if last is None else last.sample.sample_id,
        still_to_add=None if last is None else last.planned_cost,
    )


def replay_json(record: HeatRecord, steps: Sequence[ReplayStep], book: RecipeBook) -> dict[str, object]:
    """The whole replay as one JSON object: ``{"heat": ID, "steps": [...]}`` plus totals.

    ``planned_total`` is meltfix along the same path (its plan at ``first_needed``), not the sum
    of every sample's plan; ``actual_total`` everything actually added (see ReplaySummary).
    """
    summary = summarise(steps)
    return {
        "heat": record.heat_id,
        "grade": record.grade,
        "currency": book.settings.currency,
        "steps": [step.to_json() for step in steps],
        "planned_total": summary.meltfix_cost,
        "actual_total": summary.actual_cost,
        "first_needed": summary.first_needed,
        "ended_outside": summary.ended_outside,
        "still_to_add": summary.still_to_add,
    }


# ---------------------------------------------------------------------------------------------
# The chemistry path


@dataclass(frozen=True)
class ElementPath:
    """One element through the heat against its window, for the path chart."""

    element: str
    low_pct: float
    high_pct: float
    aim_pct: float | None
    measured_pct: tuple[float | None, ...]
    """Measured at each sample [wt %]; None when the sample does not list the element."""
    predicted_pct: tuple[float | None, ...]
    """What the additions before each sample should have given [wt %]; None at the first sample."""


def element_paths(steps: Sequence[ReplayStep], grade: Grade) -> tuple[ElementPath, ...]:
    """Each window element's path through the heat (measured and predicted, sample by sample)."""
    paths = []
    for symbol in grade.elements:
        low, high = grade.window_pct[symbol]
        measured = tuple(s.sample.analysis.pct.get(symbol) for s in steps)
        predicted = (None,) + tuple(s.predicted_pct.get(symbol) for s in steps[:-1])
        paths.append(ElementPath(symbol, low, high, grade.aim_pct.get(symbol), measured, predicted))
    return tuple(paths)


# ---------------------------------------------------------------------------------------------
# Training


@dataclass(frozen=True)
class TrainingScore:
    """A trainee's additions at one sample, scored against the grade and the plan meltfix makes there."""

    entry: tuple[tuple[str, float], ...]
    """The trainee's additions (material, kg)."""
    final_kg: float
    predicted_pct: Mapping[str, float]
    """Chemistry the entry should give, catalogue recoveries [wt %]."""
    misses: tuple[str, ...]
    """Grade limits the entry misses."""
    breaks: tuple[str, ...]
    """Vessel or temperature limits the entry breaks."""
    entry_cost: float
    best_cost: float
    """Cost of the plan meltfix makes at the sample, the same one the replay shows; 0 when the
    sample was already inside and needed nothing [currency]."""
    best: Plan | None
    """That plan; None when the sample needed none."""
    points: int
    """0 when out of spec or over a limit, else 100 x best cost / entry cost (at most 100)."""

    @property
    def in_spec(self) -> bool:
        return not self.misses

    @property
    def extra_cost(self) -> float:
        """What the entry costs above the cheapest plan [currency] (negative = cheaper)."""
        return self.entry_cost - self.best_cost


def parse_entry(entry_text: str, book: RecipeBook, source: object = "training entry") -> tuple[tuple[str, float], ...]:
    """Read a trainee's additions: ``"HC FeMn 180; FeSi 75 40"`` (name, then kg; ``;`` or a new line between).

    A name may be cut short when only one material starts that way ("hc femn 180").
    """
    totals: dict[str, float] = {}
    parts = [p.strip() for p in entry_text.replace("\n", ";").split(";")]
    for n, part in enumerate((p for p in parts if p), start=1):
        where = f"entry {n}"
        words = part.split()
        if words[-1].lower() == "kg":
            words = words[:-1]
        if len(words) < 2:
            raise InputError(source, where, f"'{part}': write the material then the kg, e.g. 'HC FeMn 180'")
        kg = parse_number(words[-1], source, where)
        if kg <= 0:
            raise InputError(source, where, f"'{part}': the kg must be above 0")
        name = _match_material(" ".join(words[:-1]), book, source, where)
        totals[name] = totals.get(name, 0.0) + kg
    return tuple(totals.items())


def _match_material(name: str, book: RecipeBook, source: object, where: str) -> str:
    wanted = name.casefold()
    exact = [m for m in book.material_names if m.casefold() == wanted]
    if exact:
        return exact[0]
    starts = [m for m in book.material_names if m.casefold().startswith(wanted)]
    if len(starts) == 1:
        return starts[0]
    if starts:
        raise InputError(source, where, f"'{name}' could be {', '.join(starts)}: write more of the name")
    raise InputError(source, where, f"no material named '{name}' (the recipe book has: "
                     f"{', '.join(book.material_names)})")


def score_entry(step: ReplayStep, entry: Sequence[tuple[str, float]], book: RecipeBook) -> TrainingScore:
    """Score a trainee's additions at ``step``: in spec or not, and cost against the step's own plan.

    One meltfix cost per sample: the trainee is measured against the plan the replay shows there
    (nothing, at a sample already inside). Raises InputError when meltfix could not plan there.
    """
    if step.plan is None and not step.inside:
        raise InputError("replay", f"sample '{step.sample.sample_id}'", f"no plan to compare with: {step.plan_error}")
    grade = book.grade(step.heat.grade)
    used = [(stage_material(step.heat, book, name), kg) for name, kg in entry]
    final_kg, predicted = bath_after(step.bath_kg, step.sample.analysis.pct, used)
    breaks = []
    if step.heat.capacity_kg is not None and final_kg > step.heat.capacity_kg * (1 + 1e-9):
        breaks.append(f"the bath grows to {final_kg:,.0f} kg, above the vessel's {step.heat.capacity_kg:,.0f} kg")
    max_drop = step.heat.drop_limit_c(book.settings)
    drop = temperature_drop_c(step.bath_kg, used) if used else 0.0
    if max_drop is not None and drop > max_drop + 1e-9:
        breaks.append(f"the additions chill the bath by {drop:.0f} °C, more than the {max_drop:g} °C allowed")
    for name, kg in entry:
        material = book.material(name)
        if name in grade.forbidden:
            breaks.append(f"grade {grade.name} must never receive {name}")
        if not material.allowed_at(step.heat.stage):
            breaks.append(f"{name} is not added at the {step.heat.stage}")
        if material.stock_kg is not None and kg > material.stock_kg + 1e-9:
            breaks.append(f"{kg:g} kg of {name} is more than the {material.stock_kg:g} kg in stock")
    best_cost = step.planned_cost or 0.0
    entry_cost = math.fsum(book.material(name).price_per_kg * kg for name, kg in entry)
    misses = limit_misses(grade, predicted)
    if misses or breaks:
        points = 0
    elif entry_cost <= best_cost + 0.005:
        points = 100
    else:
        points = round(100.0 * best_cost / entry_cost)
    return TrainingScore(tuple(entry), final_kg, MappingProxyType(predicted), misses, tuple(breaks), entry_cost,
                         best_cost, step.plan, points)

