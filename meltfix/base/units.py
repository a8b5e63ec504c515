"""The units a shop reads its plans in: shop.toml ``units = "metric"`` (default) or ``"us"``.

Everything inside meltfix is SI (kg, °C, currency per kg) and so are the data files and the JSON;
only what a person reads is converted, here: kg or lb, t or short ton, °C or °F, prices per kg or
per lb. The factors are exact by definition (the international avoirdupois pound, 1959).
"""

from __future__ import annotations

from dataclasses import dataclass

KG_PER_LB = 0.45359237
"""One avoirdupois pound [kg], exact."""
KG_PER_SHORT_TON = 2000.0 * KG_PER_LB
"""One short ton = 2000 lb [kg], exact (907.18474 kg)."""
F_PER_C = 1.8
"""A temperature difference of 1 °C is 1.8 °F."""
F_AT_0_C = 32.0
"""The Fahrenheit reading at 0 °C."""

UNIT_SYSTEMS = ("metric", "us")


@dataclass(frozen=True)
class Units:
    """Converts SI values for display; ``system`` is one of :data:`UNIT_SYSTEMS`."""

    system: str = "metric"

    @property
    def us(self) -> bool:
        return self.system == "us"

    @property
    def mass_unit(self) -> str:
        return "lb" if self.us else "kg"

    @property
    def ton_unit(self) -> str:
        return "short ton" if self.us else "t"

    @property
    def tons_unit(self) -> str:
        """The ton in a running sentence ("80 t of bath", "88 short tons of bath")."""
        return "short tons" if self.us else "t"

    @property
    def temperature_unit(self) -> str:
        return "°F" if self.us else "°C"

    def mass(self, kg: float) -> float:
        """A mass [kg] in the shop's mass unit."""
        return kg / KG_PER_LB if self.us else kg

    def temperature(self, c: float) -> float:
        """A temperature [°C] in the shop's scale."""
        return c * F_PER_C + F_AT_0_C if self.us else c

    def temperature_change(self, delta_c: float) -> float:
        """A temperature difference [°C] in the shop's degrees (no offset)."""
        return delta_c * F_PER_C if self.us else delta_c

    def per_ton(self, per_t: float) -> float:
        """A cost per tonne (1000 kg), per the shop's ton."""
        return per_t * KG_PER_SHORT_TON / 1000.0 if self.us else per_t

    def tons(self, tonnes: float) -> float:
        """A mass in tonnes (1000 kg) in the shop's ton."""
        return tonnes * 1000.0 / KG_PER_SHORT_TON if self.us else tonnes

    def per_mass(self, per_kg: float) -> float:
        """A price per kg, per the shop's mass unit."""
        return per_kg * KG_PER_LB if self.us else per_kg

    # The other way, for what a person types in the shop's units: back to SI.

    def kg(self, mass: float) -> float:
        """A mass typed in the shop's mass unit, in kg."""
        return mass * KG_PER_LB if self.us else mass

    def celsius(self, temperature: float) -> float:
        """A temperature typed in the shop's scale, in °C."""
        return (temperature - F_AT_0_C) / F_PER_C if self.us else temperature

    def price_per_kg(self, price: float) -> float:
        """A price typed per the shop's mass unit, per kg."""
        return price / KG_PER_LB if self.us else price
