"""The screen's plain parts, without a terminal: typed inputs -> heat, the crew ticket, a quiet solver."""

from __future__ import annotations

import subprocess
import sys
import textwrap
from datetime import datetime

from meltfix.plan.numbers import kg_text
from meltfix.plan.planner import Planner
from meltfix.tui.draft import ANALYSIS, BATH, CAPACITY, NOT_MEASURED, HeatInputs, build_heat, cell_key
from meltfix.tui.ticket import ticket_text, write_ticket


def _inputs(heat, **changes) -> HeatInputs:
    fields = {"grade": heat.grade, "bath_text": "60000", "capacity_text": "65000", "stage": "ladle",
              "cells": {"C": "0,40", "Mn": "0.52", "N": "68", "Al": "<0.002", "P": "0.014", "S": "0.022",
                        "Cr": "0.09", "Ni": "0.08", "Mo": "0.02", "Cu": "0.16"}}
    fields.update(changes)
    return HeatInputs(**fields)


def test_typed_inputs_become_a_heat(demo_book, demo_heat) -> None:
    draft = build_heat(demo_heat, _inputs(demo_heat), demo_book)
    assert draft.errors == {}
    analysis = draft.heat.analysis
    assert analysis.pct["C"] == 0.40  # decimal comma
    assert abs(analysis.pct["N"] - 0.0068) < 1e-15  # N typed in ppm: 68 ppm = 0.0068 wt %
    assert analysis.pct["Al"] == 0.002 and "Al" in analysis.below_limit
    assert draft.heat.capacity_kg == 65000 and draft.heat.bath_kg == 60000


def test_every_bad_field_gets_its_own_reason(demo_book, demo_heat) -> None:
    draft = build_heat(demo_heat, _inputs(demo_heat, bath_text="60,000", capacity_text="",
                                          cells={"C": "0.4x", "Mn": "-0.5", "Si": "120"}), demo_book)
    assert draft.heat is None
    assert "ambiguous" in draft.errors[BATH]  # 60 kg or 60 t? never guessed
    assert CAPACITY not in draft.errors  # empty = not limited
    assert "not a number" in draft.errors[cell_key("C")]
    assert "negative" in draft.errors[cell_key("Mn")]
    assert "above 100" in draft.errors[cell_key("Si")]


def test_whole_heat_faults_name_their_field(demo_book, demo_heat) -> None:
    small = build_heat(demo_heat, _inputs(demo_heat, capacity_text="50000"), demo_book)
    assert "less than the bath" in small.errors[CAPACITY]
    over = build_heat(demo_heat, _inputs(demo_heat, cells={"Mn": "60", "Cr": "50"}), demo_book)
    assert "over 100" in over.errors[ANALYSIS]


def test_an_empty_cell_the_grade_needs_holds_the_plan_and_nm_declares_it(demo_book, demo_heat) -> None:
    cells = dict(_inputs(demo_heat).cells)
    cells["Cu"] = ""
    held = build_heat(demo_heat, _inputs(demo_heat, cells=cells), demo_book)
    assert held.heat is None and held.errors == {cell_key("Cu"): NOT_MEASURED}
    cells["Cu"] = "NM"
    declared = build_heat(demo_heat, _inputs(demo_heat, cells=cells), demo_book)
    assert declared.errors == {} and declared.heat.not_measured == {"Cu"}
    plan = Planner(demo_book).plan(declared.heat)
    assert plan.cautions[0].startswith("NOT MEASURED: Cu")
    ticket = ticket_text(declared.heat, plan, demo_book, datetime(2026, 3, 4, 5, 6))
    assert "NOT MEASURED: Cu" in " ".join(ticket.split()) and "not measured: NOT CHECKED" in ticket


def test_an_implausible_value_is_said_beside_its_cell(demo_book, demo_heat) -> None:
    cells = dict(_inputs(demo_heat).cells, C="45")
    draft = build_heat(demo_heat, _inputs(demo_heat, cells=cells), demo_book)
    assert draft.errors == {cell_key("C"): "C 45 %: a steel bath holds at most 5 %; 0.45?"}
    tonnes = build_heat(demo_heat, _inputs(demo_heat, bath_text="60", capacity_text=""), demo_book)
    assert tonnes.errors == {BATH: "bath_kg 60: below the shop's 5,000 kg; tonnes?"}


