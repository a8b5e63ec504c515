"""What the logbook reads back: the heats of a period with what they cost, the cost lines of a
report, one heat's whole history. Each query takes the logbook's ``read`` (SQL and parameters to
rows, inside the logbook's lock) and its location, named by any damaged cell.
"""

from __future__ import annotations

import json
from collections.abc import Callable, Sequence
from datetime import date, datetime, time, timedelta
from types import MappingProxyType

from meltfix.base.errors import InputError
from meltfix.records.logbook.cells import analysis_from, cell, heat_from, iso, kg_cell, options_from
from meltfix.records.logbook.records import (AdditionsRecord, CostLine, HeatHistory, HeatSummary, LineRecord,
                                             PlanRecord, SampleRecord, Shift)
from meltfix.shop.analysis import Analysis

Read = Callable[[str, Sequence[object]], list[tuple]]
"""SQL with ``?`` placeholders and its parameters -> the rows."""


def list_heats(read: Read, path: object, date_from: date | None, date_to: date | None,
               shift: Shift | None) -> list[HeatSummary]:
    """Heats that started between two dates (inclusive, either may be open), or in one shift,
    oldest first, with what their additions cost."""
    where, params = heat_filter(date_from, date_to, shift)
    rows = read(f"""
        SELECT h.heat_id, h.grade, h.started_at, h.shift_date, h.shift, h.bath_kg,
          (SELECT count(*) FROM sample s WHERE s.heat_id = h.heat_id),
          (SELECT count(*) FROM plan p WHERE p.heat_id = h.heat_id),
          (SELECT count(*) FROM addition_batch b WHERE b.heat_id = h.heat_id),
          (SELECT coalesce(sum(a.kg), 0) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
             WHERE b.heat_id = h.heat_id),
          (SELECT coalesce(sum(p.total_cost), 0) FROM plan p
             WHERE p.id IN (SELECT b.plan_id FROM addition_batch b WHERE b.heat_id = h.heat_id)),
          (SELECT coalesce(sum(a.cost), 0) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
             WHERE b.heat_id = h.heat_id),
          (SELECT count(*) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
             WHERE b.heat_id = h.heat_id AND a.cost IS NULL),
          (SELECT p.currency FROM plan p WHERE p.heat_id = h.heat_id ORDER BY p.made_at DESC, p.id DESC LIMIT 1)
        FROM heat h {where} ORDER BY h.started_at, h.heat_id""", params)
    return [HeatSummary(heat_id=r[0], grade=r[1], started_at=cell(path, r[0], "started_at", datetime.fromisoformat, r[2]),
                        shift=Shift(cell(path, r[0], "shift_date", date.fromisoformat, r[3]), r[4]),
                        bath_kg=cell(path, r[0], "bath_kg", kg_cell, r[5]), samples=r[6], plans=r[7],
                        corrections=r[8], added_kg=r[9], planned_cost=r[10], actual_cost=r[11],
                        unpriced_lines=r[12], currency=r[13] or "")
            for r in rows]


def heat_filter(date_from: date | None, date_to: date | None, shift: Shift | None) -> tuple[str, list[object]]:
    """The WHERE clause on the heat table ``h`` for a period or a shift, and its parameters."""
    clauses: list[str] = []
    params: list[object] = []
    if date_from is not None:
        clauses.append("h.started_at >= ?")
        params.append(iso(datetime.combine(date_from, time())))
    if date_to is not None:
        clauses.append("h.started_at < ?")
        params.append(iso(datetime.combine(date_to + timedelta(days=1), time())))
    if shift is not None:
        clauses.append("h.shift_date = ? AND h.shift = ?")
        params += [shift.shift_date.isoformat(), shift.name]
    return ("WHERE " + " AND ".join(clauses)) if clauses else "", params


def cost_lines(read: Read, date_from: date | None, date_to: date | None) -> list[CostLine]:
    """Planned lines (of the plans additions were made from) and actual lines of the heats in range."""
    where, params = heat_filter(date_from, date_to, None)
    rows = read(f"""
        SELECT h.heat_id, 'planned', l.material, l.kg, l.price_per_kg, l.cost
          FROM heat h JOIN plan p ON p.heat_id = h.heat_id JOIN plan_line l ON l.plan_id = p.id
          {where} {'AND' if where else 'WHERE'}
          p.id IN (SELECT b.plan_id FROM addition_batch b WHERE b.heat_id = h.heat_id)
        UNION ALL
        SELECT h.heat_id, 'actual', a.material, a.kg, a.price_per_kg, a.cost
          FROM heat h JOIN addition_batch b ON b.heat_id = h.heat_id JOIN addition a ON a.batch_id = b.id
          {where}""", params + params)
    return [CostLine(*row) for row in rows]


