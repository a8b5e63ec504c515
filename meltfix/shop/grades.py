"""Grades: a chemistry window [wt %] with the shop's aims and indices, one file per grade under ``grades/``."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.shop.elements import element_sort_key, normalise_symbol
from meltfix.shop.toml_values import known_keys, number, optional_text, read_toml, require, table, text


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

    @cached_property
    def needed_elements(self) -> frozenset[str]:
        """Elements the limits read: the windows and every term of the indices (every heat's check
        asks; worked out once per grade)."""
        return frozenset(self.window_pct) | {s for index in self.indices for s, w in index.terms.items() if w}


_GRADE_KEYS = {"name", "standard", "family", "window", "aim", "index", "forbid"}


def parse_grade(data: Mapping[str, Any], source: object) -> Grade:
    known_keys(data, _GRADE_KEYS, source, "")
    name = text(require(data, "name", source, ""), source, "name")
    window = _window(data, source)
    aim = _aims(data, window, source)
    indices = _indices(data, source)
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
        standard=optional_text(data, "standard", source, ""),
        source_file=str(source),
    )


def _window(data: Mapping[str, Any], source: object) -> dict[str, tuple[float, float]]:
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
    return window


def _aims(data: Mapping[str, Any], window: Mapping[str, tuple[float, float]], source: object) -> dict[str, float]:
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
    return aim


def _indices(data: Mapping[str, Any], source: object) -> list[LinearIndex]:
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
    return indices


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
