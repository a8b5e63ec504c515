"""How the screen and the crew ticket write numbers: one place, so both read alike.

No Textual here: the ticket is written from the same helpers without loading the screen.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from meltfix.elements import PPM_ELEMENTS, PPM_PER_PCT

if TYPE_CHECKING:  # the planner pulls in SciPy; these helpers need only its types
    from meltfix.planner import Addition


def unit_of(symbol: str) -> str:
    """The unit an element is typed and shown in: ppm for N, O, B, H, otherwise wt %."""
    return "ppm" if symbol in PPM_ELEMENTS else "%"


def content_text(symbol: str, pct: float) -> str:
    """A content [wt %] written in the element's own unit, without the unit."""
    if symbol in PPM_ELEMENTS:
        return f"{pct * PPM_PER_PCT:.0f}" if pct * PPM_PER_PCT >= 10 else f"{pct * PPM_PER_PCT:.1f}"
    return f"{pct:.3f}" if pct < 10 else f"{pct:.2f}"


def cell_text(symbol: str, pct: float, below_limit: bool = False) -> str:
    """A content as the user would type it into the grid (round-trips through parse_reading)."""
    value = pct * PPM_PER_PCT if symbol in PPM_ELEMENTS else pct
    return ("<" if below_limit else "") + f"{value:.10g}"


def kg_text(kg: float) -> str:
    return f"{kg:,.1f}" if kg < 1000 else f"{kg:,.0f}"


def packs_text(addition: "Addition") -> str:
    """Whole packs as "count×pack kg" ("2×25"), or "" for a loose addition."""
    if addition.packs is None or addition.pack_kg is None:
        return ""
    return f"{addition.packs}×{addition.pack_kg:g}"


def money_text(amount: float) -> str:
    return f"{amount:,.2f}"
