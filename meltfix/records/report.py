"""The supervisor's cost report, worked out with pandas from the logbook.

Cost per heat, per tonne, per grade and per material, what was planned against what was actually
added, and the heats that needed more than one correction. "Planned" means the plans the crew
made additions from (a plan made and then set aside is not a cost); "actual" is what was added,
priced at the prices in force when it was recorded. Per tonne is per tonne of bath as first planned.

This is the only module that imports pandas (its import alone costs about 0.3 s).
"""

from __future__ import annotations

import math
from collections import Counter
from collections.abc import Mapping
from dataclasses import dataclass
from datetime import date
from pathlib import Path

import pandas as pd

from meltfix.base.outputs import csv_cell, write_atomic
from meltfix.records.logbook import CostLine, Logbook

UNKNOWN_GRADE = "(no plan)"

_HEAT_COLUMNS = ["heat", "started_at", "shift", "grade", "bath_t", "samples", "corrections",
                 "planned_cost", "cost", "difference", "cost_per_t", "planned_per_t", "unpriced_lines"]


@dataclass(frozen=True)
class CostReport:
    """The report's tables (pandas DataFrames) and totals. Costs [currency], masses [kg] or [t]."""

    heats: pd.DataFrame
    """One row per heat, oldest first: heat, started_at, shift, grade, bath_t, samples, corrections,
    planned_cost, cost (actual), difference (actual - planned), cost_per_t, planned_per_t, unpriced_lines."""
    grades: pd.DataFrame
    """One row per grade, dearest per tonne first: grade, heats, tonnes, planned_cost, cost,
    difference, cost_per_t, repeat_heats (heats with more than one correction)."""
    materials: pd.DataFrame
    """One row per material, dearest first: material, planned_kg, actual_kg, planned_cost, cost,
    difference, share (of the actual cost, 0..1)."""
    totals: Mapping[str, float]
    """heats, tonnes, planned_cost, cost, difference, cost_per_t, corrections, repeat_heats, unpriced_lines."""
    currency: str
    shop_name: str | None
    date_from: date | None
    date_to: date | None
    notes: tuple[str, ...] = ()

    @property
    def repeat_heats(self) -> pd.DataFrame:
        """Heats that needed more than one correction, most corrections first."""
        repeat = self.heats[self.heats["corrections"] > 1]
        return repeat.sort_values(["corrections", "cost"], ascending=[False, False], kind="stable")


def build_report(logbook: Logbook, date_from: date | None = None, date_to: date | None = None) -> CostReport:
    """Work out the cost report for the heats started between two dates (inclusive)."""
    with logbook.reading():  # the heats and their lines from one state of the file
        summaries = logbook.list_heats(date_from, date_to)
        lines = logbook.cost_lines(date_from, date_to)
    heats = pd.DataFrame(
        [(h.heat_id, h.started_at, h.shift.label, h.grade or UNKNOWN_GRADE,
          (h.bath_kg or math.nan) / 1000.0, h.samples, h.corrections, h.planned_cost, h.actual_cost,
          h.unpriced_lines) for h in summaries],
        columns=["heat", "started_at", "shift", "grade", "bath_t", "samples", "corrections", "planned_cost",
                 "cost", "unpriced_lines"])
    heats = heats.astype({"bath_t": float, "planned_cost": float, "cost": float,
                          "samples": int, "corrections": int, "unpriced_lines": int})
    heats["difference"] = heats["cost"] - heats["planned_cost"]
    heats["cost_per_t"] = heats["cost"] / heats["bath_t"]
    heats["planned_per_t"] = heats["planned_cost"] / heats["bath_t"]
    heats = heats[_HEAT_COLUMNS]

    grades = _per_grade(heats)
    materials = _per_material(lines)
    tonnes = float(heats["bath_t"].sum())
    cost = float(heats["cost"].sum())
    totals = {
        "heats": len(heats),
        "tonnes": tonnes,
        "planned_cost": float(heats["planned_cost"].sum()),
        "cost": cost,
        "difference": float(heats["difference"].sum()),
        "cost_per_t": cost / tonnes if tonnes > 0 else math.nan,
        "corrections": int(heats["corrections"].sum()),
        "repeat_heats": int((heats["corrections"] > 1).sum()),
        "unpriced_lines": int(heats["unpriced_lines"].sum()),
    }
    currencies = Counter(h.currency for h in summaries if h.currency)
    notes = []
    if len(currencies) > 1:
        notes.append(f"heats were priced in several currencies ({', '.join(sorted(currencies))}); "
                     "the totals add them up as they are")
    if totals["unpriced_lines"]:
        notes.append(f"{totals['unpriced_lines']} addition line(s) were recorded without a known price "
                     "and are left out of the costs")
    unplanned = heats[(heats["corrections"] > 0) & (heats["planned_cost"] == 0) & (heats["cost"] > 0)]
    if len(unplanned):
        notes.append(f"{len(unplanned)} heat(s) had additions recorded without a plan: "
                     "their planned cost shows as 0")
    return CostReport(heats=heats, grades=grades, materials=materials, totals=totals,
                      currency=currencies.most_common(1)[0][0] if currencies else "",
                      shop_name=logbook.shop_name, date_from=date_from, date_to=date_to, notes=tuple(notes))


