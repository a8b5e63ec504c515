"""Grades with their limits moved: inwards by a margin for the odds, outwards by one unit to
confirm what a binding limit costs (meltfix.plan.risk)."""

from __future__ import annotations

import math
import re
from collections.abc import Mapping
from dataclasses import replace
from types import MappingProxyType

from meltfix.plan.result import limit_checks
from meltfix.shop.grades import Grade
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import RecipeBook


def tightened(grade: Grade, inset_pct: Mapping[str, float]) -> Grade:
    """The grade with each limit (by label, "Mn min") moved inwards by its inset [wt %]; a window
    closes at most to its middle."""
    window = {}
    for s, (low, high) in grade.window_pct.items():
        room = (high - low) / 2.0
        window[s] = (low + min(inset_pct.get(f"{s} min", 0.0), room), high - min(inset_pct.get(f"{s} max", 0.0), room))
    indices = []
    for ix in grade.indices:
        both = ix.min_value is not None and ix.max_value is not None
        room = (ix.max_value - ix.min_value) / 2.0 if both else math.inf  # type: ignore[operator]
        indices.append(replace(
            ix, min_value=None if ix.min_value is None else ix.min_value + min(inset_pct.get(f"{ix.name} min", 0.0), room),
            max_value=None if ix.max_value is None else ix.max_value - min(inset_pct.get(f"{ix.name} max", 0.0), room)))
    return replace(grade, window_pct=MappingProxyType(window), indices=tuple(indices))


_LIMIT_NAME = re.compile(r"^(?P<label>\S+ (?:min|max)) (?P<pct>[-0-9.e+]+) %$")


def loosened(heat: Heat, book: RecipeBook, grade: Grade, name: str) -> tuple[Heat, Grade] | None:
    """The heat, and the grade to plan it to, with the limit or resource ``name`` (a Binding's name)
    loosened by the binding's unit: a limit of ``grade`` by 0.01 %, the capacity by 1 t, the drop by
    1 °C, a stock by 1 kg."""
    match = _LIMIT_NAME.match(name)
    if match:
        symbol, side = match["label"].rsplit(" ", 1)
        return heat, _moved(grade, symbol, side, 0.01)
    if name == "vessel capacity" and heat.capacity_kg is not None:
        return heat.with_changes(capacity_kg=heat.capacity_kg + 1000.0), grade
    if name == "temperature drop limit":
        limit = heat.drop_limit_c(book.settings)
        return None if limit is None else (heat.with_changes(max_temp_drop_c=limit + 1.0), grade)
    if name.startswith("stock of "):
        material = book.material(name.removeprefix("stock of "))
        stock = heat.material_stock_kg(material)
        if stock is None:
            return None
        return heat.with_changes(stock_kg={**heat.stock_kg, material.name: stock + 1.0}), grade
    return None


def _moved(grade: Grade, symbol: str, side: str, by_pct: float) -> Grade:
    """The grade with one limit moved outwards by ``by_pct`` [wt %]."""
    if symbol in grade.window_pct:
        low, high = grade.window_pct[symbol]
        window = {**grade.window_pct, symbol: (low - by_pct, high) if side == "min" else (low, high + by_pct)}
        return replace(grade, window_pct=MappingProxyType(window))
    return replace(grade, indices=tuple(
        replace(ix, min_value=ix.min_value - by_pct if side == "min" and ix.min_value is not None else ix.min_value,
                max_value=ix.max_value + by_pct if side == "max" and ix.max_value is not None else ix.max_value)
        if ix.name == symbol else ix for ix in grade.indices))


def real_name(name: str, grade: Grade) -> str:
    """A tightened limit's binding named by the grade's real limit, with the level planned to."""
    match = _LIMIT_NAME.match(name)
    if not match:
        return name
    symbol, side = match["label"].rsplit(" ", 1)
    real = next((c.limit_pct for c in limit_checks(grade, {}) if c.element == symbol and c.limit == side), None)
    if real is None or abs(real - float(match["pct"])) < 1e-9:
        return name
    return f"{match['label']} {real:g} % (planned to {float(match['pct']):.4g} % for the odds)"
