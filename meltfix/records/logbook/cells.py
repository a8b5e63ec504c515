"""How the logbook writes a heat, an analysis, a plan's options and a time into its cells, and reads
them back: a damaged cell (hand-edited, written by another program) is bad input naming the heat and
the column.

Times are the shop's wall-clock time, stored naive to the second; an aware datetime is first
converted to this computer's local time.
"""

from __future__ import annotations

import json
import tomllib
from collections.abc import Callable
from dataclasses import fields
from datetime import datetime
from types import MappingProxyType
from typing import Any

from meltfix.base.errors import InputError
from meltfix.plan.result import PlanOptions
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, parse_heat


def stamp(when: datetime | None) -> datetime:
    if when is None:
        when = datetime.now()
    elif when.tzinfo is not None:
        when = when.astimezone().replace(tzinfo=None)
    return when.replace(microsecond=0)


def iso(when: datetime) -> str:
    return when.isoformat(timespec="seconds")


def unit_price(cost: float, kg: float) -> float:
    # A plan line carries kg and cost = kg x price: rounding to 1e-9 undoes the division's last-bit noise.
    return round(cost / kg, 9)


def analysis_json(analysis: Analysis) -> tuple[str, str]:
    return json.dumps(dict(analysis.pct)), json.dumps(sorted(analysis.below_limit))


def analysis_from(pct_json: str, below_json: str) -> Analysis:
    return Analysis(pct=json.loads(pct_json), below_limit=frozenset(json.loads(below_json)))


# Heat fields HEAT.toml text (heat_to_toml) does not carry, kept beside it so a plan can be made again.
def heat_extra(heat: Heat) -> str:
    return json.dumps({
        "stage": heat.stage,
        "max_temp_drop_c": heat.max_temp_drop_c,
        "switched_off": sorted(heat.switched_off),
        "locked_kg": dict(heat.locked_kg),
        "price_per_kg": dict(heat.price_per_kg),
        "stock_kg": dict(heat.stock_kg),
    })


def cell(path: object, heat_id: str, column: str, parse: Callable[[Any], Any], raw: Any) -> Any:
    """A cell read back through ``parse``; a damaged one (hand-edited, written by another program) is
    bad input naming the heat and the column, never a traceback in a report or a replay."""
    try:
        return parse(raw)
    except (ValueError, TypeError, KeyError, AttributeError) as exc:  # json.JSONDecodeError is a ValueError
        shown = repr(raw) if len(repr(raw)) <= 40 else repr(raw)[:37] + "..."
        raise InputError(path, f"heat {heat_id}: {column}", f"damaged logbook cell {shown} ({exc})") from None


def kg_cell(value: Any) -> float | None:
    """A weight column: a number or empty."""
    if value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
        return value
    raise ValueError("not a number")


def heat_from(toml_text: str, extra_json: str, source: str, heat_id: str) -> Heat:
    try:
        data = tomllib.loads(toml_text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(source, "heat_toml", f"the recorded heat is not valid TOML ({exc})") from None
    heat = parse_heat(data, source, default_id=heat_id)
    extra = cell(source, heat_id, "heat_extra", json.loads, extra_json)
    return cell(source, heat_id, "heat_extra", lambda e: heat.with_changes(
        stage=e["stage"],
        max_temp_drop_c=e["max_temp_drop_c"],
        switched_off=frozenset(e["switched_off"]),
        locked_kg=MappingProxyType(e["locked_kg"]),
        price_per_kg=MappingProxyType(e["price_per_kg"]),
        stock_kg=MappingProxyType(e["stock_kg"]),
    ), extra)


def options_from(options_json: str) -> PlanOptions:
    # Options added or dropped in later versions of meltfix keep their defaults.
    known = {f.name for f in fields(PlanOptions)}
    return PlanOptions(**{k: v for k, v in json.loads(options_json).items() if k in known})
