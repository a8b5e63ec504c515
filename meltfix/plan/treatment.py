"""Magnesium a ductile-iron treatment must add before any of it stays as the grade's residual.

Magnesium added to base iron first combines with the bath's sulphur, Mg + S -> MgS, which floats
out to the slag; then it fades (boils off and oxidises) for as long as the treated iron waits to be
poured. Only what is left counts towards the grade's Mg window. As with aluminium and dissolved
oxygen (meltfix.plan.deoxidation), the planner starts the Mg content lower by both (a debt the
nodulariser pays first, possibly below 0 %), which keeps the window linear and the plan exact; the
nodulariser's Mg content and recovery then set how much of it that takes.

Magnesium already in the analysis has met the sulphur first: a sample taken after the treatment
(or base iron carrying magnesium from returns) holds sulphur the Mg read has already bound as MgS,
up to MG_PER_S kg Mg per kg S. Only the sulphur left unbound takes new magnesium; charging the
whole reading again would count the bound sulphur twice. The grade's Mg window is on the Mg a
spark reads, which includes the Mg in MgS inclusions, so the Mg read still counts in full.
"""

from __future__ import annotations

from collections.abc import Mapping

from meltfix.plan.deoxidation import aluminium_owed_pct
from meltfix.shop.elements import ATOMIC_WEIGHT
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.materials import Material
from meltfix.shop.settings import ShopSettings

MG_PER_S = ATOMIC_WEIGHT["Mg"] / ATOMIC_WEIGHT["S"]
"""Mass of magnesium that binds one mass unit of sulphur as MgS [kg Mg / kg S]."""


def magnesium_for_sulphur_pct(s_pct: float) -> float:
    """Magnesium [wt % of the bath] that binds ``s_pct`` [wt %] of sulphur as MgS."""
    return MG_PER_S * s_pct


def magnesium_fade_pct(settings: ShopSettings) -> float:
    """Magnesium [wt %] lost between treatment and pouring at the shop's fade rate."""
    return settings.mg_fade_pct_per_min * settings.treatment_to_pour_min


def unbound_sulphur_pct(heat: Heat) -> float:
    """Sulphur [wt %] the magnesium in the analysis has not yet bound as MgS: the reading less
    what the Mg read holds at MG_PER_S (none, when the sample is of treated iron)."""
    # A sulphur reading "<L" is taken at L and a magnesium reading "<L" at 0: the safe ends, more
    # magnesium owed rather than too little.
    mg_pct = heat.analysis.lowest_pct.get("Mg", 0.0)
    return max(0.0, heat.analysis.get("S") - mg_pct / MG_PER_S)


def magnesium_owed_pct(heat: Heat, grade: Grade, settings: ShopSettings) -> Mapping[str, float]:
    """``{"Mg": x}``: the magnesium [wt % of the bath now] the unbound sulphur and fade take before
    the residual counts, for a cast-iron grade with an Mg window; else empty (no treatment to plan)."""
    if grade.family != "cast iron" or "Mg" not in grade.window_pct:
        return {}
    return {"Mg": magnesium_for_sulphur_pct(unbound_sulphur_pct(heat)) + magnesium_fade_pct(settings)}


def contents_owed_pct(heat: Heat, grade: Grade, settings: ShopSettings) -> Mapping[str, float]:
    """Every debt the bath holds against the additions [wt % of the bath now]: aluminium to the
    dissolved oxygen, magnesium to sulphur and fade."""
    return {**aluminium_owed_pct(heat, grade), **magnesium_owed_pct(heat, grade, settings)}


def nodulariser_kg(mg_kg: float, nodulariser: Material) -> float:
    """Nodulariser [kg] that brings ``mg_kg`` of magnesium into the bath: divided by its Mg content
    and its Mg recovery (the rest goes up as flare and smoke)."""
    return mg_kg / (nodulariser.composition_pct["Mg"] / 100.0 * nodulariser.recovery.get("Mg", 1.0))
