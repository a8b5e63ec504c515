"""The shop's own settings: ``shop.toml`` (stages, odds, scatter, plausible contents, units, ...)."""

from __future__ import annotations

from collections.abc import Collection, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.base.units import UNIT_SYSTEMS, Units
from meltfix.shop.elements import normalise_symbol
from meltfix.shop.toml_values import known_keys, number, optional_text, read_toml, short, table, text

RECOVERY_BASES = ("killed", "tap")
"""What a shop's aluminium recoveries may be measured on (see :mod:`meltfix.plan.deoxidation`)."""


ADDITION_CLASSES = ("scrap", "treatment", "deoxidiser", "bulk alloy", "carbon", "trim", "late", "wire")
"""Where a material comes in the order of additions; the shop's ``addition_order`` ranks them."""


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
    """The instrument's export layout, read by :mod:`meltfix.readers.export_layout`."""
    stages: Mapping[str, Stage] = field(default_factory=lambda: DEFAULT_STAGES)
    """The shop's stages by name, in the order shop.toml lists them."""
    default_stage: str | None = None
    """Where a heat is when its file names no stage; None = the shop's first stage (see
    :attr:`heat_stage`)."""
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

    @property
    def heat_stage(self) -> str:
        """The stage of a heat whose file names none: shop.toml ``default_stage``, else the first
        stage the shop lists, where its heats are first sampled."""
        return self.default_stage or next(iter(self.stages))


_SHOP_KEYS = {"shop_name", "currency", "aim_penalty", "large_addition_kg_per_t", "max_temp_drop_c",
              "max_unlisted_rise_pct", "plan_time_limit_s", "spectrometer", "stage", "target_odds",
              "correction_cost", "scatter", "plausible_max_pct", "bath_kg_range", "addition_order",
              "max_portion_kg", "stir_min", "superheat_c", "ticket_dir", "default_stage",
              "ticket_print_command", "aluminium_recovery_basis", "mg_fade_pct_per_min", "treatment_to_pour_min",
              "units"}


_STAGE_KEYS = {"max_temp_drop_c", "can_reheat", "reheat_cost_per_c", "reheat_max_c", "reheat_c_per_min"}


def stage_name(value: Any, source: object, field_name: str, stages: Collection[str]) -> str:
    """A stage name the shop lists ([stage.NAME] in shop.toml), else one line naming the field."""
    name = text(value, source, field_name)
    if name not in stages:
        raise InputError(source, field_name, f"'{name}' is not a stage of this shop (shop.toml lists: "
                         f"{', '.join(stages)})")
    return name


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
    stages = parse_stages(data.get("stage"), path)
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
        stages=stages,
        default_stage=None if data.get("default_stage") is None
        else stage_name(data["default_stage"], path, "default_stage", stages),
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
        ticket_dir=optional_text(data, "ticket_dir", path, ""),
        ticket_print_command=optional_text(data, "ticket_print_command", path, ""),
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
        raise InputError(path, "units", f"expected \"metric\" or \"us\", got {short(raw)}")
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
        raise InputError(path, "bath_kg_range", f"expected [min, max] in kg, got {short(raw)}")
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
