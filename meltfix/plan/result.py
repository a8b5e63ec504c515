"""What a plan is: the planner's answer, its limit checks, its odds and the options it was made with.

The one module storage, rendering, the ticket and the screen import to handle plans: plain frozen
dataclasses with no NumPy and no solver behind them, so reading a heat's history or painting a
screen never loads HiGHS. The tolerance that decides whether a limit is missed lives here too, and
every module that judges a limit uses it.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass
from typing import Generic, TypeVar, overload

from meltfix.plan.sequence import AdditionStep
from meltfix.shop.grades import Grade
from meltfix.shop.materials import Material
from meltfix.shop.settings import ECONOMIC

LIMIT_TOL_PCT = 1e-9
"""A limit is missed only beyond float noise [wt %]: a content equal to its limit is inside. Every
module that judges a limit (plans, the hand method, replays, the odds, the tables) counts it this way."""


def is_outside(margin_pct: float) -> bool:
    """Whether a margin to a limit [wt %] is a miss (beyond float noise)."""
    return margin_pct < -LIMIT_TOL_PCT


T = TypeVar("T")


class Later(Generic[T]):
    """A part of a plan given as the function that works it out, run when the part is first read."""

    def __init__(self, work: Callable[[], T]) -> None:
        self.work = work


class OnFirstRead(Generic[T]):
    """A field of a frozen dataclass given as its value or as ``Later(work)``: ``work`` runs when the
    field is first read and its value is kept. Reading is all that repr, ==, hash, to_json and
    ``dataclasses.replace`` do, so these see the value as if it had been given.

    For the parts of a plan only a person reads (its cautions, its lots, what holds its cost up): a
    plan that is only costed or counted never works them out (bench/plan_speed.py); == reads them.
    ``dataclasses.replace`` reads every field, so a replaced plan has them worked out: the odds
    search's insets, re-checked against the real grade that way, still pay for them (a shallow
    copy that kept them unworked saved no time the odds bench could tell from its noise)."""

    def __init__(self, default: T | None = None) -> None:
        self.default = default
        """The field's default; None = it has none."""

    def __set_name__(self, owner: type, name: str) -> None:
        self.slot = f"_{name}"

    @overload
    def __get__(self, instance: None, owner: type) -> OnFirstRead[T]: ...
    @overload
    def __get__(self, instance: object, owner: type) -> T: ...
    def __get__(self, instance: object | None, owner: type) -> T | OnFirstRead[T]:
        if instance is None:  # the dataclass asks for the field's default
            if self.default is None:
                raise AttributeError(self.slot)
            return self.default
        value: T | Later[T] = instance.__dict__[self.slot]
        if isinstance(value, Later):
            value = instance.__dict__[self.slot] = value.work()
        return value

    def __set__(self, instance: object, value: T | Later[T]) -> None:
        instance.__dict__[self.slot] = value  # the frozen dataclass's __init__ comes here (object.__setattr__)


@dataclass(frozen=True)
class PlanOptions:
    """How to plan: the defaults are what a melt shop wants on a normal heat."""

    use_aim: bool = True
    """Pull the heat towards the grade's aims; False gives the cheapest plan inside the windows."""
    continuous: bool = False
    """Treat materials sold in packs as loose (any amount)."""
    relaxed: bool = False
    """Loose amounts and no minimum additions either: the linear relaxation alone, a quick first look
    (the odds search walks its insets on it before it plans any in whole packs)."""
    aim_penalty: float | None = None
    """Aim weight [currency per 0.01 wt % off aim per tonne of bath]; None = the shop's setting."""
    mip_rel_gap: float = 1e-6
    """Relative optimality gap for plans with whole packs."""
    time_limit_s: float | None = None
    """Time budget for the whole plan, every solve included [s]; None = the shop's plan_time_limit_s.
    Past it the best plan found is returned, marked as not proven cheapest, with its gap."""
    closest_tolerance: float = 0.02
    """When no plan meets the grade: how much more than the least possible violation (relative)
    the closest plan may keep, when that saves cost."""


# A plan builds a dozen of these (frozen dataclasses) per heat: their __init__ below writes the
# instance's __dict__ directly, where the generated one calls object.__setattr__ per field (twice
# the time). Frozen all the same: assignment still raises.
@dataclass(frozen=True, init=False)
class Addition:
    """One line of the plan."""

    material: str
    kg: float
    """Mass to add [kg]."""
    cost: float
    """kg x price [currency]."""
    packs: int | None = None
    """Number of whole packs, when the material comes in packs."""
    pack_kg: float | None = None

    def __init__(self, material: str, kg: float, cost: float, packs: int | None = None,
                 pack_kg: float | None = None) -> None:
        fields = self.__dict__
        fields["material"], fields["kg"], fields["cost"], fields["packs"], fields["pack_kg"] = (
            material, kg, cost, packs, pack_kg)


