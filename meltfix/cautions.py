"""Safety cautions printed with every plan (DESIGN §4). The tool advises; a qualified person decides."""

from __future__ import annotations

from collections.abc import Sequence

from meltfix.recipes import Material, ShopSettings

ALWAYS = ("Additions follow the shop's written procedures, its protective-equipment rules and licensed "
          "practice under local codes; meltfix advises, a qualified person decides.")
DRY = ("Every addition must be dry (and preheated where the shop's practice says so): moisture trapped in "
       "an addition turns to steam in liquid metal and can cause a violent explosion.")
# Contents above which a material's reaction with the bath or its oxygen gives off heat quickly.
_EXOTHERMIC_PCT = {"Al": 20.0, "Si": 20.0, "Ca": 10.0, "Mg": 3.0}
_LIQUIDUS_MARGIN_C = 30.0  # rough superheat a ladle needs to stay castable (common practice)


def plan_cautions(additions: Sequence[tuple[Material, float]], bath_kg: float, temperature_drop_c: float,
                  temperature_c: float | None, settings: ShopSettings) -> tuple[str, ...]:
    """Cautions in plain words for a set of additions (material, kg); always ends with ALWAYS."""
    if not additions:
        return (ALWAYS,)
    cautions = [DRY]
    total_kg = sum(kg for _, kg in additions)
    per_t = total_kg / (bath_kg / 1000.0)
    if per_t > settings.large_addition_kg_per_t or temperature_drop_c > 15.0:
        chill = f" chills the bath by about {temperature_drop_c:.0f} °C" if temperature_drop_c >= 0.5 else ""
        cautions.append(
            f"Large addition: {total_kg:,.0f} kg ({per_t:.1f} kg/t){chill}. Check the temperature before and "
            "after, add in portions while stirring, and keep clear of a freezing nozzle or a skulled ladle."
        )
    if temperature_c is not None and temperature_drop_c > 0:
        after = temperature_c - temperature_drop_c
        cautions.append(f"Predicted bath temperature after the additions: about {after:.0f} °C "
                        f"(from {temperature_c:.0f} °C); confirm it stays above liquidus plus the shop's "
                        f"superheat (about {_LIQUIDUS_MARGIN_C:.0f} °C, common practice).")
    hot = sorted({m.name for m, _ in additions
                  if any(m.composition_pct.get(s, 0.0) >= pct for s, pct in _EXOTHERMIC_PCT.items())
                  or m.chill_per_kg_t < 0})
    if hot:
        cautions.append(f"{', '.join(hot)}: reacts exothermically (aluminium, silicon, calcium or magnesium "
                        "bearing) — expect flare and spatter; add through the shop's chute or wire, never by hand, "
                        "and keep the exclusion zone.")
    for material, _ in additions:
        if material.notes:
            cautions.append(f"{material.name}: {material.notes}")
    cautions.append(ALWAYS)
    return tuple(cautions)
