"""The cost report's arithmetic, on a small logbook whose figures are worked by hand.

Outside references: hand arithmetic (kg x price, cost / tonnes) written beside each check, SQLite's
own GROUP BY over the file (an aggregation that shares no code with the pandas one), and the
standard library's csv reader for the CSV file.
"""

from __future__ import annotations

import csv
import math
import sqlite3
from datetime import date, datetime
from pathlib import Path

import pytest

from meltfix.plan.result import Addition, Plan
from meltfix.records.logbook import Logbook
from meltfix.records.report import build_report, write_heats_csv
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat


def _heat(heat_id: str, grade: str, bath_kg: float) -> Heat:
    return Heat(heat_id, grade, bath_kg, Analysis({"C": 0.3, "Mn": 0.5}))


def _plan(heat: Heat, lines: list[tuple[str, float, float]]) -> Plan:
    additions = tuple(Addition(material, kg, kg * price) for material, kg, price in lines)
    return Plan(heat_id=heat.heat_id, grade=heat.grade, status="optimal", additions=additions,
                total_cost=math.fsum(a.cost for a in additions), bath_kg=heat.bath_kg,
                final_kg=heat.bath_kg + sum(a.kg for a in additions), predicted_pct={}, checks=(), violations=(),
                binding=(), cautions=(), temperature_drop_c=0.0)


@pytest.fixture()
def logbook(tmp_path: Path):
    """Three heats: H1 and H2 (SAE 1045, 60 t and 40 t), H3 (S355J2, 100 t)."""
    with Logbook(tmp_path / "log.sqlite") as book:
        book.set_shop_name("Kestrel Bend Foundry & Steel")
        h1 = _heat("H1", "SAE 1045", 60_000.0)
        p1 = book.record_plan(h1, _plan(h1, [("FeMn", 200.0, 1.35), ("Graphite", 25.0, 0.80)]),
                              datetime(2026, 3, 2, 7, 0))
        book.record_additions("H1", [("FeMn", 220.0), ("Graphite", 25.0)], p1, datetime(2026, 3, 2, 7, 5))

        h2 = _heat("H2", "SAE 1045", 40_000.0)
        p2 = book.record_plan(h2, _plan(h2, [("FeMn", 100.0, 1.35)]), datetime(2026, 3, 2, 15, 0))
        book.record_additions("H2", [("FeMn", 100.0)], p2, datetime(2026, 3, 2, 15, 5))
        p3 = book.record_plan(h2, _plan(h2, [("Graphite", 50.0, 0.80)]), datetime(2026, 3, 2, 15, 20))
        book.record_plan(h2, _plan(h2, [("FeMn", 500.0, 1.35)]), datetime(2026, 3, 2, 15, 21))  # set aside
        book.record_additions("H2", [("Graphite", 25.0)], p3, datetime(2026, 3, 2, 15, 25))

        h3 = _heat("H3", "S355J2", 100_000.0)
        p5 = book.record_plan(h3, _plan(h3, [("SiMn", 400.0, 1.25)]), datetime(2026, 3, 3, 23, 0))
        book.record_additions("H3", [("SiMn", 380.0), ("Al wire", 30.0)], p5, datetime(2026, 3, 3, 23, 6),
                              prices={"Al wire": 3.20})
        yield book


def test_cost_per_heat_and_per_tonne(logbook: Logbook) -> None:
    report = build_report(logbook)
    heats = report.heats.set_index("heat")
    # H1: 220 x 1.35 + 25 x 0.80 = 317, planned 200 x 1.35 + 25 x 0.80 = 290, per tonne 317 / 60.
    assert heats.loc["H1", "cost"] == pytest.approx(317.0)
    assert heats.loc["H1", "planned_cost"] == pytest.approx(290.0)
    assert heats.loc["H1", "cost_per_t"] == pytest.approx(317.0 / 60.0)
    # H2: two corrections, 100 x 1.35 + 25 x 0.80 = 155 against plans of 135 + 40 = 175; the plan set
    # aside (500 kg FeMn) is not a cost.
    assert heats.loc["H2", "cost"] == pytest.approx(155.0)
    assert heats.loc["H2", "planned_cost"] == pytest.approx(175.0)
    assert heats.loc["H2", "difference"] == pytest.approx(-20.0)
    assert heats.loc["H2", "corrections"] == 2
    # H3: 380 x 1.25 + 30 x 3.20 = 571, per tonne 5.71.
    assert heats.loc["H3", "cost_per_t"] == pytest.approx(5.71)
    assert list(report.repeat_heats["heat"]) == ["H2"]
    assert report.totals["cost"] == pytest.approx(317.0 + 155.0 + 571.0)
    assert report.totals["cost_per_t"] == pytest.approx(1043.0 / 200.0)
    assert report.totals["repeat_heats"] == 1 and report.totals["corrections"] == 4
    assert report.currency == "EUR" and report.shop_name == "Kestrel Bend Foundry & Steel"


