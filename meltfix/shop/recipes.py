"""The shop's recipe book: addition materials and grades, read from TOML and validated strictly.

File layout (a contract: keep its names): ``materials.toml`` at the root of a recipes folder (more ``*.toml`` files
under ``materials/`` add to it), one grade per file under ``grades/``, and an optional ``shop.toml``
with shop-wide settings. Every problem raises :class:`InputError` naming the file and the field.
"""

from __future__ import annotations

import math
import re
import tomllib
from collections.abc import Collection, Mapping
from dataclasses import dataclass, field, replace
from pathlib import Path
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError, control_character, file_refusals
from meltfix.base.units import UNIT_SYSTEMS, Units
from meltfix.shop.elements import element_sort_key, normalise_symbol

MATERIAL_KINDS = ("alloy", "carbon", "metal", "dilution", "deoxidiser", "other")
RECOVERY_BASES = ("killed", "tap")
"""What a shop's aluminium recoveries may be measured on (see :mod:`meltfix.plan.deoxidation`)."""
ADDITION_CLASSES = ("scrap", "treatment", "deoxidiser", "bulk alloy", "carbon", "trim", "late", "wire")
"""Where a material comes in the order of additions; the shop's ``addition_order`` ranks them."""
# The class a material takes when its entry names none: by its kind (a wire is told by kg_per_m).
_CLASS_OF_KIND = {"alloy": "bulk alloy", "carbon": "carbon", "metal": "bulk alloy", "dilution": "scrap",
                  "deoxidiser": "deoxidiser", "other": "trim"}

# The most of each element a steel or cast-iron bath holds in practice [wt %] (common practice, from
# memory): generous enough for high-alloy steels and alloyed irons (Hadfield and TWIP manganese
# steels, 30 % chromium stainless and white irons, Invar and Ni-Resist nickel, 18 % tungsten
# high-speed steel, high-silicon irons), so only a slip of the pen (0.45 typed as 45, ppm typed as
# wt %) lies above. Elements not listed are bounded only by 100 %.
PLAUSIBLE_MAX_PCT: dict[str, float] = {
    "C": 5.0, "Si": 8.0, "Mn": 30.0, "P": 2.0, "S": 0.5, "Cr": 35.0, "Ni": 40.0, "Mo": 10.0, "Cu": 8.0,
    "Al": 10.0, "V": 5.0, "Nb": 2.0, "Ti": 2.0, "W": 20.0, "Co": 20.0, "B": 0.05, "N": 1.0, "O": 0.3,
    "H": 0.01, "Sn": 0.5, "Pb": 0.5, "Ca": 0.1, "Mg": 0.2, "Zr": 0.5, "As": 0.2, "Sb": 0.2, "Bi": 0.1,
    "Ce": 0.5, "Se": 0.5, "Te": 0.1, "Zn": 0.1,
}
# The largest converters and ladles hold about 400 t (common practice): a bath above 2,000 t is a slip
# (grams typed as kilograms, a stray exponent) and would only feed the solver absurd magnitudes.
DEFAULT_MAX_BATH_KG = 2_000_000.0
# Any other number from a file (a price, a stock, a penalty) is bounded too: 1e308 would overflow to
# infinity inside the solver and be blamed on an unrelated field.
MAX_MAGNITUDE = 1e9


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

    @property
    def mass_yield(self) -> float:
        """Fraction of the material's mass that ends up in the bath (all elements, iron too)."""
        return math.fsum(self.yield_pct(s) for s in self.composition_pct) / 100.0


@dataclass(frozen=True)
class LinearIndex:
    """A limit on a weighted sum of contents, e.g. a carbon equivalent: sum(terms[e] * wt %[e])."""

    name: str
    terms: Mapping[str, float]
    min_value: float | None = None
    max_value: float | None = None

    def value(self, pct: Mapping[str, float]) -> float:
        return math.fsum(weight * pct.get(symbol, 0.0) for symbol, weight in self.terms.items())


