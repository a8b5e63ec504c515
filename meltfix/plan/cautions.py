"""Safety cautions printed with every plan. The tool advises; a qualified person decides.

Every caution defers to the shop's written procedures and local codes; the thresholds here are
common practice, not a standard, and say so.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from meltfix.base.units import Units
from meltfix.plan.numbers import content_text, degrees_text, mass_text, temperature_text, with_unit
from meltfix.shop.elements import PPM_PER_PCT
from meltfix.shop.materials import Material
from meltfix.shop.settings import ShopSettings

ALWAYS = ("Additions follow the shop's written procedures, its protective-equipment rules and licensed "
          "practice under local codes; meltfix advises, a qualified person decides.")
DRY = ("Every addition must be dry (and preheated where the shop's practice says so): moisture trapped in "
       "an addition turns to steam in liquid metal and can cause a violent explosion.")
# Contents above which a material's reaction with the bath or its oxygen gives off heat quickly.
_EXOTHERMIC_PCT = {"Al": 20.0, "Si": 20.0, "Ca": 10.0, "Mg": 3.0}
# Common practice, not a standard: a bath with this much dissolved oxygen is not killed, and carbon
# added to it reacts to CO at once (a carbon boil); 1 % C makes a material carbon-bearing.
_BOIL_O_PPM = 200.0
_CARBON_BEARING_PCT = 1.0
# A pack this heavy is lifted by crane or forklift over the vessel (common practice).
_LIFTED_PACK_KG = 100.0
# Manganese and chromium bearers fume (manganese oxide, chromium compounds) above these contents.
_FUME_PCT = {"Mn": 20.0, "Cr": 20.0}
# Freeboard: warn when the bath comes within this share of the vessel's capacity (common practice).
_FREEBOARD_SHARE = 0.03


@dataclass(frozen=True)
class BathState:
    """What the cautions need to know about the bath beyond the additions. All optional."""

    dissolved_o_ppm: float | None = None
    """Oxygen probe reading [ppm]."""
    capacity_kg: float | None = None
    final_kg: float | None = None
    """Bath after the additions [kg]."""
    temperature_after_c: float | None = None
    liquidus_c: float | None = None


def plan_cautions(additions: Sequence[tuple[Material, float]], bath_kg: float, temperature_drop_c: float,
                  temperature_c: float | None, settings: ShopSettings, bath: BathState = BathState()
                  ) -> tuple[str, ...]:
    """Cautions in plain words for a set of additions (material, kg); always ends with ALWAYS."""
    if not additions:
        return (ALWAYS,)
    cautions = [DRY]
    total_kg = sum(kg for _, kg in additions)
    per_t = total_kg / (bath_kg / 1000.0)
    if per_t > settings.large_addition_kg_per_t or temperature_drop_c > 15.0:
        units = settings.units  # cautions are read at the vessel: in the shop's units
        chill = f" chills the bath by about {degrees_text(temperature_drop_c, units)}" if temperature_drop_c >= 0.5 else ""
        rate = f"{units.mass(total_kg) / units.tons(bath_kg / 1000.0):.1f} {units.mass_unit}/{units.ton_unit}"
        cautions.append(
            f"Large addition: {mass_text(total_kg, units)} ({rate}){chill}. Check the temperature before and "
            "after, add in portions while stirring, and keep clear of a freezing nozzle or a skulled ladle."
        )
    cautions += _temperature(temperature_c, temperature_drop_c, bath, settings)
    materials = [m for m, _ in additions]
    hot = sorted({m.name for m in materials if m.chill_per_kg_t < 0 or _bearing(m, _EXOTHERMIC_PCT)})
    if hot:
        cautions.append(f"{', '.join(hot)}: reacts exothermically (aluminium, silicon, calcium or magnesium "
                        "bearing) — expect flare and spatter; add through the shop's chute or wire, never by hand, "
                        "and keep the exclusion zone.")
    cautions += _reactions(materials, bath)
    cautions += _handling(additions, bath, settings.units)
    for material in materials:
        if material.notes:
            cautions.append(f"{material.name}: {material.notes}")
    cautions.append(ALWAYS)
    return tuple(cautions)


def _temperature(temperature_c: float | None, drop_c: float, bath: BathState, settings: ShopSettings) -> list[str]:
    if temperature_c is None:
        return []
    units = settings.units
    after = bath.temperature_after_c if bath.temperature_after_c is not None else temperature_c - drop_c
    if bath.liquidus_c is None:
        return [f"Predicted bath temperature after the additions: about {temperature_text(after, units)} "
                f"(from {temperature_text(temperature_c, units)})."]
    margin = after - bath.liquidus_c
    text = (f"Predicted bath temperature after the additions: about {temperature_text(after, units)} "
            f"(from {temperature_text(temperature_c, units)}), {degrees_text(margin, units)} above the liquidus of "
            f"about {temperature_text(bath.liquidus_c, units)}")
    if margin < settings.superheat_c - 0.5:
        return [text + f" — less than the shop's superheat of {degrees_text(settings.superheat_c, units)}: "
                "measure before adding, "
                "and heat or hold the additions rather than freeze a nozzle or skull the ladle."]
    return [text + "; measure to confirm."]


def _reactions(materials: Sequence[Material], bath: BathState) -> list[str]:
    cautions = []
    carbon = [m.name for m in materials if m.composition_pct.get("C", 0.0) >= _CARBON_BEARING_PCT]
    if carbon and bath.dissolved_o_ppm is not None and bath.dissolved_o_ppm >= _BOIL_O_PPM:
        cautions.append(f"Carbon boil: {', '.join(carbon)} carry carbon into a bath with "
                        f"{with_unit('O', content_text('O', bath.dissolved_o_ppm / PPM_PER_PCT))} "
                        "dissolved oxygen; carbon and oxygen react to CO at once and the bath can boil over violently. "
                        "Deoxidise first, add carbon slowly in small lots, keep the freeboard and stand clear.")
    fume = sorted({f"{m.name} ({'/'.join(fumes)})" for m in materials if (fumes := _bearing(m, _FUME_PCT))})
    if fume:
        cautions.append(f"Fume: {', '.join(fume)} give off manganese or chromium fume as they dissolve; run the fume "
                        "extraction and wear the respiratory protection the shop's rules require.")
    if any(m.composition_pct.get("Mg", 0.0) >= _EXOTHERMIC_PCT["Mg"] for m in materials):
        cautions.append("Magnesium treatment: magnesium boils far below iron temperature — treat only in a covered "
                        "ladle (or the shop's sandwich pocket), expect a bright flare and white fume, keep everyone out "
                        "of the exclusion zone until the reaction has stopped.")
    calcium_wire = [m.name for m in materials
                    if m.kg_per_m is not None and m.composition_pct.get("Ca", 0.0) >= _EXOTHERMIC_PCT["Ca"]]
    if calcium_wire:
        cautions.append(f"Calcium wire ({', '.join(calcium_wire)}): calcium boils in liquid steel; feed at the shop's "
                        "set speed under the hood, expect flare and splash at the ladle, stand clear of the feeder.")
    return cautions


def _handling(additions: Sequence[tuple[Material, float]], bath: BathState, units: Units) -> list[str]:
    cautions = []
    lifted = [m.name for m, _ in additions if m.pack_kg is not None and m.pack_kg >= _LIFTED_PACK_KG]
    if lifted:
        cautions.append(f"Lifting: {', '.join(lifted)} come in bags, bales or drums lifted over the vessel; check slings "
                        "and hooks, never stand under a suspended load, and lower them — a dropped bale splashes metal.")
    if bath.capacity_kg is not None and bath.final_kg is not None:
        free = bath.capacity_kg - bath.final_kg
        if free <= _FREEBOARD_SHARE * bath.capacity_kg:
            cautions.append(f"Freeboard: the bath will be within {mass_text(free, units)} of the vessel's capacity; leave room "
                            "for slag and a boil, and add slowly.")
    return cautions


def _bearing(material: Material, least_pct: dict[str, float]) -> list[str]:
    """The elements of ``least_pct`` that ``material`` holds at least that much of [wt %], in its order
    (every plan asks this of each material it uses: one list, not an any() over a generator per element)."""
    composition = material.composition_pct
    return [symbol for symbol, pct in least_pct.items() if composition.get(symbol, 0.0) >= pct]