def test_per_grade_is_per_tonne_of_the_grade_dearest_first(logbook: Logbook) -> None:
    grades = build_report(logbook).grades
    assert list(grades["grade"]) == ["S355J2", "SAE 1045"]  # 5.71 against (317 + 155) / 100 = 4.72
    row = grades.set_index("grade").loc["SAE 1045"]
    assert (row["heats"], row["tonnes"], row["repeat_heats"]) == (2, 100.0, 1)
    assert row["cost_per_t"] == pytest.approx(4.72)
    assert row["planned_cost"] == pytest.approx(465.0)


def test_per_material_planned_against_actual(logbook: Logbook) -> None:
    materials = build_report(logbook).materials.set_index("material")
    # FeMn planned 200 + 100 kg (405), actually 220 + 100 kg (432); Al wire was never planned.
    assert tuple(materials.loc["FeMn", ["planned_kg", "actual_kg", "planned_cost", "cost"]]) == pytest.approx(
        (300.0, 320.0, 405.0, 432.0))
    assert tuple(materials.loc["Graphite", ["planned_kg", "actual_kg"]]) == pytest.approx((75.0, 50.0))
    assert tuple(materials.loc["Al wire", ["planned_kg", "cost", "difference"]]) == pytest.approx((0.0, 96.0, 96.0))
    assert materials["share"].sum() == pytest.approx(1.0)
    assert list(materials.index) == ["SiMn", "FeMn", "Al wire", "Graphite"]  # dearest first


def test_pandas_totals_agree_with_sqlites_own_group_by(logbook: Logbook) -> None:
    report = build_report(logbook)
    db = sqlite3.connect(logbook.path)
    by_grade = dict(db.execute(
        "SELECT h.grade, sum(a.cost) FROM addition a JOIN addition_batch b ON a.batch_id = b.id "
        "JOIN heat h ON h.heat_id = b.heat_id GROUP BY h.grade").fetchall())
    by_material = dict(db.execute("SELECT material, sum(cost) FROM addition GROUP BY material").fetchall())
    db.close()
    assert dict(zip(report.grades["grade"], report.grades["cost"], strict=True)) == pytest.approx(by_grade)
    assert dict(zip(report.materials["material"], report.materials["cost"], strict=True)) == pytest.approx(by_material)
    assert report.heats["cost"].sum() == pytest.approx(report.materials["cost"].sum())


def test_dates_are_inclusive_days_of_the_heat_start(logbook: Logbook) -> None:
    assert list(build_report(logbook, date(2026, 3, 3), None).heats["heat"]) == ["H3"]
    assert list(build_report(logbook, None, date(2026, 3, 2)).heats["heat"]) == ["H1", "H2"]
    only = build_report(logbook, date(2026, 3, 3), date(2026, 3, 3))
    assert list(only.materials["material"]) == ["SiMn", "Al wire"]


def test_csv_has_one_row_per_heat_with_its_cost(logbook: Logbook, tmp_path: Path) -> None:
    path = write_heats_csv(build_report(logbook), tmp_path / "heats.csv")
    with path.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert [row["heat"] for row in rows] == ["H1", "H2", "H3"]
    assert [float(row["cost"]) for row in rows] == [317.0, 155.0, 571.0]
    assert rows[0]["started_at"] == "2026-03-02T07:00" and rows[2]["shift"] == "2026-03-03 night"
    assert rows[1]["corrections"] == "2" and rows[0]["currency"] == "EUR"
    assert not list(tmp_path.glob(".*partial"))


def test_an_empty_period_gives_an_empty_report(logbook: Logbook, tmp_path: Path) -> None:
    report = build_report(logbook, date(2030, 1, 1), None)
    assert report.totals["heats"] == 0 and report.heats.empty and report.materials.empty
    assert math.isnan(report.totals["cost_per_t"])
    write_heats_csv(report, tmp_path / "empty.csv")
    assert (tmp_path / "empty.csv").read_text(encoding="utf-8").startswith("heat,started_at,")


def test_unpriced_and_unplanned_additions_are_noted(tmp_path: Path) -> None:
    with Logbook(tmp_path / "log.sqlite") as book:
        book.record_additions("X1", [("Mystery", 10.0)], when=datetime(2026, 3, 2, 9, 0))
        book.record_additions("X2", [("FeMn", 10.0)], when=datetime(2026, 3, 2, 9, 0), prices={"FeMn": 1.35})
        report = build_report(book)
    assert report.totals["unpriced_lines"] == 1
    assert any("without a known price" in note for note in report.notes)
    assert any("without a plan" in note for note in report.notes)
    assert report.heats.set_index("heat").loc["X2", "cost"] == pytest.approx(13.5)
    assert list(report.grades["grade"]) == ["(no plan)"]