@dataclass(frozen=True)
class Grade:
    """A grade's chemistry window [wt %] with the shop's aims."""

    name: str
    window_pct: Mapping[str, tuple[float, float]]
    aim_pct: Mapping[str, float] = field(default_factory=dict)
    indices: tuple[LinearIndex, ...] = ()
    forbidden: frozenset[str] = frozenset()
    """Materials this grade must never receive (e.g. a boron alloy in a boron-free grade)."""
    family: str = "steel"
    standard: str = ""
    source_file: str = ""
    aluminium_recovery_basis: str = "killed"
    """What the aluminium recoveries are measured on, the shop's ``aluminium_recovery_basis``
    (:mod:`meltfix.plan.deoxidation`): carried by each grade so that every mass balance of a heat of
    this grade (plan, re-check, odds) follows the same basis."""

    @property
    def elements(self) -> tuple[str, ...]:
        return tuple(sorted(self.window_pct, key=element_sort_key))


@dataclass(frozen=True)
class Stage:
    """A place in the shop where additions go (furnace, ladle, ladle furnace), from ``[stage.NAME]``."""

    name: str
    max_temp_drop_c: float | None = None
    """Largest temperature drop the additions may cause here [°C]; None = the shop's setting."""
    can_reheat: bool = False
    """Whether the stage can put heat back into the bath (the arcs of a ladle furnace)."""
    reheat_cost_per_c: float = 0.0
    """Cost of heating [currency per °C per tonne of bath]."""
    reheat_max_c: float = 0.0
    """Most the stage may heat the bath before the next sample [°C]."""
    reheat_c_per_min: float = 4.0
    """Heating rate [°C/min], to say how long the heating takes (common practice: 3-5 °C/min)."""


DEFAULT_STAGES: Mapping[str, Stage] = MappingProxyType({"furnace": Stage("furnace"), "ladle": Stage("ladle")})
"""The stages of a shop whose shop.toml lists none."""


@dataclass(frozen=True)
class Scatter:
    """How far a real heat strays from what a plan assumes: shop.toml ``[scatter]``.

    Every error is normal. The defaults are common practice for lump additions to a ladle (from
    memory): a recovery within about ±10 % of itself in 19 heats out of 20 (a relative standard
    deviation of 5 %), the bath weight within about ±4 % (2 %), the spectrometer's own repeatability.
    """

    recovery: float = 0.05
    """Relative standard deviation of each recovery [fraction of the recovery]; a drawn recovery
    above 1 counts as 1."""
    bath: float = 0.02
    """Relative standard deviation of the bath weight [fraction of the bath]."""
    analysis: float = 1.0
    """Multiple of the spectrometer's repeatability sigma for the analysis error (0 = exact)."""


ECONOMIC = "economic"
"""``target_odds = "economic"``: the target that gives the least expected total cost."""


@dataclass(frozen=True)
class ShopSettings:
    """Shop-wide settings from ``shop.toml``; every field has a sensible default."""

    shop_name: str = "Demo shop"
    currency: str = "EUR"
    aim_penalty: float = 0.5
    """Aim weight [currency per 0.01 wt % off aim per tonne of bath]."""
    large_addition_kg_per_t: float = 10.0
    """Total addition above which the plan warns about chill [kg/t]."""
    max_temp_drop_c: float | None = None
    """Largest temperature drop the additions may cause [°C]; None = not limited."""
    max_unlisted_rise_pct: float = 0.10
    """Most the additions may raise an element the grade sets no window for [wt %]."""
    plan_time_limit_s: float = 2.0
    """Time budget per plan [s]: past it the best plan found is returned, marked, with its gap."""
    spectrometer: Mapping[str, Any] = field(default_factory=dict)
    """The instrument's export layout, read by :mod:`meltfix.readers.spectro`."""
    stages: Mapping[str, Stage] = field(default_factory=lambda: DEFAULT_STAGES)
    """The shop's stages by name, in the order shop.toml lists them."""
    target_odds: float | str = 0.95
    """Probability [0..1] that a plan must give of landing inside every window, or ``"economic"``."""
    correction_cost: float = 0.0
    """Cost of one correction when a heat misses [currency]: furnace time, a sample, energy."""
    scatter: Scatter = Scatter()
    plausible_max_pct: Mapping[str, float] = field(default_factory=lambda: MappingProxyType(PLAUSIBLE_MAX_PCT))
    """Most of each element a bath of this shop can hold [wt %]; above it a value is taken for a slip
    (0.45 typed as 45). The shop's table adds to and overrides :data:`PLAUSIBLE_MAX_PCT`."""
    bath_kg_range: tuple[float, float] = (0.0, DEFAULT_MAX_BATH_KG)
    """Smallest and largest bath the shop melts [kg]; outside is a slip (tonnes typed as kg)."""
    addition_order: tuple[str, ...] = ADDITION_CLASSES
    """The order the classes of addition go in (every class of ADDITION_CLASSES, once)."""
    max_portion_kg: float | None = None
    """Largest lot of one material added at once [kg]; None = any amount in one lot."""
    stir_min: float = 2.0
    """Stirring or dissolution time between two lots [min] (common practice: a few minutes)."""
    superheat_c: float = 30.0
    """How far above the liquidus the bath must stay after the additions [°C] (common practice)."""
    ticket_dir: str = ""
    """Folder the screen writes crew tickets to ("" = the current folder; --tickets overrides)."""
    ticket_print_command: str = ""
    """Command a written ticket is sent to, e.g. "lp -d pulpit" ("" = not printed)."""
    aluminium_recovery_basis: str = "killed"
    """``"killed"``: aluminium recoveries are measured on killed steel, so a dissolved-oxygen reading
    is bound first on top of them; ``"tap"``: measured from tap, the oxygen is already inside them."""
    mg_fade_pct_per_min: float = 0.001
    """Magnesium a treated iron loses while it waits [wt % per min] (common practice: about 0.001)."""
    treatment_to_pour_min: float = 0.0
    """Minutes from the magnesium treatment to pouring: the fade the treatment must cover."""
    units: Units = Units()
    """What people read: metric (kg, t, °C) or US (lb, short ton, °F); data and JSON stay SI."""


