"""Addition materials: ``[[material]]`` entries of ``materials.toml`` (and ``materials/*.toml``)."""

from __future__ import annotations

import math
from collections.abc import Collection, Mapping
from dataclasses import dataclass, field, replace
from functools import cached_property
from pathlib import Path
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.shop.elements import element_sort_key, normalise_symbol
from meltfix.shop.settings import ADDITION_CLASSES, DEFAULT_STAGES, stage_name
from meltfix.shop.toml_values import known_keys, number, optional_text, read_toml, require, table, text

MATERIAL_KINDS = ("alloy", "carbon", "metal", "dilution", "deoxidiser", "other")


# The class a material takes when its entry names none: by its kind (a wire is told by kg_per_m).
_CLASS_OF_KIND = {"alloy": "bulk alloy", "carbon": "carbon", "metal": "bulk alloy", "dilution": "scrap",
                  "deoxidiser": "deoxidiser", "other": "trim"}


@dataclass(frozen=True)
class Material:
    """An addition material as the shop buys and stores it."""

    name: str
    price_per_kg: float
    """Price [currency/kg]."""
    composition_pct: Mapping[str, float]
    """Element contents [wt %]; iron is the balance and appears under "Fe"."""
    recovery: Mapping[str, float]
    """Fraction [0..1] of each element added that dissolves in the bath, every element listed."""
    stock_kg: float | None = None
    """Available for this heat [kg]; None = unlimited."""
    pack_kg: float | None = None
    """Mass of one bag, bale or coil [kg]; None = added loose, any amount."""
    min_kg: float = 0.0
    """Smallest sensible addition [kg]: the plan adds none or at least this much."""
    chill_per_kg_t: float = 0.0
    """Temperature drop of the bath [°C per kg/t added]; negative for exothermic materials."""
    kind: str = "alloy"
    standard: str = ""
    notes: str = ""
    stages: frozenset[str] | None = None
    """Stages this material may be added at (shop.toml ``[stage.NAME]``); None = every stage."""
    recovery_by_stage: Mapping[str, Mapping[str, float]] = field(default_factory=dict)
    """Recoveries [0..1] that differ at a stage: stage -> element -> fraction, over ``recovery``."""
    addition_class: str = "bulk alloy"
    """Where the material comes in the order of additions (one of ADDITION_CLASSES)."""
    kg_per_m: float | None = None
    """Mass of cored or solid wire per metre [kg/m]; None = not a wire."""

    def allowed_at(self, stage: str) -> bool:
        """Whether the material may be added at ``stage``."""
        return self.stages is None or stage in self.stages

    def at_stage(self, stage: str) -> "Material":
        """The material as it behaves at ``stage``: that stage's recoveries over the general ones."""
        changes = self.recovery_by_stage.get(stage)
        if not changes:
            return self
        return replace(self, recovery=MappingProxyType({**self.recovery, **changes}))
    recovery_scatter: Mapping[str, float] = field(default_factory=dict)
    """Relative standard deviation of this material's recovery, per element [fraction of the
    recovery]; an element not listed scatters as the shop's ``[scatter] recovery`` says."""

    def yield_pct(self, symbol: str) -> float:
        """Content of ``symbol`` that reaches the bath [wt % of the material]."""
        return self.composition_pct.get(symbol, 0.0) * self.recovery.get(symbol, 1.0)

    @cached_property
    def dissolving(self) -> tuple[tuple[str, float, float], ...]:
        """(symbol, content [wt %], recovery [0..1]) of each element, iron too, in the composition's
        order: what the plain mass balance reads (meltfix.plan.massbalance), looked up once."""
        return tuple((symbol, pct, self.recovery.get(symbol, 1.0)) for symbol, pct in self.composition_pct.items())

    @property
    def mass_yield(self) -> float:
        """Fraction of the material's mass that ends up in the bath (all elements, iron too)."""
        return math.fsum(self.yield_pct(s) for s in self.composition_pct) / 100.0


_MATERIAL_KEYS = {"name", "price_per_kg", "composition", "recovery", "default_recovery", "stock_kg",
                  "pack_kg", "min_kg", "chill_per_kg_t", "kind", "standard", "notes", "stages",
                  "recovery_by_stage", "addition_class", "kg_per_m", "recovery_scatter"}


