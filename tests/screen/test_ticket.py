"""The crew's ticket: everything a crew needs on one sheet, the additions in the shop's order with
their lots, every element the plan moves, the temperature, the cautions and a signature line; written
to the shop's ticket folder and sent to a printer command where the machine has one."""

from __future__ import annotations

import sys
from datetime import datetime
from pathlib import Path

from meltfix.plan.planner import plan_heat
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes
from meltfix.tui.ticket import print_ticket, ticket_text, write_ticket

DEMO = Path(__file__).resolve().parents[2] / "demo" / "heats"


def test_ticket_carries_what_the_crew_needs() -> None:
    book = load_recipes()
    heat = load_heat(DEMO / "KB-24103.toml", book)
    plan = plan_heat(heat, book)
    text = ticket_text(heat, plan, book, datetime(2026, 3, 14, 10, 5), sample="L2", plan_number=17, odds=0.962)
    assert "Heat KB-24103   sample L2   plan #17" in text
    assert "stage lf   written 2026-03-14 10:05" in text
    assert "ADD, IN THIS ORDER" in text and " 1 Aluminium shot" in text
    assert "m of wire" in text  # the aluminium wire in metres
    assert "Odds of landing inside every window: 96 %" in text
    assert f"-> about {plan.temperature_after_c:.0f} °C after\n  liquidus about {plan.liquidus_c:.0f} °C" in text
    assert "SIGNATURE" in text and "local codes" in text
    assert all(len(line) <= 72 for line in text.splitlines())


def test_ticket_goes_to_the_folder_and_the_printer(tmp_path: Path) -> None:
    book = load_recipes()
    heat = load_heat(DEMO / "KB-24101.toml", book)
    plan = plan_heat(heat, book)
    path = write_ticket(tmp_path / "tickets", heat, plan, book, datetime(2026, 3, 14, 10, 5), sample="L1")
    text = path.read_text(encoding="utf-8")
    assert path.parent == tmp_path / "tickets" and "sample L1" in text
    # Every element the plan moves is listed: SAE 1045 sets no Si limit, yet the SiMn raises it.
    (si,) = [line for line in text.splitlines() if line.startswith("  Si ")]
    assert si.endswith("no limit")
    # A stand-in printer: a Python one-liner that copies the ticket where the test can see it.
    copy = tmp_path / "printed.txt"
    command = f"{sys.executable} -c \"import shutil,sys; shutil.copy(sys.argv[1], r'{copy}')\""
    assert print_ticket(path, command).startswith("sent to the printer")
    assert copy.read_text(encoding="utf-8") == path.read_text(encoding="utf-8")
    assert print_ticket(path, "no-such-printer-command -d pulpit") == (
        "not printed: no printer command 'no-such-printer-command' on this machine")