def _per_grade(heats: pd.DataFrame) -> pd.DataFrame:
    grouped = heats.groupby("grade", sort=False)
    grades = pd.DataFrame({
        "heats": grouped.size(),
        "tonnes": grouped["bath_t"].sum(),
        "planned_cost": grouped["planned_cost"].sum(),
        "cost": grouped["cost"].sum(),
        "repeat_heats": grouped["corrections"].agg(lambda c: int((c > 1).sum())),
    })
    grades["difference"] = grades["cost"] - grades["planned_cost"]
    # Per tonne of the grade's whole output, not the mean of the heats' figures.
    grades["cost_per_t"] = grades["cost"] / grades["tonnes"].where(grades["tonnes"] > 0)
    grades = grades.reset_index()[["grade", "heats", "tonnes", "planned_cost", "cost", "difference",
                                   "cost_per_t", "repeat_heats"]]
    return grades.sort_values(["cost_per_t", "grade"], ascending=[False, True], kind="stable",
                              na_position="last").reset_index(drop=True)


def _per_material(cost_lines: list[CostLine]) -> pd.DataFrame:
    lines = pd.DataFrame([(line.source, line.material, line.kg, line.cost) for line in cost_lines],
                         columns=["source", "material", "kg", "cost"])
    lines = lines.astype({"kg": float, "cost": float})
    columns = ["material", "planned_kg", "actual_kg", "planned_cost", "cost", "difference", "share"]
    if lines.empty:
        return pd.DataFrame({c: pd.Series(dtype=str if c == "material" else float) for c in columns})
    table = lines.pivot_table(index="material", columns="source", values=["kg", "cost"], aggfunc="sum",
                              fill_value=0.0)
    materials = pd.DataFrame(index=table.index)
    for column, (value, source) in {"planned_kg": ("kg", "planned"), "actual_kg": ("kg", "actual"),
                                    "planned_cost": ("cost", "planned"), "cost": ("cost", "actual")}.items():
        materials[column] = table[(value, source)] if (value, source) in table.columns else 0.0
    materials = materials.astype(float)
    materials["difference"] = materials["cost"] - materials["planned_cost"]
    total = materials["cost"].sum()
    materials["share"] = materials["cost"] / total if total > 0 else 0.0
    materials = materials.reset_index()
    materials.columns.name = None
    return materials.sort_values(["cost", "material"], ascending=[False, True], kind="stable").reset_index(drop=True)


def write_heats_csv(report: CostReport, path: Path | str) -> Path:
    """One row per heat with its cost, as CSV (written whole or not at all). Text cells that a
    spreadsheet would run as a formula are neutralised (OWASP's CSV-injection advice)."""
    table = report.heats.copy()
    table["started_at"] = table["started_at"].map(lambda when: when.isoformat(timespec="minutes"))
    table["currency"] = report.currency
    money = ["planned_cost", "cost", "difference", "cost_per_t", "planned_per_t"]
    table[money] = table[money].round(2)
    table["bath_t"] = table["bath_t"].round(3)
    for column in table.columns:
        if not pd.api.types.is_numeric_dtype(table[column]):
            table[column] = table[column].map(csv_cell)
    return write_atomic(path, table.to_csv(index=False), what="the CSV file")
