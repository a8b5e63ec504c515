"""Accepting a plan on the trim screen records the sample it answers, so the heat can be replayed."""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path

from textual.widgets import Input

from meltfix.base.paths import demo_dir
from meltfix.plan.planner import Planner
from meltfix.readers.spectro import read_export
from meltfix.records.heat_record import record_from_history
from meltfix.records.logbook import Logbook
from meltfix.records.replay import replay
from meltfix.tui.accept import record_accepted
from meltfix.tui.app import make_app
from meltfix.tui.screens.trim import TrimScreen


async def test_accepted_heat_replays_from_the_logbook(demo_book, demo_heat, tmp_path, settle) -> None:
    logbook_path = tmp_path / "logbook.sqlite"
    app = make_app(demo_book, demo_heat, logbook_path=logbook_path, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        await pilot.press("f6", "f6")  # accepted twice for unchanged inputs: one sample, two plans
        await settle(pilot)
        assert isinstance(app.screen, TrimScreen) and app.screen.accepted is not None

    with Logbook(logbook_path, create=False) as logbook:
        history = logbook.heat_history(demo_heat.heat_id)
    assert [s.sample_id for s in history.samples] == ["S1"]
    assert len(history.plans) == 2
    sample = history.samples[0]
    assert dict(sample.analysis.pct) == dict(demo_heat.analysis.pct)
    assert sample.temperature_c == demo_heat.temperature_c and sample.taken_at <= history.plans[0].made_at

    record = record_from_history(history, demo_book)
    assert record.heat_id == demo_heat.heat_id and record.bath_kg == demo_heat.bath_kg
    steps = replay(record, demo_book)
    assert len(steps) == 1 and steps[0].plan is not None
    # The replay plans the recorded sample afresh with the planner's defaults, as the screen did.
    assert [(a.material, a.kg) for a in steps[0].plan.additions] == [
        (line.material, line.kg) for line in history.plans[0].lines]


async def test_spectrometer_sample_is_recorded_with_its_burns(demo_book, demo_heat, tmp_path, settle) -> None:
    export = demo_dir() / "spectro" / "KB-24119_lf.csv"  # two samples of a SAE 1045 heat, as the demo heat
    last = read_export(export, settings=demo_book.settings).samples[-1]
    logbook_path = tmp_path / "logbook.sqlite"
    app = make_app(demo_book, demo_heat, logbook_path=logbook_path, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        await pilot.press("f4")
        app.screen.query_one("#open-path", Input).value = str(export)
        await pilot.press("enter")  # the file
        await pilot.press("enter")  # "Which sample?" offers the last one first
        await settle(pilot)
        await pilot.press("f6")
        await settle(pilot)
        with Logbook(logbook_path, create=False) as logbook:
            history = logbook.heat_history(demo_heat.heat_id)
        (sample,) = history.samples
        assert sample.sample_id == last.sample_id
        assert dict(sample.analysis.pct) == dict(last.analysis.pct)  # the mean of the burns, not the rounded cells
        assert len(sample.burns) == len(last.burns) and sample.flags == last.flags
        assert record_from_history(history, demo_book).samples[0].sample_id == last.sample_id

        app.screen.query_one("#cell-Mn", Input).value = "0.70"  # typed over: no longer the spectrometer's sample
        await settle(pilot)
        await pilot.press("f6")
        await settle(pilot)
        with Logbook(logbook_path, create=False) as logbook:
            typed = logbook.heat_history(demo_heat.heat_id).samples[-1]
        assert typed.sample_id == "S2" and typed.burns == () and typed.analysis.pct["Mn"] == 0.70


def test_a_sample_is_recorded_once_and_never_under_a_taken_id(demo_book, demo_heat, tmp_path: Path) -> None:
    sample = read_export(demo_dir() / "spectro" / "KB-24119_lf.csv", settings=demo_book.settings).samples[0]
    heat = demo_heat.with_changes(analysis=sample.analysis)
    plan = Planner(demo_book).plan(heat)
    with Logbook(tmp_path / "logbook.sqlite", book=demo_book) as logbook:
        first = record_accepted(logbook, heat, plan, sample)
        again = record_accepted(logbook, heat, plan, sample)
        typed = demo_heat.with_changes(analysis=type(sample.analysis)({**sample.analysis.pct, "Mn": 0.70}))
        other = record_accepted(logbook, typed, Planner(demo_book).plan(typed))
        # A later export that numbers its sample as an earlier one did: kept apart, not refused.
        renumbered = replace(sample, analysis=type(sample.analysis)({**sample.analysis.pct, "Mn": 0.75}))
        later = demo_heat.with_changes(analysis=renumbered.analysis)
        clash = record_accepted(logbook, later, Planner(demo_book).plan(later), renumbered)
        history = logbook.heat_history(demo_heat.heat_id)
    assert (first.sample_id, first.sample_is_new) == (sample.sample_id, True)
    assert (again.sample_id, again.sample_is_new) == (sample.sample_id, False)
    assert (other.sample_id, other.sample_is_new) == ("S2", True)
    assert (clash.sample_id, clash.sample_is_new) == (f"{sample.sample_id}-2", True)
    assert [s.sample_id for s in history.samples] == [sample.sample_id, other.sample_id, clash.sample_id]
    assert len(history.plans) == 4
