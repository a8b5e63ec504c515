"""Display units: the conversion factors against NIST Special Publication 811 (Guide for the Use of
the International System of Units, 2008 edition), Appendix B."""

from __future__ import annotations

import pytest

from meltfix.base.units import F_AT_0_C, F_PER_C, KG_PER_LB, KG_PER_SHORT_TON, Units

US = Units("us")
METRIC = Units()


def test_factors_are_the_exact_ones_of_nist_sp_811() -> None:
    # NIST SP 811 Appendix B.8: pound (avoirdupois) to kilogram, 4.535 924 E-01 exactly 0.45359237.
    assert KG_PER_LB == 0.45359237
    # NIST SP 811 Appendix B.8: ton, short (2000 lb) to kilogram, 9.071 847 E+02 (907.18474 exactly).
    assert KG_PER_SHORT_TON == pytest.approx(907.18474, abs=1e-9)
    # NIST SP 811 Appendix B.9 / B.8: t/°F = 1.8 t/°C + 32; a difference of 1 °C is 1.8 °F.
    assert (F_PER_C, F_AT_0_C) == (1.8, 32.0)


def test_us_units_convert_masses_temperatures_and_costs_per_ton() -> None:
    assert US.mass(0.45359237) == pytest.approx(1.0, rel=1e-15)
    assert US.mass(1000.0) == pytest.approx(2204.62262, abs=1e-5)  # 1 / 0.45359237 (the NIST SP 811 factor above)
    assert US.temperature(0.0) == 32.0 and US.temperature(100.0) == pytest.approx(212.0)
    assert US.temperature(-40.0) == pytest.approx(-40.0)  # the scales cross at -40 (from the formula above)
    assert US.temperature(1600.0) == pytest.approx(2912.0)
    assert US.temperature_change(25.0) == pytest.approx(45.0)  # a difference: no 32 °F offset
    # 100 EUR per tonne is 100 x 0.90718474 = 90.718474 EUR per short ton.
    assert US.per_ton(100.0) == pytest.approx(90.718474, rel=1e-12)
    assert (US.mass_unit, US.ton_unit, US.temperature_unit) == ("lb", "short ton", "°F")


def test_metric_is_the_identity() -> None:
    assert (METRIC.mass(12.5), METRIC.temperature(1550.0), METRIC.temperature_change(-3.0), METRIC.per_ton(7.0)) \
        == (12.5, 1550.0, -3.0, 7.0)
    assert (METRIC.mass_unit, METRIC.ton_unit, METRIC.temperature_unit) == ("kg", "t", "°C")


def test_tons_prices_and_the_way_back_in() -> None:
    # 1 t = 1000 / 907.18474 = 1.10231131 short ton (NIST SP 811 Appendix B.8 factor above).
    assert US.tons(1.0) == pytest.approx(1.10231131, rel=1e-8)
    # 2.70 EUR/kg is 2.70 x 0.45359237 = 1.224699 EUR/lb.
    assert US.per_mass(2.70) == pytest.approx(1.2246994, rel=1e-7)
    # Typed in US units, back to SI: 2000 lb = 907.18474 kg, 2912 °F = 1600 °C, 1.2247 EUR/lb = 2.70 EUR/kg.
    assert US.kg(2000.0) == pytest.approx(907.18474, rel=1e-12)
    assert US.celsius(2912.0) == pytest.approx(1600.0) and US.celsius(32.0) == 0.0
    assert US.price_per_kg(US.per_mass(2.70)) == pytest.approx(2.70, rel=1e-12)
    for value in (0.0, 12.5, 1550.0):  # each way back undoes its way out
        assert US.kg(US.mass(value)) == pytest.approx(value) and US.celsius(US.temperature(value)) == pytest.approx(value)
    assert (METRIC.tons(3.0), METRIC.per_mass(2.7), METRIC.kg(5.0), METRIC.celsius(1600.0), METRIC.price_per_kg(2.7)) \
        == (3.0, 2.7, 5.0, 1600.0, 2.7)
