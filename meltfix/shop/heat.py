"""A heat to be trimmed: what HEAT.toml holds (its keys are a contract), plus this heat's own overrides."""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.shop.analysis import Analysis, analysis_from_table
from meltfix.shop.elements import PPM_ELEMENTS, PPM_PER_PCT, element_sort_key, normalise_symbol
from meltfix.shop.grades import Grade
from meltfix.shop.liquidus import formula_for
from meltfix.shop.materials import Material
from meltfix.shop.recipes import RecipeBook
from meltfix.shop.settings import ShopSettings
from meltfix.shop.toml_values import identifier, known_keys, number, read_toml, require, table, text

_HEAT_KEYS = {"heat", "grade", "bath_kg", "capacity_kg", "analysis", "temperature_c", "max_temp_drop_c",
              "stage", "switch_off", "lock_kg", "price_per_kg", "stock_kg", "dissolved_o_ppm", "not_measured"}
# Oxygen dissolved in liquid iron saturates (against FeO) at about 0.23 % = 2300 ppm at 1600 °C
# (from memory): a probe reading above this bound is a slip of the pen (wt % typed as ppm, say).
_MAX_DISSOLVED_O_PPM = 2500.0


@dataclass(frozen=True)
class Heat:
    """One heat at one sample: its bath, its analysis and this heat's changes to the recipe book."""

    heat_id: str
    grade: str
    bath_kg: float
    """Liquid bath mass now [kg]."""
    analysis: Analysis
    capacity_kg: float | None = None
    """Most liquid the vessel can hold [kg]; None = not limited."""
    temperature_c: float | None = None
    """Bath temperature at the sample [°C], when measured."""
    max_temp_drop_c: float | None = None
    """Largest drop the additions may cause [°C]; None = the shop's setting."""
    stage: str = "ladle"
    switched_off: frozenset[str] = frozenset()
    """Materials not to be used on this heat."""
    locked_kg: Mapping[str, float] = field(default_factory=dict)
    """Materials fixed at an amount [kg] (e.g. already weighed out)."""
    price_per_kg: Mapping[str, float] = field(default_factory=dict)
    """This heat's price overrides [currency/kg]."""
    stock_kg: Mapping[str, float] = field(default_factory=dict)
    """This heat's stock overrides [kg]."""
    dissolved_o_ppm: float | None = None
    """Oxygen dissolved in the bath by an oxygen probe [ppm]; None = not measured. Distinct from any
    O in the analysis: it is the oxygen aluminium will bind before any Al stays in the bath."""
    not_measured: frozenset[str] = frozenset()
    """Elements the grade limits that were knowingly not analysed: their limits go unchecked (and
    say so in a caution) instead of the plan stopping. Never taken as 0 %."""

    def with_changes(self, **changes: Any) -> "Heat":
        return replace(self, **changes)

    def material_price_per_kg(self, material: Material) -> float:
        """What ``material`` costs on this heat [currency/kg]: the heat's override, else the book's price."""
        return self.price_per_kg.get(material.name, material.price_per_kg)

    def material_stock_kg(self, material: Material) -> float | None:
        """How much of ``material`` this heat may use [kg]: the heat's override, else the book's stock;
        None = unlimited."""
        return self.stock_kg.get(material.name, material.stock_kg)

    def drop_limit_c(self, settings: ShopSettings) -> float | None:
        """Largest temperature drop the additions may cause [°C]: the heat's own, else its stage's,
        else the shop's; None = not limited."""
        if self.max_temp_drop_c is not None:
            return self.max_temp_drop_c
        stage = settings.stages.get(self.stage)
        if stage is not None and stage.max_temp_drop_c is not None:
            return stage.max_temp_drop_c
        return settings.max_temp_drop_c


def usable_materials(heat: Heat, book: RecipeBook) -> list[Material]:
    """The book's materials this heat may receive, as they behave at the heat's stage (its
    recoveries there): allowed at the stage, not switched off, and not forbidden by its grade unless
    locked (a lock is the user's explicit choice), in the book's order."""
    forbidden = book.grade(heat.grade).forbidden
    return [m.at_stage(heat.stage) for m in book.materials
            if m.allowed_at(heat.stage) and m.name not in heat.switched_off
            and (m.name not in forbidden or m.name in heat.locked_kg)]