def test_ticket_holds_additions_chemistry_and_cautions(demo_book, demo_heat, tmp_path) -> None:
    plan = Planner(demo_book).plan(demo_heat)
    when = datetime(2026, 3, 4, 5, 6)
    text = ticket_text(demo_heat, plan, demo_book, when)
    assert f"Heat {demo_heat.heat_id}" in text and "2026-03-04 05:06" in text
    for addition in plan.additions:
        assert addition.material in text and kg_text(addition.kg) in text
    for symbol in demo_book.grade(plan.grade).elements:
        assert any(line.strip().startswith(symbol + " ") for line in text.splitlines())
    flat = " ".join(text.split())
    for caution in plan.cautions:
        assert " ".join(caution.split()) in flat
    assert all(len(line) <= 72 for line in text.splitlines() if not any(a.material in line for a in plan.additions))
    first = write_ticket(tmp_path, demo_heat, plan, demo_book, when)
    second = write_ticket(tmp_path, demo_heat, plan, demo_book, when)
    assert first.name == f"{demo_heat.heat_id}-ticket.txt" and second.name == f"{demo_heat.heat_id}-ticket-2.txt"
    assert first.read_text(encoding="utf-8") == text  # the first ticket is never overwritten


def test_closest_plan_ticket_says_so(demo_book, demo_heat) -> None:
    heat = demo_heat.with_changes(capacity_kg=demo_heat.bath_kg + 500,
                                  analysis=type(demo_heat.analysis)({**demo_heat.analysis.pct, "Cu": 0.45}))
    plan = Planner(demo_book).plan(heat)
    text = ticket_text(heat, plan, demo_book, datetime(2026, 1, 1))
    assert "CLOSEST PLAN" in text and "OUT OF REACH" in text and "Cu max" in text


def test_solver_writes_nothing_to_the_terminal() -> None:
    """HiGHS writes below Python's sys.stdout; a single line would corrupt the running screen
    (seen with HiGHS 1.12). Optimal, whole-pack and closest plans, at the file-descriptor level."""
    code = textwrap.dedent("""
        from meltfix.shop.analysis import Analysis
        from meltfix.commands.screen import first_demo_heat
        from meltfix.shop.heat import load_heat
        from meltfix.plan.planner import Planner
        from meltfix.plan.result import PlanOptions
        from meltfix.shop.recipes import load_recipes
        book = load_recipes()
        heat = load_heat(first_demo_heat(), book)
        planner = Planner(book)
        planner.plan(heat)
        planner.plan(heat, PlanOptions(continuous=True))
        planner.plan(heat.with_changes(capacity_kg=heat.bath_kg + 500,
                                       analysis=Analysis({**heat.analysis.pct, "Cu": 0.45})))
    """)
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert done.stdout == "" and done.stderr == ""


def test_gauge_marks_now_after_and_aim_in_order() -> None:
    from meltfix.tui.widgets.gauge import GaugeRow, gauge_line

    # Mn 0.75-1.00 %, aim 0.88; bath at 0.80, plan takes it to 0.95: ○ before ┿ before ●.
    line = gauge_line(GaugeRow("Mn", 0.75, 1.00, 0.88, 0.80, 0.95), 30).plain
    rail = line[line.index("0.75 ") + 5:]  # limits with their standard's two decimals
    assert rail.index("○") < rail.index("┿") < rail.index("●")
    assert "0.800 → 0.950" in line and line.rstrip().endswith("1.00")
    # Far below the window now: the now marker waits at the rail's left end as an arrow.
    low = gauge_line(GaugeRow("C", 0.38, 0.43, None, 0.10, 0.40), 20, labels=False).plain
    assert "◀" in low and "●" in low and low.index("◀") < low.index("●")
