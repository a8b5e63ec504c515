"""The screen's inputs as typed, turned into a Heat or into one reason per field at fault.

Kept free of Textual so the rules (what is a valid cell, which field an error belongs to) are
plain functions, and the screen only shows their answer.
"""

from __future__ import annotations

import math
import re
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field

from meltfix.base.errors import InputError
from meltfix.base.units import Units
from meltfix.shop.analysis import Analysis, parse_reading
from meltfix.shop.elements import PPM_ELEMENTS, parse_number
from meltfix.shop.heat import Heat, unmeasured, validate_heat
from meltfix.shop.recipes import RecipeBook

SOURCE = "screen"
# "60,000" or "60.000": a thousands separator or a decimal mark? Guessing would put a 60 kg or a
# 60 t bath in the plan, so such a weight is refused with the reason.
_GROUPED = re.compile(r"^\d{1,3}([.,]\d{3})+$")
# Keys of Draft.errors besides "analysis.<symbol>": whole-heat fields and the materials' overrides.
BATH, CAPACITY, GRADE, ANALYSIS, MATERIALS = "bath_kg", "capacity_kg", "grade", "analysis", "materials"
TEMPERATURE = "temperature_c"
# What a melter types in a cell to declare the element knowingly not analysed (case-blind).
NOT_MEASURED_WORDS = frozenset({"nm", "n/m", "n.m.", "not measured"})
NOT_MEASURED = "not measured: type the value, or nm to plan with its limits unchecked"


@dataclass(frozen=True)
class HeatInputs:
    """What the user has typed: texts exactly as entered, nothing parsed yet."""

    grade: str
    bath_text: str
    capacity_text: str
    stage: str
    cells: Mapping[str, str] = field(default_factory=dict)
    """Element symbol -> cell text (wt %, or ppm for N, O, B, H); empty = not measured."""
    temperature_text: str = ""
    """The bath temperature taken with this sample [°C]; empty = no reading."""


@dataclass(frozen=True)
class Draft:
    """A heat ready to plan, or the reasons it is not (field key -> reason in plain words)."""

    heat: Heat | None
    errors: Mapping[str, str]


def cell_key(symbol: str) -> str:
    return f"{ANALYSIS}.{symbol}"


def mass_field(kg: float | None, units: Units) -> str:
    """A mass [kg] as its field shows it, in the shop's mass unit; empty for none."""
    return "" if kg is None else f"{units.mass(kg):g}"


def temperature_field(c: float | None, units: Units) -> str:
    """A temperature [°C] as its field shows it, in the shop's scale; empty for none."""
    return "" if c is None else f"{units.temperature(c):g}"


def build_heat(base: Heat, inputs: HeatInputs, book: RecipeBook) -> Draft:
    """Replace the base heat's grade, weights, stage and analysis with the typed inputs.

    ``base`` carries what the screen does not type: the heat's id and this heat's material
    overrides. Every field is checked, so all faults show at once, not one at a time.
    """
    errors: dict[str, str] = {}
    units = book.settings.units  # typed in the shop's units, planned in SI
    bath_kg = _exact(inputs.bath_text, mass_field(base.bath_kg, units), base.bath_kg,
                     lambda: _weight(inputs.bath_text, BATH, errors, units, required=True))
    capacity_kg = _exact(inputs.capacity_text, mass_field(base.capacity_kg, units), base.capacity_kg,
                         lambda: _weight(inputs.capacity_text, CAPACITY, errors, units, required=False))
    temperature_c = _exact(inputs.temperature_text, temperature_field(base.temperature_c, units), base.temperature_c,
                           lambda: _temperature(inputs.temperature_text, errors, units))
    pct: dict[str, float] = {}
    below: set[str] = set()
    declared: set[str] = set()
    for symbol, raw in inputs.cells.items():
        if not raw.strip():
            continue
        if raw.strip().lower() in NOT_MEASURED_WORDS:
            declared.add(symbol)
            continue
        try:
            reading = parse_reading(raw, SOURCE, cell_key(symbol), ppm=symbol in PPM_ELEMENTS)
        except InputError as exc:
            errors[cell_key(symbol)] = exc.message
            continue
        pct[symbol] = reading.pct
        if reading.below_limit:
            below.add(symbol)
    analysis = Analysis(pct=pct, below_limit=frozenset(below))
    if analysis.total_pct > 100:
        errors[ANALYSIS] = f"the elements add up to {analysis.total_pct:.3f} %, over 100 %"
    if errors:
        return Draft(None, errors)
    # A declaration from the heat file holds until a value is typed into that cell.
    not_measured = frozenset((base.not_measured - set(pct)) | declared)
    heat = base.with_changes(grade=inputs.grade, bath_kg=bath_kg, capacity_kg=capacity_kg,
                             temperature_c=temperature_c, stage=inputs.stage, analysis=analysis, not_measured=not_measured)
    if inputs.grade in book.grades:
        # An empty cell the grade needs is never 0 %: each is marked where it is, and nothing plans.
        missing = {cell_key(s): NOT_MEASURED for s in unmeasured(heat, book.grades[inputs.grade])}
        if missing:
            return Draft(None, missing)
    try:
        validate_heat(heat, book, SOURCE)
    except InputError as exc:
        if exc.field.startswith(f"{ANALYSIS}.") or exc.field in (BATH, CAPACITY, GRADE, TEMPERATURE):
            return Draft(None, {exc.field: exc.message})  # said in place, beside the cell at fault
        return Draft(None, {MATERIALS: f"{exc.field}: {exc.message}"})
    return Draft(heat, {})


def _exact(raw: str, shown: str, value: float | None, parse: Callable[[], float | None]) -> float | None:
    """The heat's own value while its field still shows it as written (a bath of 80,000 kg shown
    as 176370 lb stays 80,000 kg, not 80,000.2); else what ``parse`` reads from the text."""
    return value if shown and raw.strip() == shown else parse()


def _temperature(raw: str, errors: dict[str, str], units: Units) -> float | None:
    scale = units.temperature_unit
    text = raw.strip().removesuffix(scale).removesuffix(scale[-1]).strip()
    value = _positive(text, raw, TEMPERATURE, errors, f"a bath temperature in {scale}") if text else None
    return None if value is None else units.celsius(value)


def _weight(raw: str, key: str, errors: dict[str, str], units: Units, *, required: bool) -> float | None:
    unit = units.mass_unit
    text = raw.strip().removesuffix(unit).strip().replace("_", "").replace(" ", "")
    if not text:
        if required:
            errors[key] = f"is needed ({unit})"
        return None
    if _GROUPED.match(text):
        errors[key] = f"'{raw.strip()}' is ambiguous: write the weight in {unit} without a thousands separator"
        return None
    value = _positive(text, raw, key, errors, f"a weight above 0 {unit}")
    return None if value is None else units.kg(value)


def _positive(text: str, raw: str, key: str, errors: dict[str, str], what: str) -> float | None:
    """``text`` as a finite number above 0, else None with the reason in ``errors[key]``."""
    try:
        value = parse_number(text, SOURCE, key)
    except InputError as exc:
        errors[key] = exc.message
        return None
    if not math.isfinite(value) or value <= 0:
        errors[key] = f"must be {what}, got '{raw.strip()}'"
        return None
    return value