def heat_history(read: Read, path: object, heat_id: str) -> HeatHistory:
    """Everything recorded for one heat, in time order (read inside one read transaction)."""
    heat = read("SELECT grade, started_at, shift_date, shift, bath_kg FROM heat WHERE heat_id = ?", (heat_id,))
    if not heat:
        raise InputError(path, f"heat {heat_id}", "is not in the logbook")
    grade, started_at, shift_date, shift_name, bath_kg = heat[0]
    return HeatHistory(heat_id, grade, cell(path, heat_id, "started_at", datetime.fromisoformat, started_at),
                       Shift(cell(path, heat_id, "shift_date", date.fromisoformat, shift_date), shift_name),
                       cell(path, heat_id, "bath_kg", kg_cell, bath_kg),
                       _samples(read, path, heat_id), _plans(read, path, heat_id), _additions(read, path, heat_id))


def _samples(read: Read, path: object, heat_id: str) -> tuple[SampleRecord, ...]:
    burns: dict[int, list[tuple[Analysis, bool]]] = {}
    for sample_row, pct, below, accepted in read(
            "SELECT b.sample_row, b.analysis, b.below_limit, b.accepted FROM burn b JOIN sample s "
            "ON b.sample_row = s.id WHERE s.heat_id = ? ORDER BY b.sample_row, b.burn_no", (heat_id,)):
        burns.setdefault(sample_row, []).append(
            (cell(path, heat_id, "burn.analysis", lambda a: analysis_from(*a), (pct, below)), bool(accepted)))
    samples = []
    for row, sample_id, taken_at, pct, below, temperature, flags in read(
            "SELECT id, sample_id, taken_at, analysis, below_limit, temperature_c, flags FROM sample "
            "WHERE heat_id = ? ORDER BY taken_at, id", (heat_id,)):
        sparks = burns.get(row, [])
        samples.append(SampleRecord(
            heat_id, sample_id, cell(path, heat_id, "sample.taken_at", datetime.fromisoformat, taken_at),
            cell(path, heat_id, "sample.analysis", lambda a: analysis_from(*a), (pct, below)),
            tuple(b for b, _ in sparks), frozenset(k for k, (_, ok) in enumerate(sparks, 1) if not ok),
            temperature, tuple(cell(path, heat_id, "sample.flags", json.loads, flags))))
    return tuple(samples)


def _plans(read: Read, path: object, heat_id: str) -> tuple[PlanRecord, ...]:
    plan_lines = _lines(read, "SELECT l.plan_id, l.material, l.kg, l.price_per_kg, l.cost FROM plan_line l "
                              "JOIN plan p ON l.plan_id = p.id WHERE p.heat_id = ? ORDER BY l.plan_id, l.line_no",
                        heat_id)
    plans = []
    for (plan_id, made_at, status, total_cost, plan_bath, final_kg, currency, toml_text, extra, options,
         prices, result) in read(
            "SELECT id, made_at, status, total_cost, bath_kg, final_kg, currency, heat_toml, heat_extra, "
            "options, prices, result FROM plan WHERE heat_id = ? ORDER BY made_at, id", (heat_id,)):
        result_obj = cell(path, heat_id, f"plan {plan_id} result", lambda r: dict(json.loads(r)), result)
        plans.append(PlanRecord(
            plan_id=plan_id, heat_id=heat_id,
            made_at=cell(path, heat_id, f"plan {plan_id} made_at", datetime.fromisoformat, made_at),
            heat=heat_from(toml_text, extra, f"{path} heat {heat_id} plan {plan_id}", heat_id), heat_toml=toml_text,
            options=cell(path, heat_id, f"plan {plan_id} options", options_from, options), status=status,
            lines=plan_lines.get(plan_id, ()), total_cost=total_cost, bath_kg=plan_bath, final_kg=final_kg,
            predicted_pct=MappingProxyType(result_obj.get("predicted", {})),
            prices=MappingProxyType(cell(path, heat_id, f"plan {plan_id} prices", json.loads, prices)),
            currency=currency,
            result=MappingProxyType(result_obj)))
    return tuple(plans)


def _additions(read: Read, path: object, heat_id: str) -> tuple[AdditionsRecord, ...]:
    batch_lines = _lines(read, "SELECT a.batch_id, a.material, a.kg, a.price_per_kg, a.cost FROM addition a "
                               "JOIN addition_batch b ON a.batch_id = b.id WHERE b.heat_id = ? "
                               "ORDER BY a.batch_id, a.line_no", heat_id)
    return tuple(
        AdditionsRecord(batch_id, heat_id, cell(path, heat_id, "addition_batch.added_at", datetime.fromisoformat,
                                                added_at), plan_id, batch_lines.get(batch_id, ()))
        for batch_id, added_at, plan_id in read(
            "SELECT id, added_at, plan_id FROM addition_batch WHERE heat_id = ? ORDER BY added_at, id", (heat_id,)))


def _lines(read: Read, sql: str, heat_id: str) -> dict[int, tuple[LineRecord, ...]]:
    grouped: dict[int, list[LineRecord]] = {}
    for owner, material, kg, price, cost in read(sql, (heat_id,)):
        grouped.setdefault(owner, []).append(LineRecord(material, kg, price, cost))
    return {owner: tuple(lines) for owner, lines in grouped.items()}