@dataclass(frozen=True)
class RecipeBook:
    """Everything the planner knows about the shop."""

    materials: tuple[Material, ...]
    grades: Mapping[str, Grade]
    settings: ShopSettings = ShopSettings()
    folder: Path | None = None

    def material(self, name: str) -> Material:
        for material in self.materials:
            if material.name == name:
                return material
        raise KeyError(name)

    def grade(self, name: str) -> Grade:
        return self.grades[name]

    @property
    def material_names(self) -> tuple[str, ...]:
        return tuple(m.name for m in self.materials)


# ---------------------------------------------------------------------------------------------
# Reading and validation


def read_toml(path: Path) -> dict[str, Any]:
    """Parse a TOML file, turning every failure into one InputError naming the file."""
    with file_refusals(path):
        try:
            with path.open("rb") as handle:
                return tomllib.load(handle)
        except tomllib.TOMLDecodeError as exc:
            raise InputError(path, "", f"not valid TOML ({exc}){_decimal_comma_hint(path, str(exc))}") from None
        except RecursionError:
            raise InputError(path, "", "not valid TOML: tables or lists nested too deep") from None
        except UnicodeDecodeError:
            raise InputError(path, "", "not a UTF-8 text file") from None


_AT_LINE = re.compile(r"at line (\d+)")
_DECIMAL_COMMA = re.compile(r"=\s*[+-]?\d+,\d+\s*(#.*)?$")


def _decimal_comma_hint(path: Path, error: str) -> str:
    """A hint when the faulty line holds a bare decimal comma (``C = 0,45``), which TOML reads as nothing."""
    found = _AT_LINE.search(error)
    try:
        lines = path.read_text(encoding="utf-8", errors="replace").splitlines()
    except OSError:
        return ""
    if found is None or not 0 < int(found.group(1)) <= len(lines):
        return ""
    if _DECIMAL_COMMA.search(lines[int(found.group(1)) - 1]):
        return "; a decimal comma needs quotes (\"0,45\") or a point (0.45)"
    return ""


def require(table: Mapping[str, Any], key: str, source: object, where: str) -> Any:
    if key not in table:
        raise InputError(source, f"{where}{key}", "is missing")
    return table[key]


