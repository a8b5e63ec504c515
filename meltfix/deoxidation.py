"""Aluminium that dissolved oxygen takes before any of it stays in the bath (DESIGN §3).

An oxygen probe reads the oxygen dissolved in the bath. Aluminium added to such a bath first
combines with that oxygen, 2 Al + 3 O -> Al2O3, and the alumina floats out to the slag; only the
aluminium beyond that counts towards the grade's Al window. The planner therefore starts the Al
content lower by the stoichiometric amount (possibly below 0 %: a debt the additions pay first),
which keeps the window linear in the additions and the plan exact.
"""

from __future__ import annotations

from collections.abc import Mapping

from meltfix.elements import ATOMIC_WEIGHT, PPM_PER_PCT
from meltfix.heat import Heat
from meltfix.recipes import Grade

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

    ``{"Al": x}`` when the heat has an oxygen reading and the grade sets an Al window, else empty:
    without an Al window the shop does not kill this grade with aluminium, and the reading is only
    noted.
    """
    if not heat.dissolved_o_ppm or "Al" not in grade.window_pct:  # no reading, or 0 ppm: nothing owed
        return {}
    return {"Al": aluminium_for_oxygen_pct(heat.dissolved_o_ppm)}
