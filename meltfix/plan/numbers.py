"""How every output writes a number: one rule per quantity, the same on the command line, the
screen, the crew ticket, the replay and the report.

Contents: ppm for N, O, B and H (the way spectrometers and gas analysers report them), wt % for
everything else. A limit is written with the decimals its standard uses for that element; a
content measured or predicted against it with one decimal more, so a reading that rounds onto
the limit still shows on which side it lies. Recoveries are per cent with one decimal. Money has
two decimals and thousands separators, masses one decimal below a tonne.

No Textual, NumPy or solver here: the ticket and the screen's first paint use it without the planner.
"""

from __future__ import annotations

from meltfix.base.units import Units
from meltfix.plan.result import LIMIT_TOL_PCT, Addition, Binding
from meltfix.shop.elements import PPM_ELEMENTS, PPM_PER_PCT, SYMBOLS

# Decimals of a limit as the heat-analysis tables of the standards write it: C, Mn, Si, Cr, Ni, Mo,
# Cu, V to two places (SAE 1045 "C 0.43-0.50, Mn 0.60-0.90"); P, S and the micro-alloying and
# residual elements to three ("P 0.040 max"). From memory of ASTM A29 and A576 Table 1, whose
# limits ASTM A751 rounds observed values to (by the rounding method of ASTM E29); the built-in
# grade files agree. Indices (CEV, CE) have two (EN 10025-2 "CEV max 0.45").
_TWO_PLACES = frozenset({"C", "Mn", "Si", "Cr", "Ni", "Mo", "Cu", "V", "W", "Co"})
_DEFAULT_PLACES = 3
_MAX_PLACES = 5


def unit_of(symbol: str) -> str:
    """The unit an element is typed and shown in: ppm for N, O, B, H, otherwise wt %."""
    return "ppm" if symbol in PPM_ELEMENTS else "%"


def limit_places(symbol: str) -> int:
    """Decimals of a limit [wt %] of ``symbol`` (an element or an index name)."""
    return 2 if symbol in _TWO_PLACES or symbol not in SYMBOLS else _DEFAULT_PLACES


def _ppm_text(ppm: float, signed: bool = False) -> str:
    sign = "+" if signed else ""
    return f"{ppm:{sign}.0f}" if abs(ppm) >= 10 else f"{ppm:{sign}.1f}"


def limit_text(symbol: str, pct: float) -> str:
    """A limit (or an aim) in the element's unit, without the unit: "0.50", "0.040", "1000".

    A value the standard's decimals would round is written with as many more as it needs, so a
    shop's own limit of 0.045 never reads as 0.05.
    """
    if symbol in PPM_ELEMENTS:
        return _ppm_text(pct * PPM_PER_PCT)
    places = limit_places(symbol)
    while places < _MAX_PLACES and abs(round(pct, places) - pct) > 1e-9:
        places += 1
    return f"{pct:.{places}f}"


def content_text(symbol: str, pct: float) -> str:
    """A content [wt %] measured or predicted, in the element's unit, without the unit."""
    if symbol in PPM_ELEMENTS:
        return _ppm_text(pct * PPM_PER_PCT)
    return f"{pct:.{limit_places(symbol) + 1}f}"


def with_unit(symbol: str, text: str) -> str:
    """A limit's or content's text followed by the element's unit, for a sentence: "0.50 %", "80 ppm"."""
    return f"{text} {unit_of(symbol)}"


def margin_text(symbol: str, margin_pct: float) -> str:
    """A signed distance to a limit [wt %] (negative = outside), as a content is written.

    Float noise within LIMIT_TOL_PCT reads "+0.000"; a real miss keeps its minus sign even when
    it rounds to zero, so a table never shows an inside-looking "-0.000" or an unmarked miss.
    """
    value = 0.0 if abs(margin_pct) <= LIMIT_TOL_PCT else margin_pct
    if symbol in PPM_ELEMENTS:
        text = _ppm_text(value * PPM_PER_PCT, signed=True)
    else:
        text = f"{value:+.{limit_places(symbol) + 1}f}"
    return text.replace("+", "-", 1) if value < 0 and not text.startswith("-") else text


def miss_text(symbol: str, by_pct: float) -> str:
    """How far a limit is missed [wt %, above 0], in the element's unit without it; a miss smaller than
    the last decimal a content shows reads "<0.001", never as an inside-looking "0.000"."""
    text = content_text(symbol, by_pct)
    if by_pct > LIMIT_TOL_PCT and float(text) == 0.0:
        step = text[:-1] + "1"  # "0.000" -> "0.001", "0.0" (ppm) -> "0.1"
        return "<" + step
    return text


def cell_text(symbol: str, pct: float, below_limit: bool = False) -> str:
    """A content as the user would type it into the grid (round-trips through parse_reading)."""
    value = pct * PPM_PER_PCT if symbol in PPM_ELEMENTS else pct
    return ("<" if below_limit else "") + f"{value:.10g}"


def kg_text(kg: float) -> str:
    """A mass [kg]: one decimal below a tonne, whole kilograms above."""
    return f"{kg:,.1f}" if abs(kg) < 1000 else f"{kg:,.0f}"


def mass_text(kg: float, units: Units = Units()) -> str:
    """A mass [kg] with its unit, in the shop's units (kg_text's decimals): "1,234 kg", "2,720 lb"."""
    return f"{kg_text(units.mass(kg))} {units.mass_unit}"


def temperature_text(c: float, units: Units = Units()) -> str:
    """A temperature [°C] in whole degrees of the shop's scale: "1600 °C", "2912 °F"."""
    return f"{units.temperature(c):.0f} {units.temperature_unit}"


def degrees_text(delta_c: float, units: Units = Units()) -> str:
    """A temperature difference [°C] in whole degrees of the shop's scale (no offset): "25 °C", "45 °F"."""
    return f"{units.temperature_change(delta_c):.0f} {units.temperature_unit}"


def pack_mass_text(pack_kg: float, units: Units = Units()) -> str:
    """One pack's mass in the shop's mass unit, as its label gives it ("25", "55.12")."""
    return f"{units.mass(pack_kg):.4g}"


def packs_text(addition: Addition, units: Units = Units()) -> str:
    """Whole packs as "count×pack mass" in the shop's mass unit ("2×25"), or "" for a loose addition."""
    if addition.packs is None or addition.pack_kg is None:
        return ""
    return f"{addition.packs}×{pack_mass_text(addition.pack_kg, units)}"


def money_text(amount: float, places: int = 2, signed: bool = False) -> str:
    """An amount of money with thousands separators (the currency written beside it): two decimals,
    or ``places`` (0 for the whole units of a summary over many heats); ``signed`` writes "+"."""
    return f"{amount:{'+' if signed else ''},.{places}f}"


def recovery_text(fraction: float | None) -> str:
    """A recovery (the recipe book's fraction 0-1) as per cent with one decimal: "90.0 %"."""
    return "–" if fraction is None else f"{100 * fraction:.1f} %"


def binding_text(binding: Binding, units: Units = Units()) -> tuple[str, str]:
    """What loosening a binding saves and per what, in the shop's units: ("12.50", "1 lb more in stock")."""
    saving, unit = binding.saving, binding.unit
    if units.us and binding.per == "kg":
        saving, unit = units.per_mass(saving), f"1 {units.mass_unit} more in stock"
    elif units.us and binding.per == "t":
        saving, unit = units.per_ton(saving), f"1 {units.ton_unit} more free capacity"
    elif units.us and binding.per == "degC":
        saving, unit = saving / units.temperature_change(1.0), f"1 {units.temperature_unit} more allowed drop"
    return money_text(saving), unit
