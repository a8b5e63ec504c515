"""Element symbols, atomic weights and number parsing, checked against the periodictable package."""

from __future__ import annotations

import periodictable
import pytest

from meltfix.base.errors import InputError
from meltfix.shop.elements import ATOMIC_WEIGHT, SYMBOLS, element_sort_key, normalise_symbol, parse_number


@pytest.mark.parametrize("symbol", sorted(ATOMIC_WEIGHT))
def test_atomic_weight_matches_periodictable(symbol: str) -> None:
    # periodictable (CIAAW 2021 values); older tables differ in the 5th-7th digit, hence rel 1e-4.
    reference = periodictable.elements.symbol(symbol).mass
    assert ATOMIC_WEIGHT[symbol] == pytest.approx(reference, rel=1e-4)


def test_symbols_are_the_periodic_table() -> None:
    # periodictable lists elements 1..118 (its neutron, number 0, is not an element).
    reference = {element.symbol for element in periodictable.elements if element.number > 0}
    assert len(reference) == 118
    assert SYMBOLS == reference


def test_atomic_weights_cover_the_steelmaking_elements() -> None:
    steelmaking = {"C", "Si", "Mn", "P", "S", "Cr", "Ni", "Mo", "Cu", "Al", "V", "Nb", "Ti", "B", "N", "O",
                   "Fe", "Ca", "Mg"}
    assert steelmaking <= set(ATOMIC_WEIGHT)
    assert set(ATOMIC_WEIGHT) <= SYMBOLS


@pytest.mark.parametrize(
    ("text", "expected"),
    [
        ("0.15", 0.15),
        ("0,15", 0.15),  # decimal comma, as European spectrometer exports write it
        (" 1,5 ", 1.5),
        (",5", 0.5),
        ("12", 12.0),
        ("1.5e-3", 0.0015),
        ("1,5E-3", 0.0015),
        ("\u22120,02", -0.02),  # typographic minus sign
        ("+0.3", 0.3),
    ],
)
def test_parse_number_accepts_point_and_comma(text: str, expected: float) -> None:
    assert parse_number(text, "sample.csv", "row 3, Mn") == pytest.approx(expected)


@pytest.mark.parametrize("text", ["", "abc", "1,2,3", "1.2.3", "0.15%", "nan", "inf", "1 000", "--1"])
def test_parse_number_rejects_non_numbers(text: str) -> None:
    with pytest.raises(InputError) as caught:
        parse_number(text, "sample.csv", "row 3, Mn")
    assert str(caught.value) == f"sample.csv: row 3, Mn: '{text}' is not a number"


@pytest.mark.parametrize(("text", "expected"), [("mn", "Mn"), ("MN", "Mn"), (" cr ", "Cr"), ("C", "C"), ("nb", "Nb")])
def test_normalise_symbol_fixes_case(text: str, expected: str) -> None:
    assert normalise_symbol(text, "heat.toml", "analysis") == expected


@pytest.mark.parametrize("text", ["Cb", "Xx", "", "Mnn", "Fe2", "1"])
def test_normalise_symbol_names_source_and_field(text: str) -> None:
    # "Cb" (columbium) is the old American name of niobium; it is not a symbol of today's table.
    with pytest.raises(InputError) as caught:
        normalise_symbol(text, "heat.toml", f"analysis.{text}")
    error = caught.value
    assert (error.source, error.field) == ("heat.toml", f"analysis.{text}")
    assert str(error) == f"heat.toml: analysis.{text}: '{text}' is not a chemical element symbol"


def test_sort_key_follows_an_analysis_sheet() -> None:
    symbols = ["Mo", "Zn", "C", "Fe", "Mn", "Si", "Ag"]
    assert sorted(symbols, key=element_sort_key) == ["C", "Si", "Mn", "Mo", "Ag", "Fe", "Zn"]
