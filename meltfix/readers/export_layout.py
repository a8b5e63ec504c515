"""The shop's own export layout: ``[spectrometer]`` in ``shop.toml``, validated key by key."""

from __future__ import annotations

import codecs
from collections.abc import Mapping
from dataclasses import dataclass, field
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.shop.elements import normalise_symbol
from meltfix.shop.repeatability import RepeatabilityCurve, default_curve
from meltfix.shop.toml_values import number, table, text


def header_key(name: str) -> str:
    """Header names compare case-blind with runs of spaces collapsed ("Sample  ID" == "sample id")."""
    return " ".join(name.split()).casefold()


_LAYOUT_KEYS = ("sample_column", "burn_column", "grade_column", "heat_column", "delimiter", "decimal",
                "encoding", "columns", "units", "ignore_columns", "repeatability")
_UNIT_WORDS = {"%": False, "wt%": False, "wt.%": False, "mass%": False, "m%": False, "ppm": True,
               "mg/kg": True}


def unit_is_ppm(unit: str, source: object, field_name: str) -> bool:
    cleaned = "".join(unit.split()).casefold()
    if cleaned not in _UNIT_WORDS:
        raise InputError(source, field_name, f"unknown unit '{unit}' (use % or ppm)")
    return _UNIT_WORDS[cleaned]


@dataclass(frozen=True)
class ExportLayout:
    """How the shop's spectrometer writes its export: ``[spectrometer]`` in ``shop.toml``.

    Every field is optional; unset ones are detected from the file. ``columns`` maps a header
    as written to an element symbol, ``units`` maps a header or a symbol to "%" or "ppm" (for
    headers that carry no unit), ``repeatability`` overrides the built-in curves per element.
    """

    sample_column: str | None = None
    burn_column: str | None = None
    grade_column: str | None = None
    heat_column: str | None = None
    delimiter: str | None = None
    decimal: str | None = None
    encoding: str = "utf-8"
    columns: Mapping[str, str] = field(default_factory=dict)
    """Header key (see ``header_key``) -> element symbol."""
    units_ppm: Mapping[str, bool] = field(default_factory=dict)
    """Header key or element symbol, compared as by ``header_key`` -> True when the column is in ppm."""
    ignore_columns: frozenset[str] = frozenset()
    repeatability: Mapping[str, RepeatabilityCurve] = field(default_factory=dict)

    def curve(self, symbol: str) -> RepeatabilityCurve:
        return self.repeatability.get(symbol) or default_curve(symbol)

    @classmethod
    def from_settings(cls, raw: Mapping[str, Any], source: object = "shop.toml") -> ExportLayout:
        """Validate the ``[spectrometer]`` table; every mistake names its key."""
        for key in raw:
            if key not in _LAYOUT_KEYS:
                raise InputError(source, f"{_WHERE}{key}",
                                 f"unknown key (expected one of: {', '.join(_LAYOUT_KEYS)})")

        def optional_text(key: str) -> str | None:
            return None if key not in raw else text(raw[key], source, f"{_WHERE}{key}")

        delimiter, decimal = _separators(raw, source)
        ignore = raw.get("ignore_columns", [])
        if not isinstance(ignore, list) or not all(isinstance(item, str) for item in ignore):
            raise InputError(source, f"{_WHERE}ignore_columns", "expected a list of column names")
        return cls(
            sample_column=optional_text("sample_column"),
            burn_column=optional_text("burn_column"),
            grade_column=optional_text("grade_column"),
            heat_column=optional_text("heat_column"),
            delimiter=delimiter,
            decimal=decimal,
            encoding=_encoding(raw, source),
            columns=MappingProxyType(_columns(raw, source)),
            units_ppm=MappingProxyType(_units(raw, source)),
            ignore_columns=frozenset(header_key(item) for item in ignore),
            repeatability=MappingProxyType(_curves(raw, source)),
        )


_WHERE = "spectrometer."


def _separators(raw: Mapping[str, Any], source: object) -> tuple[str | None, str | None]:
    """The cell separator and the decimal mark, each None to be detected from the file."""
    delimiter = raw.get("delimiter")
    if delimiter is not None:
        if delimiter in ("tab", "\\t"):
            delimiter = "\t"
        if not isinstance(delimiter, str) or len(delimiter) != 1 or delimiter in "\"\r\n.":
            raise InputError(source, f"{_WHERE}delimiter",
                             f"expected one character such as \",\", \";\" or \"tab\", got {delimiter!r}")
    decimal = raw.get("decimal")
    if decimal is not None and decimal not in (".", ","):
        raise InputError(source, f"{_WHERE}decimal", f"expected \".\" or \",\", got {decimal!r}")
    if decimal == "," and delimiter == ",":
        raise InputError(source, f"{_WHERE}decimal", "a decimal comma cannot be read from a comma-separated file")
    return delimiter, decimal


def _encoding(raw: Mapping[str, Any], source: object) -> str:
    encoding = text(raw.get("encoding", "utf-8"), source, f"{_WHERE}encoding")
    try:
        codecs.lookup(encoding)
    except LookupError:
        raise InputError(source, f"{_WHERE}encoding",
                         f"'{encoding}' is not a known text encoding (e.g. \"utf-8\", \"cp1252\")") from None
    return encoding


def _columns(raw: Mapping[str, Any], source: object) -> dict[str, str]:
    columns: dict[str, str] = {}
    for header, symbol in table(raw.get("columns", {}), source, f"{_WHERE}columns").items():
        field_name = f"{_WHERE}columns.{header}"
        symbol = normalise_symbol(text(symbol, source, field_name), source, field_name)
        if symbol == "Fe":
            raise InputError(source, field_name,
                             "iron is the balance and is not read; list the column under ignore_columns")
        columns[header_key(header)] = symbol
    return columns


def _units(raw: Mapping[str, Any], source: object) -> dict[str, bool]:
    units: dict[str, bool] = {}
    for name, unit in table(raw.get("units", {}), source, f"{_WHERE}units").items():
        field_name = f"{_WHERE}units.{name}"
        units[header_key(name)] = unit_is_ppm(text(unit, source, field_name), source, field_name)
    return units


def _curves(raw: Mapping[str, Any], source: object) -> dict[str, RepeatabilityCurve]:
    curves: dict[str, RepeatabilityCurve] = {}
    for name, spec in table(raw.get("repeatability", {}), source, f"{_WHERE}repeatability").items():
        field_name = f"{_WHERE}repeatability.{name}"
        symbol = normalise_symbol(name, source, field_name)
        if isinstance(spec, Mapping):
            for key in spec:
                if key not in ("floor_pct", "factor"):
                    raise InputError(source, f"{field_name}.{key}", "unknown key (expected floor_pct, factor)")
            base = default_curve(symbol)
            curves[symbol] = RepeatabilityCurve(
                number(spec.get("floor_pct", base.floor_pct), source, f"{field_name}.floor_pct", positive=True),
                number(spec.get("factor", base.factor), source, f"{field_name}.factor"))
        else:
            # A plain number is a fixed limit [wt %] at every content.
            curves[symbol] = RepeatabilityCurve(number(spec, source, field_name, positive=True), 0.0, 0.0)
    return curves
