"""Cautions tied to the additions: carbon boil, lifting, fume, magnesium treatment, calcium wire,
freeboard and the temperature margin. The thresholds are common practice (meltfix.plan.cautions); these
tests check that each caution appears exactly when its condition holds, and that every list defers to
the shop's procedures and local codes."""

from __future__ import annotations

from meltfix.plan.cautions import ALWAYS, BathState, plan_cautions
from meltfix.shop.materials import Material, parse_material
from meltfix.shop.settings import ShopSettings

SHOP = ShopSettings()


def material(name: str, composition: dict[str, float], **extra: object) -> Material:
    return parse_material({"name": name, "price_per_kg": 1.0, "composition": composition, **extra}, "test", "")


def cautions(additions: list[tuple[Material, float]], bath: BathState = BathState(), temperature_c: float | None = None,
             drop_c: float = 0.0) -> str:
    text = plan_cautions(additions, 50_000.0, drop_c, temperature_c, SHOP, bath)
    assert text[-1] == ALWAYS and "local codes" in ALWAYS
    return " ".join(text)


RAISER = material("Raiser", {"C": 98.0}, pack_kg=25.0)
FEMN = material("HC FeMn", {"Mn": 79.0, "C": 6.8})
BALES = material("Bales", {"C": 0.04}, pack_kg=1000.0)


def test_carbon_boil_only_with_a_high_oxygen_reading() -> None:
    assert "Carbon boil" in cautions([(RAISER, 25.0)], BathState(dissolved_o_ppm=450.0))
    assert "Carbon boil" not in cautions([(RAISER, 25.0)], BathState(dissolved_o_ppm=20.0))
    assert "Carbon boil" not in cautions([(RAISER, 25.0)])
    assert "Carbon boil: HC FeMn" in cautions([(FEMN, 100.0)], BathState(dissolved_o_ppm=300.0))


def test_lifting_fume_magnesium_calcium_wire() -> None:
    assert "Lifting: Bales" in cautions([(BALES, 2000.0)])
    assert "Lifting" not in cautions([(RAISER, 25.0)])  # a 25 kg bag goes by hand or chute
    assert "Fume: HC FeMn (Mn)" in cautions([(FEMN, 100.0)])
    assert "Fume" not in cautions([(RAISER, 25.0)])
    assert "Magnesium treatment" in cautions([(material("MgFeSi", {"Si": 45.0, "Mg": 6.0}), 200.0)])
    wire = material("CaSi wire", {"Ca": 30.0, "Si": 60.0}, kg_per_m=0.22)
    assert "Calcium wire (CaSi wire)" in cautions([(wire, 30.0)])
    assert "Calcium wire" not in cautions([(material("CaSi lump", {"Ca": 30.0, "Si": 60.0}), 30.0)])


def test_freeboard_near_capacity() -> None:
    assert "Freeboard: the bath will be within 1,000 kg" in cautions([(BALES, 2000.0)], BathState(capacity_kg=53_000.0,
                                                                                              final_kg=52_000.0))
    assert "Freeboard" not in cautions([(BALES, 2000.0)], BathState(capacity_kg=60_000.0, final_kg=52_000.0))


def test_temperature_margin_against_the_liquidus() -> None:
    text = cautions([(FEMN, 100.0)], BathState(temperature_after_c=1540.0, liquidus_c=1500.0), temperature_c=1545.0,
                    drop_c=5.0)
    assert "about 1540 °C (from 1545 °C), 40 °C above the liquidus of about 1500 °C; measure to confirm" in text
    low = cautions([(FEMN, 100.0)], BathState(temperature_after_c=1510.0, liquidus_c=1500.0), temperature_c=1515.0)
    assert "less than the shop's superheat of 30 °C" in low


def test_nothing_to_add_still_defers_to_the_shop() -> None:
    assert plan_cautions([], 50_000.0, 0.0, None, SHOP) == (ALWAYS,)
