"""The spectrometer's repeatability: how far two burns of one sample may differ, by element and content.

Used by the export reader to flag burns that disagree and by the odds to scatter an analysis.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

# Repeatability limit r [wt %] as a function of content c [wt %]: r = max(floor, factor*sqrt(c), 0.01*c).
# The square-root law is the usual shape of precision-versus-content in interlaboratory studies of
# steel analysis (ISO 5725-style statements, from memory); r ≈ 2.8·s_r is the ISO 5725-6 limit for two
# results under repeatability conditions (from memory). ASTM E415 (spark AES of carbon and low-alloy
# steel) carries a precision statement, but its figures could not be retrieved, so the coefficients
# below are common practice, not from a standard: factor 0.018 gives r ≈ 0.008 % C at 0.2 % C and
# ≈ 0.018 % Mn at 1 % Mn; the relative term keeps high-alloy contents (18 % Cr -> r 0.18 %) from
# flagging ordinary spark scatter; the floor is the instrument's noise near its detection limit.
_RELATIVE_R = 0.01
_DEFAULT_FACTOR = 0.018
_DEFAULT_FLOOR_PCT = 0.002
_FLOOR_PCT: dict[str, float] = {
    "P": 0.001, "S": 0.001, "Al": 0.001, "V": 0.001, "Nb": 0.001, "Ti": 0.001, "Sn": 0.001,
    "Ca": 0.0005, "W": 0.005,
    "N": 0.0008,  # 8 ppm
    "B": 0.0002,  # 2 ppm
}
# Boron lines are sensitive and its contents tiny: a lower factor (r ≈ 3.6 ppm at 20 ppm B).
_FACTOR: dict[str, float] = {"B": 0.008}


@dataclass(frozen=True)
class RepeatabilityCurve:
    """Largest difference [wt %] two burns of one sample may show for one element, by content."""

    floor_pct: float
    factor: float
    """Coefficient of the square-root term [wt %^0.5]."""
    relative: float = _RELATIVE_R

    def limit_pct(self, content_pct: float) -> float:
        """Repeatability limit r [wt %] at ``content_pct`` [wt %]."""
        content = max(content_pct, 0.0)
        return max(self.floor_pct, self.factor * math.sqrt(content), self.relative * content)


def default_curve(symbol: str) -> RepeatabilityCurve:
    """The built-in repeatability curve of an element (common practice, see the module notes)."""
    return RepeatabilityCurve(_FLOOR_PCT.get(symbol, _DEFAULT_FLOOR_PCT), _FACTOR.get(symbol, _DEFAULT_FACTOR))
