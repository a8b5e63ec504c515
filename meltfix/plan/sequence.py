"""The order of additions and their portions: what goes in first, in how many lots, with how long a
stir between them (shop settings; the order of classes is common practice, not a standard).

Pure functions of the additions and the shop's settings, so the planner, the ticket, the screen and
the command line list the same steps.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from meltfix.base.units import Units
from meltfix.shop.materials import Material
from meltfix.shop.settings import ShopSettings


@dataclass(frozen=True)
class AdditionStep:
    """One addition as the crew makes it."""

    material: str
    addition_class: str
    kg: float
    """Whole amount [kg]."""
    portions_kg: tuple[float, ...]
    """The lots it goes in as, in order [kg]; one lot when no split is needed."""
    stir_min: float
    """Stirring or dissolution time after each lot before the next [min]; 0 for a single lot."""
    metres: float | None = None
    """Length of wire to feed [m], for a wire; None otherwise."""

    def text(self, units: Units = Units()) -> str:
        """The lots in words: "3 × 200 kg, stir 2 min between", "120 m of wire", "one lot" (masses in
        ``units``)."""
        if self.metres is not None:
            return f"{self.metres:,.0f} m of wire"
        if len(self.portions_kg) == 1:
            return "one lot"
        sizes = sorted({round(units.mass(p), 1) for p in self.portions_kg}, reverse=True)
        size_text = " / ".join(f"{s:,.1f}".removesuffix(".0") for s in sizes)
        return f"{len(self.portions_kg)} × {size_text} {units.mass_unit}, stir {self.stir_min:g} min between"


def class_rank(settings: ShopSettings, addition_class: str) -> int:
    """Where ``addition_class`` comes in the shop's order (earlier = smaller)."""
    return settings.addition_order.index(addition_class)


def portions_kg(material: Material, kg: float, max_portion_kg: float | None) -> tuple[float, ...]:
    """Split ``kg`` [kg] into as few lots as keep each at most ``max_portion_kg`` [kg], as even as
    possible; a material in packs is split in whole packs (a pack larger than the limit is a lot of
    its own). A wire is fed in one run."""
    if max_portion_kg is None or kg <= max_portion_kg or material.kg_per_m is not None:
        return (kg,)
    pack = material.pack_kg
    if pack and abs(kg / pack - round(kg / pack)) < 1e-6:
        packs = int(round(kg / pack))
        per_lot = max(1, math.floor(max_portion_kg / pack + 1e-9))
        lots = math.ceil(packs / per_lot)
        # Spread the packs evenly: the first lots take one more when they do not divide.
        base, extra = divmod(packs, lots)
        return tuple((base + (1 if k < extra else 0)) * pack for k in range(lots))
    lots = math.ceil(kg / max_portion_kg - 1e-9)
    return tuple(kg / lots for _ in range(lots))


def sequence_additions(additions: Sequence[tuple[Material, float]], settings: ShopSettings) -> tuple[AdditionStep, ...]:
    """The additions (material, kg) in the shop's order of classes (the given order within a class),
    each split into its lots; wire in metres from the material's ``kg_per_m``."""
    ordered = sorted(additions, key=lambda item: class_rank(settings, item[0].addition_class))  # stable: given order kept
    steps = []
    for material, kg in ordered:
        lots = portions_kg(material, kg, settings.max_portion_kg)
        metres = None if material.kg_per_m is None else kg / material.kg_per_m
        steps.append(AdditionStep(material.name, material.addition_class, kg, lots,
                                  settings.stir_min if len(lots) > 1 else 0.0, metres))
    return tuple(steps)