@dataclass(frozen=True, init=False)  # __init__ as Addition's, for the same reason
class LimitCheck:
    """The predicted content against one limit of the grade."""

    element: str
    """Element symbol, or an index name such as "CEV"."""
    limit: str
    """"min" or "max"."""
    limit_pct: float
    predicted_pct: float
    margin_pct: float
    """How far inside the limit [wt %]; negative when outside."""

    def __init__(self, element: str, limit: str, limit_pct: float, predicted_pct: float, margin_pct: float) -> None:
        fields = self.__dict__
        fields["element"], fields["limit"], fields["limit_pct"], fields["predicted_pct"], fields["margin_pct"] = (
            element, limit, limit_pct, predicted_pct, margin_pct)


@dataclass(frozen=True)
class Violation:
    """A limit the closest plan still misses, with the reason in plain words."""

    element: str
    limit: str
    limit_pct: float
    predicted_pct: float
    by_pct: float
    """How far outside [wt %], always positive."""
    reason: str


@dataclass(frozen=True)
class Binding:
    """A limit that holds the plan back, and what loosening it by one unit would save."""

    name: str
    """What binds, in words ("vessel capacity", "Mn max", "stock of FeV 80")."""
    saving: float
    """Saving [currency] from one more ``unit``."""
    unit: str
    """The unit of loosening, in words ("1 t more free capacity")."""
    per: str = "pct"
    """What ``unit`` loosens by: "pct" (a limit or aim, 0.01 %), "kg" (stock), "t" (capacity) or
    "degC" (the drop); the shop's units rewrite the last three (plan/numbers.binding_text)."""


@dataclass(frozen=True, kw_only=True)
class Plan:
    """The planner's answer for one heat. All masses [kg], contents [wt %], costs [currency].

    ``binding``, ``cautions`` and ``steps`` may be given as ``Later(work)`` (see OnFirstRead)."""

    heat_id: str
    grade: str
    status: str
    """"optimal" when every window is met, "closest" otherwise."""
    additions: tuple[Addition, ...]
    total_cost: float
    """Cost of the additions [currency] (the aim penalty is not a cost and is left out)."""
    bath_kg: float
    final_kg: float
    """Bath mass after the additions dissolve [kg]."""
    predicted_pct: Mapping[str, float]
    checks: tuple[LimitCheck, ...]
    violations: tuple[Violation, ...]
    binding: OnFirstRead[tuple[Binding, ...]] = OnFirstRead()
    cautions: OnFirstRead[tuple[str, ...]] = OnFirstRead()
    temperature_drop_c: float
    """Predicted cooling by the additions [°C] (negative = the bath warms)."""
    notes: tuple[str, ...] = ()
    currency: str = "EUR"
    proven: bool = True
    """False when the time budget ran out before this plan was proven the cheapest."""
    gap: float = 0.0
    """How much cheaper the cheapest plan might still be, relative to this one's cost [fraction];
    infinite when the budget ran out before any plan in whole packs was found (JSON: null)."""
    steps: OnFirstRead[tuple[AdditionStep, ...]] = OnFirstRead(())
    """The additions as the crew makes them, in the shop's order with their lots (same order as
    ``additions``)."""
    liquidus_c: float | None = None
    """Liquidus of the predicted analysis [°C] (meltfix.shop.liquidus, the grade family's formula)."""
    temperature_after_c: float | None = None
    """Bath temperature after the additions and any arc heating [°C]; None without a reading."""
    superheat_c: float | None = None
    """The shop's superheat above the liquidus the bath must keep [°C]."""
    reheat_c: float = 0.0
    """Arc heating bought at a stage that can reheat [°C]."""
    reheat_min: float = 0.0
    """How long that heating takes at the stage's rate [min]."""
    reheat_cost: float = 0.0
    """What that heating costs [currency]; included in ``total_cost``."""

    @property
    def cost_per_t(self) -> float:
        """Cost per tonne of final bath [currency/t]."""
        return self.total_cost / (self.final_kg / 1000.0)

    @property
    def added_kg(self) -> float:
        return math.fsum(a.kg for a in self.additions)

    def to_json(self) -> dict[str, object]:
        """The JSON object of `meltfix solve --json`, a contract (numbers unrounded), with a few extra fields."""
        return {
            "heat": self.heat_id,
            "grade": self.grade,
            "status": self.status,
            "additions": [
                {"material": a.material, "kg": a.kg, "cost": a.cost, "packs": a.packs} | _step_json(step)
                for a, step in zip(self.additions, self.steps or [None] * len(self.additions))
            ],
            "total_cost": self.total_cost,
            "cost_per_t": self.cost_per_t,
            "currency": self.currency,
            "bath_kg": self.bath_kg,
            "final_kg": self.final_kg,
            "predicted": dict(self.predicted_pct),
            "violations": [
                {"element": v.element, "limit": v.limit, "limit_pct": v.limit_pct,
                 "predicted_pct": v.predicted_pct, "by": v.by_pct, "reason": v.reason}
                for v in self.violations
            ],
            "checks": [
                {"element": c.element, "limit": c.limit, "limit_pct": c.limit_pct,
                 "predicted_pct": c.predicted_pct, "margin_pct": c.margin_pct}
                for c in self.checks
            ],
            "binding": [{"name": b.name, "saving": b.saving, "unit": b.unit} for b in self.binding],
            "temperature_drop_c": self.temperature_drop_c,
            "liquidus_c": self.liquidus_c,
            "temperature_after_c": self.temperature_after_c,
            "superheat_c": self.superheat_c,
            "reheat_c": self.reheat_c,
            "reheat_min": self.reheat_min,
            "reheat_cost": self.reheat_cost,
            "cautions": list(self.cautions),
            "notes": list(self.notes),
            "proven": self.proven,
            "gap": self.gap if math.isfinite(self.gap) else None,
        }


