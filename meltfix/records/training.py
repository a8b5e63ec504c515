"""A trainee's own additions at a sample of a replayed heat, scored against the grade and the
plan meltfix makes there."""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from types import MappingProxyType

from meltfix.base.errors import InputError
from meltfix.plan.massbalance import bath_after, temperature_drop_c
from meltfix.plan.numbers import degrees_text, mass_text
from meltfix.plan.result import Plan
from meltfix.records.replay import ReplayStep, limit_misses
from meltfix.shop.elements import parse_number
from meltfix.shop.heat import stage_material
from meltfix.shop.recipes import RecipeBook


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
    """Read a trainee's additions: ``"HC FeMn 180; FeSi 75 40"`` (name, then the mass in the shop's
    unit, kg or lb; ``;`` or a new line between), as (material, kg).

    A name may be cut short when only one material starts that way ("hc femn 180").
    """
    units = book.settings.units
    unit = units.mass_unit
    totals: dict[str, float] = {}
    parts = [p.strip() for p in entry_text.replace("\n", ";").split(";")]
    for n, part in enumerate((p for p in parts if p), start=1):
        where = f"entry {n}"
        words = part.split()
        if words[-1].lower() == unit:
            words = words[:-1]
        if len(words) < 2:
            raise InputError(source, where, f"'{part}': write the material then the {unit}, e.g. 'HC FeMn 180'")
        amount = parse_number(words[-1], source, where)
        if amount <= 0:
            raise InputError(source, where, f"'{part}': the {unit} must be above 0")
        name = _match_material(" ".join(words[:-1]), book, source, where)
        totals[name] = totals.get(name, 0.0) + units.kg(amount)
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
    units = book.settings.units  # what the trainee reads
    used = [(stage_material(step.heat, book, name), kg) for name, kg in entry]
    final_kg, predicted = bath_after(step.bath_kg, step.sample.analysis.pct, used)
    breaks = []
    if step.heat.capacity_kg is not None and final_kg > step.heat.capacity_kg * (1 + 1e-9):
        breaks.append(f"the bath grows to {mass_text(final_kg, units)}, above the vessel's "
                      f"{mass_text(step.heat.capacity_kg, units)}")
    max_drop = step.heat.drop_limit_c(book.settings)
    drop = temperature_drop_c(step.bath_kg, used) if used else 0.0
    if max_drop is not None and drop > max_drop + 1e-9:
        breaks.append(f"the additions chill the bath by {degrees_text(drop, units)}, more than the "
                      f"{degrees_text(max_drop, units)} allowed")
    for name, kg in entry:
        material = book.material(name)
        if name in grade.forbidden:
            breaks.append(f"grade {grade.name} must never receive {name}")
        if not material.allowed_at(step.heat.stage):
            breaks.append(f"{name} is not added at the {step.heat.stage}")
        if material.stock_kg is not None and kg > material.stock_kg + 1e-9:
            breaks.append(f"{mass_text(kg, units)} of {name} is more than the {mass_text(material.stock_kg, units)} "
                          "in stock")
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
