"""The crew's ticket: everything a crew needs on one sheet, the additions in the shop's order with
their lots, every element the plan moves, the temperature, the cautions and a signature line; written
to the shop's ticket folder and sent to a printer command where the machine has one."""

from __future__ import annotations

import sys
from dataclasses import replace
from datetime import datetime
from pathlib import Path

from meltfix.plan.planner import plan_heat
from meltfix.plan.risk import RiskPlanner
from meltfix.present.render import odds_lines
from meltfix.records.logbook import Logbook
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes
from meltfix.tui.app import make_app
from meltfix.tui.screens.trim import TrimScreen
from meltfix.tui.ticket import print_ticket, ticket_text, write_ticket

DEMO = Path(__file__).resolve().parents[2] / "demo" / "heats"


def test_ticket_carries_what_the_crew_needs() -> None:
    book = load_recipes()
    heat = load_heat(DEMO / "KB-24103.toml", book)
    risk = RiskPlanner(book).plan(heat, draws=400, seed=3)
    plan = risk.plan
    text = ticket_text(heat, plan, book, datetime(2026, 3, 14, 10, 5), sample="L2", plan_number=17, risk=risk)
    assert "Heat KB-24103   sample L2   plan #17" in text
    assert "stage lf   written 2026-03-14 10:05" in text
    assert "ADD, IN THIS ORDER" in text
    # The shop's order of classes: the aluminium wire goes last.
    numbered = [line for line in text.split("ADD, IN THIS ORDER")[1].split("  total")[0].splitlines()
                if line[:2].strip().isdigit()]
    assert numbered[-1].split()[1:3] == ["Aluminium", "wire"]
    assert "m of wire" in text  # the aluminium wire in metres
    # The odds as `meltfix solve` prints them: the heat's, the target, the weakest limits, the
    # expected total cost (additions + (1 - odds) x the correction cost).
    flat = " ".join(text.split())
    assert f"In-spec odds {100 * risk.odds.heat:.1f} %" in flat and f"target {100 * risk.target:g} %" in flat
    assert all(" ".join(line.split()) in flat for line in odds_lines(risk.odds, risk))
    if any(p < 1.0 for p in risk.odds.limits.values()):
        assert "weakest: " in flat
    assert f"Expected total cost {plan.total_cost + (1 - risk.odds.heat) * risk.correction_cost:,.2f}" in flat
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


async def test_f7_records_the_plan_and_prints_its_number_and_odds(demo_book, demo_heat, tmp_path, settle) -> None:
    logbook_path = tmp_path / "logbook.sqlite"
    app = make_app(demo_book, demo_heat, logbook_path=logbook_path, tickets_dir=tmp_path / "tickets")
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, TrimScreen) and screen.accepted is None and screen.current_risk is not None
        await pilot.press("f7")  # not accepted yet: the ticket records the plan first
        await settle(pilot)
        await pilot.press("f7")  # a second ticket of the same plan keeps its number
        await settle(pilot)
        assert screen.accepted is not None
        number, _, sample, risk = *screen.accepted, screen.current_risk
    with Logbook(logbook_path, create=False) as logbook:
        history = logbook.heat_history(demo_heat.heat_id)
        assert [p.plan_id for p in history.plans] == [number]
        assert [s.sample_id for s in history.samples] == [sample]
    tickets = sorted((tmp_path / "tickets").glob("*.txt"))
    assert len(tickets) == 2
    for ticket in tickets:
        text = ticket.read_text(encoding="utf-8")
        assert f"plan #{number}" in text and "not accepted yet" not in text
        assert f"sample {sample}   plan #{number}" in text  # the sample the logbook recorded, as the toast says
        assert f"In-spec odds {100 * risk.odds.heat:.1f} %" in text and f"target {100 * risk.target:g} %" in text


def test_tickets_go_to_the_shops_folder_never_where_the_program_was_started(demo_book, demo_heat, tmp_path,
                                                                             monkeypatch) -> None:
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    monkeypatch.chdir(tmp_path)
    assert make_app(demo_book, demo_heat).tickets_dir == tmp_path / "data" / "meltfix" / "tickets"
    shop = replace(demo_book, settings=replace(demo_book.settings, ticket_dir=str(tmp_path / "crew")))
    assert make_app(shop, demo_heat).tickets_dir == tmp_path / "crew"
