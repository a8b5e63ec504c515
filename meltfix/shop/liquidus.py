"""Liquidus temperature of a bath from its analysis: linear formulas, so the planner's temperature row
"temperature after >= liquidus + superheat" stays linear once multiplied by the final bath mass.

Steel: T_L = 1536 - (78 C + 7.6 Si + 4.9 Mn + 34.4 P + 38 S + 4.7 Cu + 3.1 Ni + 1.3 Cr + 3.6 Al
+ 2 Mo + 2 V + 18 Ti) °C, wt %. A widely quoted linear form; its coefficients are from memory and
differ a little between authors: H. Presoly et al., "An assessment of analytical liquidus
equations for Fe-C-Si-Mn-Al-P-alloyed steels using DSC/DTA techniques", Metall. Mater. Trans. B 52
(2021) 2821-2830, compares the published equations against measurements.

Cast iron (hypoeutectic): T_L = 1569 - 97.3 (C + Si/4 + P/2) °C, a linear liquidus in the carbon
equivalent used in foundry practice (from memory); at the eutectic CE 4.3 it gives 1151 °C.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass


@dataclass(frozen=True)
class LiquidusFormula:
    """T_L = base_c - sum(slope_c_per_pct[e] * wt %[e])."""

    name: str
    base_c: float
    """Liquidus with none of the listed elements [°C]."""
    slope_c_per_pct: Mapping[str, float]
    """Lowering of the liquidus per wt % of each element [°C per wt %]."""

    def liquidus_c(self, pct: Mapping[str, float]) -> float:
        """Liquidus of an analysis [°C] (contents in wt %; elements not listed count as 0)."""
        slopes = self.slope_c_per_pct
        # Over the analysis rather than the slopes: fewer look-ups, and fsum's correctly rounded sum
        # does not depend on the order of its terms.
        return self.base_c - math.fsum([slopes[s] * v for s, v in pct.items() if s in slopes])


STEEL = LiquidusFormula("steel, linear (1536 - sum k_i wt %_i)", 1536.0, {
    "C": 78.0, "Si": 7.6, "Mn": 4.9, "P": 34.4, "S": 38.0, "Cu": 4.7, "Ni": 3.1, "Cr": 1.3, "Al": 3.6,
    "Mo": 2.0, "V": 2.0, "Ti": 18.0})
CAST_IRON = LiquidusFormula("cast iron, 1569 - 97.3 CE (CE = C + Si/4 + P/2)", 1569.0,
                            {"C": 97.3, "Si": 97.3 / 4.0, "P": 97.3 / 2.0})


def formula_for(family: str) -> LiquidusFormula:
    """The liquidus formula of a grade family ("steel" or "cast iron")."""
    return CAST_IRON if family == "cast iron" else STEEL