def number(value: Any, source: object, field_name: str, *, minimum: float | None = 0.0,
           positive: bool = False) -> float:
    """A finite number from TOML, checked against a lower bound and :data:`MAX_MAGNITUDE`."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(source, field_name, f"expected a number, got {_short(value)}")
    # A TOML integer may have hundreds of digits: compare before float() overflows.
    if isinstance(value, int) and abs(value) > MAX_MAGNITUDE:
        raise InputError(source, field_name, f"{_short(value)} is too large (at most {MAX_MAGNITUDE:g})")
    result = float(value)
    if math.isfinite(result) and abs(result) > MAX_MAGNITUDE:
        raise InputError(source, field_name, f"{value!r} is too large (at most {MAX_MAGNITUDE:g})")
    if not math.isfinite(result):
        raise InputError(source, field_name, f"{value!r} is not a finite number")
    if positive and result <= 0:
        raise InputError(source, field_name, f"must be above 0, got {value!r}")
    if minimum is not None and result < minimum:
        raise InputError(source, field_name, f"must not be negative, got {value!r}")
    return result


def _short(value: Any) -> str:
    """A value quoted in a message, cut short: a 400-digit number or a 10,000-character text is not echoed."""
    shown = repr(value)
    return shown if len(shown) <= 40 else f"{shown[:37]}..."


# Longest id or name shown whole on a screen, a ticket or a report line.
MAX_NAME_CHARS = 200


def text(value: Any, source: object, field_name: str) -> str:
    """A name or id: non-empty, one line, no control characters, at most :data:`MAX_NAME_CHARS`."""
    if not isinstance(value, str) or not value.strip():
        raise InputError(source, field_name, f"expected a non-empty text, got {_short(value)}")
    control = control_character(value.strip())
    if control is not None:
        raise InputError(source, field_name, f"holds a control character ({control}); names and ids are plain text")
    if len(value.strip()) > MAX_NAME_CHARS:
        raise InputError(source, field_name, f"is {len(value.strip()):,} characters long (at most {MAX_NAME_CHARS})")
    return value.strip()


def identifier(value: Any, source: object, field_name: str) -> str:
    """A heat or sample id: a non-empty text, or a whole number written without quotes (24211)."""
    if isinstance(value, int) and not isinstance(value, bool):
        value = str(value)
    return text(value, source, field_name)


def table(value: Any, source: object, field_name: str) -> Mapping[str, Any]:
    if not isinstance(value, Mapping):
        raise InputError(source, field_name, f"expected a table, got {_short(value)}")
    return value


def known_keys(entry: Mapping[str, Any], allowed: set[str], source: object, where: str) -> None:
    # An unknown key is almost always a typing slip ("stok_kg"); silently ignoring it loses data.
    for key in entry:
        if key not in allowed:
            raise InputError(source, f"{where}{key}", f"unknown key (expected one of: {', '.join(sorted(allowed))})")


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
        standard=_optional_text(entry, "standard", source, where),
        notes=_optional_text(entry, "notes", source, where),
        stages=_material_stages(entry, source, where, stages),
        recovery_by_stage=_recovery_by_stage(entry, composition, source, where, stages),
        addition_class=addition_class,
        kg_per_m=kg_per_m,
        recovery_scatter=_recovery_scatter(entry.get("recovery_scatter"), composition, source, where),
    )


def stage_name(value: Any, source: object, field_name: str, stages: Collection[str]) -> str:
    """A stage name the shop lists ([stage.NAME] in shop.toml), else one line naming the field."""
    name = text(value, source, field_name)
    if name not in stages:
        raise InputError(source, field_name, f"'{name}' is not a stage of this shop (shop.toml lists: "
                         f"{', '.join(stages)})")
    return name


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


def _optional_text(entry: Mapping[str, Any], key: str, source: object, where: str) -> str:
    value = entry.get(key, "")
    if not isinstance(value, str):
        raise InputError(source, f"{where}{key}", f"expected a text, got {_short(value)}")
    control = control_character(value.replace("\n", " ").replace("\t", " "))
    if control is not None:
        raise InputError(source, f"{where}{key}", f"holds a control character ({control})")
    return value.strip()


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


_GRADE_KEYS = {"name", "standard", "family", "window", "aim", "index", "forbid"}


def parse_grade(data: Mapping[str, Any], source: object) -> Grade:
    known_keys(data, _GRADE_KEYS, source, "")
    name = text(require(data, "name", source, ""), source, "name")
    raw_window = table(require(data, "window", source, ""), source, "window")
    if not raw_window:
        raise InputError(source, "window", "lists no element")
    window: dict[str, tuple[float, float]] = {}
    for key, value in raw_window.items():
        where = f"window.{key}"
        symbol = normalise_symbol(key, source, where)
        if not isinstance(value, list) or len(value) != 2:
            raise InputError(source, where, f"expected [min, max] in wt %, got {value!r}")
        low, high = (number(v, source, where) for v in value)
        if low > high:
            raise InputError(source, where, f"min {low:g} is above max {high:g}")
        if high > 100:
            raise InputError(source, where, f"max {high:g} is above 100 %")
        if symbol in window:
            raise InputError(source, where, f"{symbol} is given twice")
        window[symbol] = (low, high)
    aim: dict[str, float] = {}
    for key, value in table(data.get("aim", {}), source, "aim").items():
        where = f"aim.{key}"
        symbol = normalise_symbol(key, source, where)
        target = number(value, source, where)
        if symbol not in window:
            raise InputError(source, where, f"{symbol} has an aim but no window")
        low, high = window[symbol]
        if not low <= target <= high:
            raise InputError(source, where, f"aim {target:g} is outside the window {low:g}–{high:g}")
        aim[symbol] = target
    indices = []
    for index_name, spec in table(data.get("index", {}), source, "index").items():
        where = f"index.{index_name}"
        spec = table(spec, source, where)
        known_keys(spec, {"terms", "min", "max"}, source, f"{where}.")
        terms = {normalise_symbol(k, source, f"{where}.terms.{k}"): number(v, source, f"{where}.terms.{k}", minimum=None)
                 for k, v in table(require(spec, "terms", source, f"{where}."), source, f"{where}.terms").items()}
        least = None if "min" not in spec else number(spec["min"], source, f"{where}.min")
        most = None if "max" not in spec else number(spec["max"], source, f"{where}.max")
        if least is None and most is None:
            raise InputError(source, where, "needs a min, a max or both")
        if least is not None and most is not None and least > most:
            raise InputError(source, where, f"min {least:g} is above max {most:g}")
        indices.append(LinearIndex(index_name, MappingProxyType(terms), least, most))
    forbid = data.get("forbid", [])
    if not isinstance(forbid, list) or not all(isinstance(f, str) for f in forbid):
        raise InputError(source, "forbid", "expected a list of material names")
    family = data.get("family", "steel")
    if family not in ("steel", "cast iron"):
        raise InputError(source, "family", f"'{family}' is not 'steel' or 'cast iron'")
    return Grade(
        name=name,
        window_pct=MappingProxyType(window),
        aim_pct=MappingProxyType(aim),
        indices=tuple(indices),
        forbidden=frozenset(forbid),
        family=family,
        standard=_optional_text(data, "standard", source, ""),
        source_file=str(source),
    )


def load_grades(folder: Path, material_names: set[str]) -> dict[str, Grade]:
    grades_dir = folder / "grades"
    if not grades_dir.is_dir():
        raise InputError(folder, "grades/", "folder is missing")
    grades: dict[str, Grade] = {}
    for path in sorted(grades_dir.glob("*.toml")):
        grade = parse_grade(read_toml(path), path)
        if grade.name in grades:
            raise InputError(path, "name", f"grade '{grade.name}' is already defined in {Path(grades[grade.name].source_file).name}")
        for name in sorted(grade.forbidden - material_names):
            raise InputError(path, "forbid", f"no material named '{name}' in the recipe book")
        grades[grade.name] = grade
    if not grades:
        raise InputError(grades_dir, "", "holds no grade file (*.toml)")
    return dict(sorted(grades.items()))


_SHOP_KEYS = {"shop_name", "currency", "aim_penalty", "large_addition_kg_per_t", "max_temp_drop_c",
              "max_unlisted_rise_pct", "plan_time_limit_s", "spectrometer", "stage", "target_odds",
              "correction_cost", "scatter", "plausible_max_pct", "bath_kg_range", "addition_order",
              "max_portion_kg", "stir_min", "superheat_c", "ticket_dir",
              "ticket_print_command", "aluminium_recovery_basis", "mg_fade_pct_per_min", "treatment_to_pour_min",
              "units"}
_STAGE_KEYS = {"max_temp_drop_c", "can_reheat", "reheat_cost_per_c", "reheat_max_c", "reheat_c_per_min"}


def parse_stages(raw: Any, source: object) -> Mapping[str, Stage]:
    """The ``[stage.NAME]`` tables of shop.toml; none given = furnace and ladle."""
    if raw is None:
        return DEFAULT_STAGES
    stages: dict[str, Stage] = {}
    for name, spec in table(raw, source, "stage").items():
        where = f"stage.{name}."
        spec = table(spec, source, where.rstrip("."))
        known_keys(spec, _STAGE_KEYS, source, where)
        can_reheat = spec.get("can_reheat", False)
        if not isinstance(can_reheat, bool):
            raise InputError(source, f"{where}can_reheat", f"expected true or false, got {can_reheat!r}")
        for key in ("reheat_cost_per_c", "reheat_max_c"):
            if key in spec and not can_reheat:
                raise InputError(source, f"{where}{key}", "is set but the stage cannot reheat (can_reheat = false)")
        drop = spec.get("max_temp_drop_c")
        stages[name] = Stage(
            name=name,
            max_temp_drop_c=None if drop is None else number(drop, source, f"{where}max_temp_drop_c"),
            can_reheat=can_reheat,
            reheat_cost_per_c=number(spec.get("reheat_cost_per_c", 0.0), source, f"{where}reheat_cost_per_c"),
            reheat_max_c=number(spec.get("reheat_max_c", 0.0), source, f"{where}reheat_max_c"),
            reheat_c_per_min=number(spec.get("reheat_c_per_min", Stage.reheat_c_per_min), source,
                                    f"{where}reheat_c_per_min", positive=True),
        )
    if not stages:
        raise InputError(source, "stage", "lists no stage (leave [stage] out for the default furnace and ladle)")
    return MappingProxyType(stages)


def load_settings(folder: Path) -> ShopSettings:
    path = folder / "shop.toml"
    if not path.exists():
        return ShopSettings()
    data = read_toml(path)
    known_keys(data, _SHOP_KEYS, path, "")
    defaults = ShopSettings()
    drop = data.get("max_temp_drop_c")
    return ShopSettings(
        shop_name=text(data.get("shop_name", defaults.shop_name), path, "shop_name"),
        currency=text(data.get("currency", defaults.currency), path, "currency"),
        aim_penalty=number(data.get("aim_penalty", defaults.aim_penalty), path, "aim_penalty"),
        large_addition_kg_per_t=number(data.get("large_addition_kg_per_t", defaults.large_addition_kg_per_t),
                                       path, "large_addition_kg_per_t", positive=True),
        max_temp_drop_c=None if drop is None else number(drop, path, "max_temp_drop_c"),
        max_unlisted_rise_pct=number(data.get("max_unlisted_rise_pct", defaults.max_unlisted_rise_pct),
                                     path, "max_unlisted_rise_pct"),
        plan_time_limit_s=number(data.get("plan_time_limit_s", defaults.plan_time_limit_s), path,
                                 "plan_time_limit_s", positive=True),
        spectrometer=MappingProxyType(dict(table(data.get("spectrometer", {}), path, "spectrometer"))),
        stages=parse_stages(data.get("stage"), path),
        target_odds=parse_target_odds(data.get("target_odds", defaults.target_odds), path, "target_odds"),
        correction_cost=number(data.get("correction_cost", defaults.correction_cost), path, "correction_cost"),
        scatter=_scatter(table(data.get("scatter", {}), path, "scatter"), path),
        plausible_max_pct=_plausible_max(data.get("plausible_max_pct", {}), path),
        bath_kg_range=_bath_range(data.get("bath_kg_range"), path),
        addition_order=_addition_order(data.get("addition_order"), path),
        max_portion_kg=None if data.get("max_portion_kg") is None
        else number(data["max_portion_kg"], path, "max_portion_kg", positive=True),
        stir_min=number(data.get("stir_min", defaults.stir_min), path, "stir_min"),
        superheat_c=number(data.get("superheat_c", defaults.superheat_c), path, "superheat_c"),
        ticket_dir=_optional_text(data, "ticket_dir", path, ""),
        ticket_print_command=_optional_text(data, "ticket_print_command", path, ""),
        aluminium_recovery_basis=_recovery_basis(data.get("aluminium_recovery_basis",
                                                          defaults.aluminium_recovery_basis), path),
        mg_fade_pct_per_min=number(data.get("mg_fade_pct_per_min", defaults.mg_fade_pct_per_min), path,
                                   "mg_fade_pct_per_min"),
        treatment_to_pour_min=number(data.get("treatment_to_pour_min", defaults.treatment_to_pour_min), path,
                                     "treatment_to_pour_min"),
        units=_units(data.get("units", defaults.units.system), path),
    )


def _recovery_basis(value: Any, source: object) -> str:
    basis = text(value, source, "aluminium_recovery_basis")
    if basis not in RECOVERY_BASES:
        raise InputError(source, "aluminium_recovery_basis", f"'{basis}' is not one of {', '.join(RECOVERY_BASES)}")
    return basis


def _units(raw: Any, path: Path) -> Units:
    if raw not in UNIT_SYSTEMS:
        raise InputError(path, "units", f"expected \"metric\" or \"us\", got {_short(raw)}")
    return Units(raw)


def parse_target_odds(value: Any, source: object, field_name: str) -> float | str:
    """A probability strictly between 0 and 1, or ``"economic"``."""
    if value == ECONOMIC:
        return ECONOMIC
    if isinstance(value, str):
        raise InputError(source, field_name, f"expected a probability such as 0.95 or \"{ECONOMIC}\", got {value!r}")
    odds = number(value, source, field_name)
    if not 0.0 < odds < 1.0:
        raise InputError(source, field_name, f"{value!r} is not a probability between 0 and 1 (e.g. 0.95)")
    return odds


def _scatter(data: Mapping[str, Any], path: Path) -> Scatter:
    known_keys(data, {"recovery", "bath", "analysis"}, path, "scatter.")
    defaults = Scatter()
    return Scatter(*(number(data.get(key, getattr(defaults, key)), path, f"scatter.{key}")
                     for key in ("recovery", "bath", "analysis")))


def _plausible_max(raw: Any, path: Path) -> Mapping[str, float]:
    limits = dict(PLAUSIBLE_MAX_PCT)
    for key, value in table(raw, path, "plausible_max_pct").items():
        where = f"plausible_max_pct.{key}"
        pct = number(value, path, where, positive=True)
        if pct > 100:
            raise InputError(path, where, f"{value!r} wt % is above 100")
        limits[normalise_symbol(key, path, where)] = pct
    return MappingProxyType(limits)


def _bath_range(raw: Any, path: Path) -> tuple[float, float]:
    if raw is None:
        return (0.0, DEFAULT_MAX_BATH_KG)
    if not isinstance(raw, list) or len(raw) != 2:
        raise InputError(path, "bath_kg_range", f"expected [min, max] in kg, got {_short(raw)}")
    low, high = (number(v, path, "bath_kg_range") for v in raw)
    if not low < high:
        raise InputError(path, "bath_kg_range", f"min {low:g} kg is not below max {high:g} kg")
    return (low, high)


def _addition_order(raw: Any, source: object) -> tuple[str, ...]:
    """The shop's order of addition classes; classes it leaves out follow in the default order."""
    if raw is None:
        return ADDITION_CLASSES
    if not isinstance(raw, list):
        raise InputError(source, "addition_order", f"expected a list of addition classes, got {raw!r}")
    for name in raw:
        if name not in ADDITION_CLASSES:
            raise InputError(source, "addition_order", f"{name!r} is not one of {', '.join(ADDITION_CLASSES)}")
    if len(set(raw)) != len(raw):
        raise InputError(source, "addition_order", "lists a class twice")
    return tuple(raw) + tuple(c for c in ADDITION_CLASSES if c not in raw)


def load_recipes(folder: Path | str | None = None) -> RecipeBook:
    """Load and validate a recipes folder (the built-in demo shop when ``folder`` is None)."""
    if folder is None:
        from meltfix.base.paths import default_recipes_dir

        folder = default_recipes_dir()
    folder = Path(folder)
    if not folder.is_dir():
        raise InputError(folder, "", "recipes folder not found")
    settings = load_settings(folder)  # first: the materials name the shop's stages
    materials = load_materials(folder, tuple(settings.stages))
    grades = {name: replace(grade, aluminium_recovery_basis=settings.aluminium_recovery_basis)
              for name, grade in load_grades(folder, {m.name for m in materials}).items()}
    return RecipeBook(materials=materials, grades=MappingProxyType(grades), settings=settings, folder=folder)