def parse_material(entry: Mapping[str, Any], source: object, where: str,
                   stages: Collection[str] = tuple(DEFAULT_STAGES)) -> Material:
    """Build one Material from a ``[[material]]`` TOML table (``where`` prefixes field names);
    ``stages`` are the shop's stage names, which ``stages`` and ``recovery_by_stage`` must use."""
    entry = table(entry, source, where.rstrip("."))
    name = text(require(entry, "name", source, where), source, f"{where}name")
    where = f"material '{name}'."
    known_keys(entry, _MATERIAL_KEYS, source, where)
    price = number(require(entry, "price_per_kg", source, where), source, f"{where}price_per_kg")
    composition = _composition(entry, source, where)
    recovery = _recoveries(entry, composition, source, where)
    stock = None if entry.get("stock_kg") is None else number(entry["stock_kg"], source, f"{where}stock_kg")
    pack = None if entry.get("pack_kg") is None else number(entry["pack_kg"], source, f"{where}pack_kg", positive=True)
    min_kg = number(entry.get("min_kg", 0.0), source, f"{where}min_kg")
    # A pack or minimum larger than the stock makes the material silently unusable: say so.
    for key, size in (("pack_kg", pack), ("min_kg", min_kg)):
        if stock is not None and size is not None and size > stock > 0:
            raise InputError(source, f"{where}{key}", f"{size:g} kg is more than the {stock:g} kg in stock")
    kind = entry.get("kind", "alloy")
    if kind not in MATERIAL_KINDS:
        raise InputError(source, f"{where}kind", f"'{kind}' is not one of {', '.join(MATERIAL_KINDS)}")
    kg_per_m = None if entry.get("kg_per_m") is None else number(entry["kg_per_m"], source, f"{where}kg_per_m",
                                                                  positive=True)
    addition_class = entry.get("addition_class", "wire" if kg_per_m is not None else _CLASS_OF_KIND[kind])
    if addition_class not in ADDITION_CLASSES:
        raise InputError(source, f"{where}addition_class",
                         f"'{addition_class}' is not one of {', '.join(ADDITION_CLASSES)}")
    return Material(
        name=name,
        price_per_kg=price,
        composition_pct=MappingProxyType(dict(sorted(composition.items(), key=lambda i: element_sort_key(i[0])))),
        recovery=MappingProxyType(recovery),
        stock_kg=stock,
        pack_kg=pack,
        min_kg=min_kg,
        chill_per_kg_t=number(entry.get("chill_per_kg_t", 0.0), source, f"{where}chill_per_kg_t", minimum=None),
        kind=kind,
        standard=optional_text(entry, "standard", source, where),
        notes=optional_text(entry, "notes", source, where),
        stages=_material_stages(entry, source, where, stages),
        recovery_by_stage=_recovery_by_stage(entry, composition, source, where, stages),
        addition_class=addition_class,
        kg_per_m=kg_per_m,
        recovery_scatter=_recovery_scatter(entry.get("recovery_scatter"), composition, source, where),
    )


def _composition(entry: Mapping[str, Any], source: object, where: str) -> dict[str, float]:
    """The contents [wt %] by element, iron the balance when not listed."""
    raw_comp = table(require(entry, "composition", source, where), source, f"{where}composition")
    composition: dict[str, float] = {}
    for key, value in raw_comp.items():
        symbol = normalise_symbol(key, source, f"{where}composition.{key}")
        pct = number(value, source, f"{where}composition.{key}")
        if pct > 100:
            raise InputError(source, f"{where}composition.{key}", f"{value} wt % is above 100")
        if symbol in composition:
            raise InputError(source, f"{where}composition.{key}", f"{symbol} is listed twice")
        composition[symbol] = pct
    listed = math.fsum(v for s, v in composition.items() if s != "Fe")
    if listed > 100 + 1e-9:
        raise InputError(source, f"{where}composition", f"the elements add up to {listed:g} %, over 100 %")
    if "Fe" not in composition:
        composition["Fe"] = max(0.0, 100.0 - listed)
    elif abs(listed + composition["Fe"] - 100.0) > 0.5:
        raise InputError(source, f"{where}composition.Fe",
                         f"iron {composition['Fe']:g} % and the rest {listed:g} % do not add up to 100 %")
    return composition


