"""Replay of a recorded heat: at every sample, the plan meltfix makes beside what was actually done.

The record (its file format, the logbook's heats) is :mod:`meltfix.records.heat_record`; the
trainee's score is :mod:`meltfix.records.training`.

For every sample a :class:`ReplayStep` holds the plan meltfix makes there (none at a sample already
inside at the shop's target odds, as the risk planner judges it: nothing is needed there), the additions actually
made before the next sample, the chemistry those additions should have produced (the mass balance
with the catalogue's recoveries) against the next sample's measured chemistry, and both costs. The
gap between predicted and measured hints at the real recovery (:class:`RecoveryHint`).
:func:`meltfix.records.training.score_entry` scores a trainee's own additions at a sample: in spec or not, and the cost
against the plan meltfix makes there. :func:`summarise` compares the heat's actual additions with
meltfix along the same path (its plan at the first sample that needed one).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

from meltfix.base.errors import InputError
from meltfix.plan.massbalance import bath_after
from meltfix.plan.numbers import content_text, limit_text, unit_of
from meltfix.plan.planner import Planner
from meltfix.plan.result import LIMIT_TOL_PCT, Addition, Plan, PlanOptions, limit_checks
from meltfix.plan.risk import RiskPlanner
from meltfix.records.heat_record import HeatRecord, RecordedSample, validate_record
from meltfix.shop.analysis import Analysis
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat, stage_material
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook

# Below this catalogue-predicted rise [wt %] a recovery read from two samples is mostly the
# spectrometer's scatter (a few thousandths of a per cent, common practice), so none is hinted.
_HINT_MIN_RISE_PCT = 0.01


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
