"""What the logbook hands out: frozen records of heats, samples, plans and additions, and shifts.

Times are the shop's wall-clock time, naive, to the second.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date, datetime, time, timedelta

from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat

# Three eight-hour shifts starting at 06:00, 14:00 and 22:00 (common practice); the night shift
# belongs to the date on which it began.
SHIFT_STARTS = (("early", 6), ("late", 14), ("night", 22))


@dataclass(frozen=True, order=True)
class Shift:
    """One shift: the date it began and its name ("early", "late" or "night")."""

    shift_date: date
    name: str

    @classmethod
    def of(cls, when: datetime) -> Shift:
        """The shift a moment falls in."""
        starts = [(name, datetime.combine(when.date(), time(hour))) for name, hour in SHIFT_STARTS]
        for name, start in reversed(starts):
            if when >= start:
                return cls(start.date(), name)
        # Before the first start of the day: still the previous day's last shift.
        return cls(when.date() - timedelta(days=1), SHIFT_STARTS[-1][0])

    @property
    def label(self) -> str:
        return f"{self.shift_date.isoformat()} {self.name}"


@dataclass(frozen=True)
class LineRecord:
    """One material of a plan or of an actual addition."""

    material: str
    kg: float
    """Mass [kg]."""
    price_per_kg: float | None
    """Price in force when recorded [currency/kg]; None when no price was known."""
    cost: float | None
    """kg x price [currency]; None when no price was known."""


@dataclass(frozen=True)
class SampleRecord:
    """A bath sample: the analysis used (the average of the accepted burns) and the burns themselves."""

    heat_id: str
    sample_id: str
    taken_at: datetime
    analysis: Analysis
    burns: tuple[Analysis, ...]
    """Every burn sparked, in order, including rejected ones."""
    rejected_burns: frozenset[int]
    """Numbers (1-based) of the burns left out of the average."""
    temperature_c: float | None
    """Bath temperature at the sample [°C], when measured."""
    flags: tuple[str, ...]
    """Remarks on the sample (e.g. a burn that disagreed)."""


@dataclass(frozen=True)
class PlanRecord:
    """A plan as it was made: its inputs (enough to make it again) and its result."""

    plan_id: int
    heat_id: str
    made_at: datetime
    heat: Heat
    """The heat exactly as planned (bath, analysis and this heat's overrides)."""
    heat_toml: str
    """The same heat as HEAT.toml text."""
    options: PlanOptions
    status: str
    """"optimal" or "closest"."""
    lines: tuple[LineRecord, ...]
    total_cost: float
    """Cost of the planned additions [currency]."""
    bath_kg: float
    final_kg: float
    """Predicted bath mass after the additions [kg]."""
    predicted_pct: Mapping[str, float]
    """Predicted analysis after the additions [wt %]."""
    prices: Mapping[str, float]
    """Prices in force for every material known when planning [currency/kg]."""
    currency: str
    result: Mapping[str, object]
    """The plan's full JSON object (``Plan.to_json()``) as recorded."""


@dataclass(frozen=True)
class AdditionsRecord:
    """One round of additions actually made to the heat (one correction)."""

    batch_id: int
    heat_id: str
    added_at: datetime
    plan_id: int | None
    """The plan the additions were made from; None when made without one."""
    lines: tuple[LineRecord, ...]

    @property
    def total_cost(self) -> float:
        """Cost of the priced lines [currency]."""
        return math.fsum(line.cost for line in self.lines if line.cost is not None)


HeatEvent = SampleRecord | PlanRecord | AdditionsRecord


def event_time(event: HeatEvent) -> datetime:
    """When a history event happened."""
    if isinstance(event, SampleRecord):
        return event.taken_at
    if isinstance(event, PlanRecord):
        return event.made_at
    return event.added_at


@dataclass(frozen=True)
class HeatHistory:
    """Everything recorded for one heat. Each tuple is in time order."""

    heat_id: str
    grade: str | None
    """The grade of the latest plan; None when the heat was never planned."""
    started_at: datetime
    shift: Shift
    bath_kg: float | None
    """Bath mass when the heat was first planned [kg]."""
    samples: tuple[SampleRecord, ...]
    plans: tuple[PlanRecord, ...]
    additions: tuple[AdditionsRecord, ...]

    @property
    def events(self) -> tuple[HeatEvent, ...]:
        """Samples, plans and additions merged in time order (at the same second: sample, plan, additions)."""
        ranked: list[tuple[datetime, int, int, HeatEvent]] = [
            (s.taken_at, 0, k, s) for k, s in enumerate(self.samples)]
        ranked += [(p.made_at, 1, k, p) for k, p in enumerate(self.plans)]
        ranked += [(a.added_at, 2, k, a) for k, a in enumerate(self.additions)]
        return tuple(item[3] for item in sorted(ranked, key=lambda item: item[:3]))

    @property
    def corrections(self) -> int:
        """Rounds of additions made."""
        return len(self.additions)


@dataclass(frozen=True)
class HeatSummary:
    """One line of the heat list: who, when, and what the additions cost."""

    heat_id: str
    grade: str | None
    started_at: datetime
    shift: Shift
    bath_kg: float | None
    """Bath mass when the heat was first planned [kg]."""
    samples: int
    plans: int
    corrections: int
    """Rounds of additions actually made."""
    added_kg: float
    """Mass actually added [kg]."""
    planned_cost: float
    """Total of the plans the additions were made from [currency]."""
    actual_cost: float
    """Cost of the additions actually made [currency] (priced lines only)."""
    unpriced_lines: int
    """Actual addition lines recorded without a known price."""
    currency: str

    @property
    def cost(self) -> float:
        return self.actual_cost

    @property
    def cost_per_t(self) -> float | None:
        """Actual cost per tonne of bath [currency/t]; None when the bath mass is unknown."""
        if not self.bath_kg:
            return None
        return self.actual_cost / (self.bath_kg / 1000.0)


@dataclass(frozen=True)
class CostLine:
    """A planned or actual line with the heat it belongs to, for the cost report."""

    heat_id: str
    source: str
    """"planned" (a plan the additions were made from) or "actual"."""
    material: str
    kg: float
    price_per_kg: float | None
    cost: float | None

