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
