"""Messages the planner worker sends back to the screen (small dataclasses named as events)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from textual.message import Message

from meltfix.heat import Heat

if TYPE_CHECKING:  # the planner pulls in SciPy, loaded only by the planning worker
    from meltfix.planner import Plan
    from meltfix.risk import RiskPlan


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