@dataclass(frozen=True)
class Odds:
    """How likely a plan is to land the heat inside its grade."""

    heat: float
    """Probability [0..1] that every limit of the grade holds at once."""
    limits: Mapping[str, float]
    """Probability [0..1] that each limit holds, by label ("Mn max", "CEV max"), in the plan's order."""
    draws: int
    """Number of simulated heats."""
    seed: int
    """Seed of the random draws: the same seed gives the same odds."""

    def to_json(self) -> dict[str, object]:
        return {"heat": self.heat, "limits": dict(self.limits), "draws": self.draws, "seed": self.seed}

    def resolves(self, target: float) -> bool:
        """Whether this many draws can show odds of ``target``: with n draws the highest share short
        of all of them is 1 - 1/n, so a target above it cannot be told from certainty."""
        return target <= 1.0 - 1.0 / self.draws


@dataclass(frozen=True)
class RiskPlan:
    """A plan with its odds of landing inside the grade and what a miss would cost."""

    plan: Plan
    """Checked against the grade's real windows."""
    odds: Odds
    """The Monte Carlo verdict on the plan."""
    target: float
    """Probability [0..1] the plan had to reach."""
    correction_cost: float
    """Cost of one correction [currency] (shop.toml ``correction_cost``)."""
    economic: bool = False
    """Whether ``target`` was chosen as the least expected total cost."""

    @property
    def reached(self) -> bool:
        return self.plan.status == "optimal" and self.odds.heat >= self.target and self.odds.resolves(self.target)

    @property
    def expected_total_cost(self) -> float:
        """Additions + (1 - odds) x correction cost [currency]."""
        return self.plan.total_cost + (1.0 - self.odds.heat) * self.correction_cost

    def to_json(self) -> dict[str, object]:
        """The plan's JSON object with the odds fields (a contract: keep their names)."""
        line = self.plan.to_json()
        line.update({"target_odds": self.target, "odds": self.odds.to_json(),
                     "correction_cost": self.correction_cost, "expected_total_cost": self.expected_total_cost})
        if self.economic:
            line["target_odds_rule"] = ECONOMIC
        return line


def addition(material: Material, kg: float, price_per_kg: float, packed: bool) -> Addition:
    """A plan line for ``kg`` [kg] of ``material`` at ``price_per_kg`` [currency/kg]; ``packed``: the
    amount is counted in whole packs (a loose, locked or continuous amount is not)."""
    packs = int(round(kg / material.pack_kg)) if packed and material.pack_kg else None
    return Addition(material.name, kg, kg * price_per_kg, packs, material.pack_kg if packs is not None else None)


def _step_json(step: AdditionStep | None) -> dict[str, object]:
    """The order-and-lots fields of one JSON addition."""
    if step is None:
        return {}
    return {"addition_class": step.addition_class, "portions_kg": list(step.portions_kg),
            "stir_min": step.stir_min, "metres": step.metres}


def limit_checks(grade: Grade, predicted: Mapping[str, float],
                  lowest: Mapping[str, float] | None = None, floors: frozenset[str] = frozenset()
                  ) -> tuple[LimitCheck, ...]:
    """Every limit of the grade against the predicted analysis; ``lowest`` (default: the same) has
    below-limit readings at 0 and is used wherever the low end is the safe one (minimums, negative
    weights). A window minimum of 0 is checked only for the elements in ``floors`` (those in debt to
    deoxidation, which can end below 0 %)."""
    lowest = predicted if lowest is None else lowest
    checks = []
    for symbol, (low, high) in grade.window_pct.items():
        if low > 0 or symbol in floors:
            value = lowest.get(symbol, 0.0)
            checks.append(LimitCheck(symbol, "min", low, value, value - low))
        value = predicted.get(symbol, 0.0)
        checks.append(LimitCheck(symbol, "max", high, value, high - value))
    for index in grade.indices:
        if index.min_value is not None:
            value = index.value({s: (lowest if w > 0 else predicted).get(s, 0.0) for s, w in index.terms.items()})
            checks.append(LimitCheck(index.name, "min", index.min_value, value, value - index.min_value))
        if index.max_value is not None:
            value = index.value({s: (predicted if w > 0 else lowest).get(s, 0.0) for s, w in index.terms.items()})
            checks.append(LimitCheck(index.name, "max", index.max_value, value, index.max_value - value))
    return tuple(checks)