def stage_material(heat: Heat, book: RecipeBook, name: str) -> Material:
    """The book's material ``name`` as it behaves at the heat's stage (its recoveries there)."""
    return book.material(name).at_stage(heat.stage)


def unmeasured(heat: Heat, grade: Grade) -> list[str]:
    """Elements the grade's limits need that the analysis lacks and the heat has not declared
    ``not_measured``, in sheet order. A plan built without them would take them as 0 %."""
    missing = grade.needed_elements.difference(heat.analysis.pct, heat.not_measured)
    return sorted(missing, key=element_sort_key)


def checked_grade(heat: Heat, grade: Grade) -> Grade:
    """The grade as this heat can be checked against it: the windows, aims and indices that read an
    element declared ``not_measured`` are left out (a caution says so), never checked against 0 %."""
    if not heat.not_measured & grade.needed_elements:
        return grade
    skip = heat.not_measured
    return replace(
        grade,
        window_pct=MappingProxyType({s: w for s, w in grade.window_pct.items() if s not in skip}),
        aim_pct=MappingProxyType({s: a for s, a in grade.aim_pct.items() if s not in skip}),
        indices=tuple(i for i in grade.indices if not {s for s, w in i.terms.items() if w} & skip),
    )


def unchecked_caution(heat: Heat) -> tuple[str, ...]:
    """The caution a plan carries first when the heat declares elements not measured (none otherwise)."""
    if not heat.not_measured:
        return ()
    listed = ", ".join(sorted(heat.not_measured, key=element_sort_key))
    return (f"NOT MEASURED: {listed} — declared not measured, so the limits that read them are NOT checked by "
            "this plan and are left out of its odds; analyse them before the heat is released.",)


def plausibility_error(heat: Heat, settings: ShopSettings, family: str, source: object) -> InputError | None:
    """The first value outside what the shop's baths can hold, as one error naming the field and the
    likely slip; None when every value is plausible."""
    low, high = settings.bath_kg_range
    bath = heat.bath_kg
    if bath < low:
        slip = "; tonnes?" if low <= bath * 1000 <= high else ""
        return InputError(source, "bath_kg", f"bath_kg {bath:g}: below the shop's {low:,.0f} kg{slip}")
    if bath > high:
        slip = "; grams?" if low <= bath / 1000 <= high else ""
        return InputError(source, "bath_kg", f"bath_kg {bath:g}: above the shop's {high:,.0f} kg{slip}")
    for symbol, pct in heat.analysis.pct.items():
        most = settings.plausible_max_pct.get(symbol)
        if most is None or pct <= most:
            continue
        if symbol in PPM_ELEMENTS and pct <= 100 and pct / PPM_PER_PCT <= most:
            slip = f"; ppm? write \"{pct:g} ppm\""
        elif pct / 100 <= most:
            slip = f"; {pct / 100:g}?"
        else:
            slip = ""
        return InputError(source, f"analysis.{symbol}",
                          f"{symbol} {pct:g} %: a {family} bath holds at most {most:g} %{slip}")
    return None


