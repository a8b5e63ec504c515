"""Aluminium that dissolved oxygen takes before any of it stays in the bath.

An oxygen probe reads the oxygen dissolved in the bath. Aluminium added to such a bath first
combines with that oxygen, 2 Al + 3 O -> Al2O3, and the alumina floats out to the slag; only the
aluminium beyond that counts towards the grade's Al window.

Whether the planner must count that oxygen depends on what the shop's aluminium recoveries were
measured on, which the recipe book states (shop.toml ``aluminium_recovery_basis``):

- ``"killed"``: the recovery is the share of aluminium that stays when it is added to steel already
  killed (no free oxygen): losses to slag and air only. The oxygen read is then owed on top, so the
  planner starts the Al content lower by the stoichiometric amount (possibly below 0 %: a debt the
  additions pay first), which keeps the window linear in the additions and the plan exact.
- ``"tap"``: the recovery is the share of the aluminium added from tap onwards that is found in the
  steel, so the oxygen it bound on the way is already inside it. Subtracting the reading again would
  count the oxygen twice: the reading is only noted.
"""

from __future__ import annotations

from collections.abc import Mapping

from meltfix.base.units import Units
from meltfix.plan.numbers import content_text, mass_text, with_unit
from meltfix.shop.elements import ATOMIC_WEIGHT, PPM_PER_PCT
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat

AL_PER_O = 2.0 * ATOMIC_WEIGHT["Al"] / (3.0 * ATOMIC_WEIGHT["O"])
"""Mass of aluminium that binds one mass unit of oxygen as Al2O3 [kg Al / kg O]."""


def aluminium_for_oxygen_pct(dissolved_o_ppm: float) -> float:
    """Aluminium [wt % of the bath] that binds ``dissolved_o_ppm`` [ppm] of oxygen as Al2O3.

    Stoichiometry only: the residual Al the grade asks for and the Al lost to slag and air
    (the material's recovery) come on top.
    """
    return AL_PER_O * dissolved_o_ppm / PPM_PER_PCT


def aluminium_owed_pct(heat: Heat, grade: Grade) -> Mapping[str, float]:
    """Contents [wt % of the bath now] that the dissolved oxygen takes before additions count.

    ``{"Al": x}`` when the heat has an oxygen reading, the grade sets an Al window and the
    aluminium recoveries are measured on killed steel; else empty: without an Al window the shop
    does not kill this grade with aluminium, and recoveries measured from tap already hold the
    oxygen; either way the reading is only noted (:func:`oxygen_notes`).
    """
    if (not heat.dissolved_o_ppm or "Al" not in grade.window_pct  # no reading, or 0 ppm: nothing owed
            or grade.aluminium_recovery_basis == "tap"):
        return {}
    return {"Al": aluminium_for_oxygen_pct(heat.dissolved_o_ppm)}


def oxygen_notes(heat: Heat, grade: Grade, owed: Mapping[str, float], units: Units = Units()) -> list[str]:
    """What the plan did with the heat's oxygen reading, in words (masses in ``units``); ``owed`` is
    :func:`aluminium_owed_pct` of the same heat and grade."""
    if not heat.dissolved_o_ppm:
        return []
    if owed:
        return [f"{mass_text(heat.bath_kg * pct / 100.0, units)} of {s} goes to deoxidation ({_o_text(heat.dissolved_o_ppm)} "
                "dissolved O bound as Al2O3) before any stays in the bath; the heat of that reaction is not "
                "credited to the temperature" for s, pct in owed.items()]
    if "Al" not in grade.window_pct:
        return [f"the dissolved O reading is not used: grade {grade.name} sets no Al window"]
    return [f"the dissolved O reading ({_o_text(heat.dissolved_o_ppm)}) is not counted again: the aluminium "
            "recoveries are measured from tap and already allow for the oxygen (shop.toml "
            "aluminium_recovery_basis)"]


def _o_text(ppm: float) -> str:
    """A dissolved-oxygen reading [ppm] as every output writes an O content."""
    return with_unit("O", content_text("O", ppm / PPM_PER_PCT))