def _recoveries(entry: Mapping[str, Any], composition: Mapping[str, float], source: object,
                where: str) -> dict[str, float]:
    """The recovery [0..1] of every element of the composition."""
    default_recovery = _recovery(entry.get("default_recovery", 1.0), source, f"{where}default_recovery")
    raw_rec = table(entry.get("recovery", {}), source, f"{where}recovery")
    # Iron is the balance and is not oxidised ahead of the alloying elements: it recovers fully
    # unless listed, so a low default_recovery for the alloying elements does not shrink the bath.
    recovery = {symbol: default_recovery for symbol in composition}
    recovery["Fe"] = 1.0
    for key, value in raw_rec.items():
        symbol = normalise_symbol(key, source, f"{where}recovery.{key}")
        if symbol not in composition:
            raise InputError(source, f"{where}recovery.{key}", f"{symbol} is not in the composition")
        recovery[symbol] = _recovery(value, source, f"{where}recovery.{key}")
    return recovery


def _material_stages(entry: Mapping[str, Any], source: object, where: str,
                     stages: Collection[str]) -> frozenset[str] | None:
    if "stages" not in entry:
        return None
    raw = entry["stages"]
    if not isinstance(raw, list) or not raw:
        raise InputError(source, f"{where}stages", f"expected a non-empty list of stage names, got {raw!r}")
    return frozenset(stage_name(name, source, f"{where}stages", stages) for name in raw)


def _recovery_by_stage(entry: Mapping[str, Any], composition: Mapping[str, float], source: object, where: str,
                       stages: Collection[str]) -> Mapping[str, Mapping[str, float]]:
    """``recovery_by_stage = { ladle = { C = 0.70 } }``: per stage, the recoveries that differ there."""
    result: dict[str, Mapping[str, float]] = {}
    for stage, raw in table(entry.get("recovery_by_stage", {}), source, f"{where}recovery_by_stage").items():
        field_name = f"{where}recovery_by_stage.{stage}"
        stage_name(stage, source, field_name, stages)
        changes = {}
        for key, value in table(raw, source, field_name).items():
            symbol = normalise_symbol(key, source, f"{field_name}.{key}")
            if symbol not in composition:
                raise InputError(source, f"{field_name}.{key}", f"{symbol} is not in the composition")
            changes[symbol] = _recovery(value, source, f"{field_name}.{key}")
        result[stage] = MappingProxyType(changes)
    return MappingProxyType(result)


def _recovery_scatter(value: Any, composition: Mapping[str, float], source: object,
                      where: str) -> Mapping[str, float]:
    """``recovery_scatter``: one relative standard deviation for every element of the material, or
    a table of them by element."""
    field_name = f"{where}recovery_scatter"
    if value is None:
        return MappingProxyType({})
    if isinstance(value, Mapping):
        scatter = {}
        for key, sd in value.items():
            symbol = normalise_symbol(key, source, f"{field_name}.{key}")
            if symbol not in composition:
                raise InputError(source, f"{field_name}.{key}", f"{symbol} is not in the composition")
            scatter[symbol] = number(sd, source, f"{field_name}.{key}")
        return MappingProxyType(scatter)
    sd = number(value, source, field_name)
    return MappingProxyType({s: sd for s in composition if s != "Fe"})


def _recovery(value: Any, source: object, field_name: str) -> float:
    result = number(value, source, field_name, minimum=None)
    if not 0.0 < result <= 1.0:
        raise InputError(source, field_name, f"recovery must be above 0 and at most 1, got {value!r}")
    return result


def load_materials(folder: Path, stages: Collection[str] = tuple(DEFAULT_STAGES)) -> tuple[Material, ...]:
    files = [folder / "materials.toml"]
    extra = folder / "materials"
    if extra.is_dir():
        files += sorted(extra.glob("*.toml"))
    materials: list[Material] = []
    seen: dict[str, Path] = {}
    for path in files:
        data = read_toml(path)
        entries = data.get("material", [])
        if not isinstance(entries, list):
            raise InputError(path, "material", "expected [[material]] entries")
        for key in data:
            if key != "material":
                raise InputError(path, key, "unknown key (a materials file holds only [[material]] entries)")
        for index, entry in enumerate(entries, start=1):
            material = parse_material(entry, path, f"material #{index}.", stages)
            if material.name in seen:
                raise InputError(path, f"material '{material.name}'",
                                 f"duplicate name (also in {seen[material.name].name})")
            seen[material.name] = path
            materials.append(material)
    if not materials:
        raise InputError(files[0], "material", "no [[material]] entries")
    return tuple(materials)