def validate_heat(heat: Heat, book: RecipeBook, source: object = "heat") -> Heat:
    """Check a heat against the recipe book; raise InputError naming the field at fault."""
    if not math.isfinite(heat.bath_kg) or heat.bath_kg <= 0:
        raise InputError(source, "bath_kg", f"must be a finite weight above 0 kg, got {heat.bath_kg!r}")
    grade = book.grades.get(heat.grade)
    if grade is None:
        known = ", ".join(book.grades)
        raise InputError(source, "grade", f"unknown grade '{heat.grade}' (the recipe book has: {known})")
    if heat.capacity_kg is not None:
        if not math.isfinite(heat.capacity_kg):
            raise InputError(source, "capacity_kg", f"must be finite, got {heat.capacity_kg!r}")
        if heat.capacity_kg < heat.bath_kg:
            raise InputError(source, "capacity_kg",
                             f"{heat.capacity_kg:g} kg is less than the bath itself ({heat.bath_kg:g} kg)")
    if heat.stage not in book.settings.stages:
        raise InputError(source, "stage", f"'{heat.stage}' is not a stage of this shop (shop.toml lists: "
                         f"{', '.join(book.settings.stages)})")
    if heat.temperature_c is not None:
        # A bath below the liquidus of its own analysis would be (partly) frozen: a slip of the pen
        # or a wrong analysis, never something to plan additions for.
        liquidus = formula_for(grade.family).liquidus_c(heat.analysis.pct)
        if heat.temperature_c < liquidus:
            raise InputError(source, "temperature_c", f"{heat.temperature_c:g} °C is below the liquidus of the "
                             f"measured analysis ({liquidus:.0f} °C): the bath would be frozen")
    if heat.dissolved_o_ppm is not None and not 0 <= heat.dissolved_o_ppm <= _MAX_DISSOLVED_O_PPM:
        raise InputError(source, "dissolved_o_ppm", f"{heat.dissolved_o_ppm!r} ppm is outside 0..{_MAX_DISSOLVED_O_PPM:g} "
                         "ppm (oxygen saturates liquid iron at about 2300 ppm)")
    if heat.switched_off or heat.locked_kg or heat.price_per_kg or heat.stock_kg:  # most heats override nothing
        _check_overrides(heat, book, grade, source)
    implausible = plausibility_error(heat, book.settings, grade.family, source)
    if implausible is not None:
        raise implausible
    missing = unmeasured(heat, grade)
    if missing:
        listed = ", ".join(missing)
        raise InputError(source, "analysis", f"{listed} not measured: grade {heat.grade} limits "
                         f"{'them' if len(missing) > 1 else 'it'}; add the value, or declare "
                         f"not_measured = {json.dumps(missing)} to plan with those limits unchecked")
    measured_twice = sorted(heat.not_measured.intersection(heat.analysis.pct), key=element_sort_key)
    if measured_twice:
        raise InputError(source, "not_measured", f"{', '.join(measured_twice)} also in the analysis: "
                         "an element is either measured or not")
    return heat


def _check_overrides(heat: Heat, book: RecipeBook, grade: Grade, source: object) -> None:
    """Every material the heat switches off, locks, prices or stocks is in the book; every lock
    fits its stock, its stage and the grade, and is not also switched off."""
    names = set(book.material_names)
    for label, entries in (("switch_off", heat.switched_off), ("lock_kg", heat.locked_kg),
                           ("price_per_kg", heat.price_per_kg), ("stock_kg", heat.stock_kg)):
        for name in entries:
            if name not in names:
                raise InputError(source, f"{label}.{name}" if label != "switch_off" else label,
                                 f"no material named '{name}' in the recipe book")
    for name, kg in heat.locked_kg.items():
        stock = heat.material_stock_kg(book.material(name))
        if stock is not None and kg > stock + 1e-9:
            raise InputError(source, f"lock_kg.{name}", f"{kg:g} kg is more than the {stock:g} kg in stock")
        if name in heat.switched_off:
            raise InputError(source, f"lock_kg.{name}", "is locked but also switched off")
        if name in grade.forbidden:
            raise InputError(source, f"lock_kg.{name}", f"grade '{heat.grade}' forbids this material")
        if not book.material(name).allowed_at(heat.stage):
            raise InputError(source, f"lock_kg.{name}", f"is not added at the {heat.stage} (its stages: "
                             f"{', '.join(sorted(book.material(name).stages or ()))})")


def _weights(raw: Any, source: object, key: str) -> dict[str, float]:
    return {name: number(value, source, f"{key}.{name}") for name, value in table(raw, source, key).items()}


