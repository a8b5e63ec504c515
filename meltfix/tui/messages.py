"""Messages the planner worker sends back to the screen (small dataclasses named as events)."""

from __future__ import annotations

from dataclasses import dataclass

from textual.message import Message

from meltfix.plan.result import Plan, RiskPlan
from meltfix.shop.heat import Heat


@dataclass
class PlanReady(Message):
    """The planner finished ``heat``, built from the inputs of ``revision``."""

    revision: int
    heat: Heat
    plan: Plan
    risk: RiskPlan | None = None
    """The plan's odds against the shop's target (the plan is ``risk.plan``)."""


@dataclass
class PlanFailed(Message):
    """The planner refused the inputs of ``revision`` (a bad heat, or an impossible lock)."""

    revision: int
    reason: str