def parse_heat(data: Mapping[str, Any], source: object, default_id: str, default_stage: str = Heat.stage) -> Heat:
    """A heat from parsed TOML; ``default_stage`` where the file names none (the shop's
    ``ShopSettings.heat_stage`` when read for a recipe book)."""
    known_keys(data, _HEAT_KEYS, source, "")
    capacity = data.get("capacity_kg")
    temperature = data.get("temperature_c")
    drop = data.get("max_temp_drop_c")
    oxygen = data.get("dissolved_o_ppm")
    switch_off = data.get("switch_off", [])
    if not isinstance(switch_off, list) or not all(isinstance(n, str) for n in switch_off):
        raise InputError(source, "switch_off", "expected a list of material names")
    not_measured = data.get("not_measured", [])
    if not isinstance(not_measured, list) or not all(isinstance(n, str) for n in not_measured):
        raise InputError(source, "not_measured", "expected a list of element symbols, e.g. [\"Sn\", \"As\"]")
    return Heat(
        heat_id=identifier(data.get("heat", default_id), source, "heat"),
        grade=text(require(data, "grade", source, ""), source, "grade"),
        bath_kg=number(require(data, "bath_kg", source, ""), source, "bath_kg", positive=True),
        analysis=analysis_from_table(table(require(data, "analysis", source, ""), source, "analysis"),
                                     source, "analysis"),
        capacity_kg=None if capacity is None else number(capacity, source, "capacity_kg", positive=True),
        temperature_c=None if temperature is None else number(temperature, source, "temperature_c"),
        max_temp_drop_c=None if drop is None else number(drop, source, "max_temp_drop_c"),
        stage=text(data.get("stage", default_stage), source, "stage"),
        switched_off=frozenset(switch_off),
        locked_kg=MappingProxyType(_weights(data.get("lock_kg", {}), source, "lock_kg")),
        price_per_kg=MappingProxyType(_weights(data.get("price_per_kg", {}), source, "price_per_kg")),
        stock_kg=MappingProxyType(_weights(data.get("stock_kg", {}), source, "stock_kg")),
        dissolved_o_ppm=None if oxygen is None else number(oxygen, source, "dissolved_o_ppm"),
        not_measured=frozenset(normalise_symbol(s, source, "not_measured") for s in not_measured),
    )


def load_heat(path: Path | str, book: RecipeBook) -> Heat:
    """Read and validate a HEAT.toml file against the recipe book."""
    path = Path(path)
    heat = parse_heat(read_toml(path), path, default_id=path.stem, default_stage=book.settings.heat_stage)
    return validate_heat(heat, book, path)


def heat_to_toml(heat: Heat) -> str:
    """Write a heat back as HEAT.toml text, every field included, so that parse_heat reads it back equal.

    Values below the detection limit are written as "<x" strings.
    """
    # JSON string escapes are valid TOML basic strings; repr(float()) keeps every digit of a float
    # and turns NumPy scalars into plain TOML numbers.
    def num(value: float) -> str:
        return repr(float(value))

    lines = [f"heat = {json.dumps(heat.heat_id)}", f"grade = {json.dumps(heat.grade)}",
             f"bath_kg = {num(heat.bath_kg)}", f"stage = {json.dumps(heat.stage)}"]
    for key in ("capacity_kg", "temperature_c", "max_temp_drop_c", "dissolved_o_ppm"):
        value = getattr(heat, key)
        if value is not None:
            lines.append(f"{key} = {num(value)}")
    if heat.switched_off:
        lines.append(f"switch_off = {json.dumps(sorted(heat.switched_off))}")
    if heat.not_measured:
        lines.append(f"not_measured = {json.dumps(sorted(heat.not_measured, key=element_sort_key))}")
    lines += ["", "[analysis]"]
    for symbol, pct in heat.analysis.pct.items():
        value = json.dumps(f"<{float(pct)!r}") if symbol in heat.analysis.below_limit else num(pct)
        lines.append(f"{symbol} = {value}")
    for key, values in (("lock_kg", heat.locked_kg), ("price_per_kg", heat.price_per_kg), ("stock_kg", heat.stock_kg)):
        if values:
            lines += ["", f"[{key}]"] + [f"{json.dumps(name)} = {num(v)}" for name, v in values.items()]
    return "\n".join(lines) + "\n"
