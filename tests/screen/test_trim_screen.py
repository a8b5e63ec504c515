"""The trim screen driven from the keyboard with Textual's pilot.

The plan on screen is checked against meltfix.plan.planner run directly on the same typed inputs:
the screen must show exactly the core's answer, never an older one.
"""

from __future__ import annotations

from pathlib import Path

from textual.geometry import Region
from textual.widget import Widget
from textual.widgets import Input, Static

from meltfix.plan.numbers import kg_text
from meltfix.plan.planner import Planner
from meltfix.plan.risk import RiskPlanner
from meltfix.shop.analysis import parse_reading
from meltfix.shop.heat import Heat
from meltfix.tui.app import make_app
from meltfix.tui.palette import ScreenActions
from meltfix.tui.screens.trim import TrimScreen
from meltfix.tui.widgets.plan_view import PlanView


def _shown(widget: Widget) -> str:
    """The text a widget paints, line by line, as the terminal would show it."""
    lines = widget.render_lines(Region(0, 0, widget.size.width, widget.size.height))
    return "\n".join(strip.text.rstrip() for strip in lines)


async def test_typed_analysis_gives_the_core_planners_plan(demo_book, demo_heat, tmp_path, settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, TrimScreen)
        cell = screen.query_one("#cell-Mn", Input)
        cell.focus()
        await pilot.press("ctrl+u", *"0,71")  # decimal comma, typed key by key
        await settle(pilot)
        view = screen.query_one(PlanView)
        typed = parse_reading("0,71", "test", "Mn").pct
        expected = RiskPlanner(demo_book).plan(demo_heat.with_changes(
            analysis=type(demo_heat.analysis)({**demo_heat.analysis.pct, "Mn": typed},
                                              demo_heat.analysis.below_limit))).plan  # to the shop's target odds
        assert view.is_current
        assert view.plan is not None and view.plan.to_json() == expected.to_json()
        assert "current" in _shown(screen.query_one("#plan-status", Static))
        shown = _shown(screen.query_one("#plan-additions"))
        for addition in expected.additions:
            assert addition.material in shown and kg_text(addition.kg) in shown


async def test_invalid_cell_shows_its_reason_and_the_plan_goes_stale(demo_book, demo_heat, tmp_path, settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        view = screen.query_one(PlanView)
        screen.query_one("#cell-Si", Input).focus()
        await pilot.press("ctrl+u", "0", ",", "2")
        await settle(pilot)
        before = view.plan
        assert view.is_current and screen.check_action("accept", ()) is True
        await pilot.press("w")  # a slip of the finger
        await settle(pilot)
        cell = screen.query_one("#cell-Si", Input)
        assert cell.value == "0,2w" and cell.has_class("-bad")  # kept as typed, marked in place
        reason = screen.query_one("#row-Si .reason", Static)
        assert reason.display and "'0,2w' is not a number" in _shown(reason)
        assert not view.is_current and view.plan is before and view.has_class("-stale")
        assert "earlier inputs" in _shown(screen.query_one("#plan-status", Static))
        assert screen.check_action("accept", ()) is None and screen.check_action("ticket", ()) is None
        await pilot.press("backspace")
        await settle(pilot)
        assert view.is_current and not cell.has_class("-bad") and not reason.display


async def test_unreachable_grade_shows_each_reason(demo_book, demo_heat, tmp_path, settle) -> None:
    # Copper is a residual that refining cannot remove; 0.45 % against a 0.30 % maximum needs far
    # more clean scrap than the 500 kg of free vessel capacity allows.
    heat = demo_heat.with_changes(capacity_kg=demo_heat.bath_kg + 500,
                                  analysis=type(demo_heat.analysis)({**demo_heat.analysis.pct, "Cu": 0.45}))
    expected = Planner(demo_book).plan(heat)
    assert expected.status == "closest" and expected.violations
    app = make_app(demo_book, heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 40)) as pilot:
        await settle(pilot)
        screen = app.screen
        out = screen.query_one("#plan-out-of-reach", Static)
        assert out.display
        text = " ".join(_shown(out).split())
        for violation in expected.violations:
            assert " ".join(violation.reason.split()) in text
        assert "closest plan" in _shown(screen.query_one("#plan-status", Static))


async def test_everything_reachable_at_80_by_24(demo_book, demo_heat, tmp_path, settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        assert app.screen.has_class("-tall") and not app.screen.has_class("-short")
        await pilot.resize_terminal(80, 24)
        await settle(pilot)
        screen = app.screen
        assert screen.has_class("-short") and not screen.has_class("-tall")  # the layout for a short terminal
        wanted = {"grade", "bath", "capacity", "stage", "plan-body", "plan-cautions"}
        wanted |= {f"cell-{symbol}" for symbol in demo_heat.analysis.pct}
        reached: set[str] = set()
        for _ in range(len(wanted) + 4):  # Tab walks every field once around
            await pilot.press("tab")
            focused = screen.focused
            assert focused is not None
            reached.add(focused.id or "")
            # what has focus is scrolled into view, inside the 80x24 screen
            region = focused.region
            assert region.width > 0 and region.height > 0
            assert 0 <= region.y < 24 and region.right <= 80
        assert wanted <= reached
        cautions = screen.query_one("#plan-cautions")  # always in view while the plan adds anything
        assert cautions.region.height >= 3 and cautions.region.bottom <= 23


async def test_every_action_is_in_the_palette_and_greyed_when_it_cannot_run(demo_book, demo_heat, tmp_path,
                                                                            settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        described = {b.description for b in [*screen.BINDINGS, *type(app).BINDINGS]
                     if getattr(b, "description", "") and not getattr(b, "system", False)}
        names = {name for name, _, _ in ScreenActions(screen)._commands()}
        assert names == described - {"Added"}  # nothing accepted yet: recording what went in is greyed
        assert "Light/dark" in names  # the app's own keys, the same on every screen
        await pilot.press("f7")  # the ticket for the crew
        written = list(tmp_path.glob("*-ticket.txt"))
        assert [p.name for p in written] == [f"{demo_heat.heat_id}-ticket.txt"]
        await pilot.press("f1")
        keys_text = " ".join(_shown(app.screen.query_one("#keys-body Static")).split())
        for binding in [*screen.BINDINGS, *type(app).BINDINGS]:
            if binding.description and binding.tooltip:
                assert binding.tooltip in keys_text
        # One spelling of every key: no caret for Ctrl, no lower-case "esc" or "space".
        assert "Ctrl+L" in keys_text and "Esc" in keys_text and "^" not in keys_text


def test_main_screen_snapshot(demo_book, demo_heat, demo_heat_path, snap_compare, settle) -> None:
    app = make_app(demo_book, demo_heat, heat_path=demo_heat_path, tickets_dir=Path("."))

    async def ready(pilot) -> None:
        await settle(pilot)
        for cell in app.screen.query(Input):  # a blinking cursor would make the picture depend on the clock
            cell.cursor_blink = False
        await pilot.pause()

    assert snap_compare(app, terminal_size=(100, 32), run_before=ready)


def test_screen_inputs_build_the_same_heat_as_the_file(demo_book, demo_heat: Heat) -> None:
    """The grid's texts for a heat read back as the same analysis (ppm cells included)."""
    from meltfix.plan.numbers import cell_text
    from meltfix.tui.draft import HeatInputs, build_heat

    cells = {s: cell_text(s, pct, s in demo_heat.analysis.below_limit) for s, pct in demo_heat.analysis.pct.items()}
    draft = build_heat(demo_heat, HeatInputs(demo_heat.grade, f"{demo_heat.bath_kg:g}", f"{demo_heat.capacity_kg:g}",
                                             demo_heat.stage, cells), demo_book)
    assert draft.errors == {}
    assert draft.heat is not None
    for symbol, pct in demo_heat.analysis.pct.items():
        assert abs(draft.heat.analysis.pct[symbol] - pct) <= 1e-12 * max(1.0, pct)


async def test_materials_switched_off_and_locked_for_this_heat(demo_book, demo_heat, tmp_path, settle) -> None:
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        first, second = demo_book.materials[0].name, demo_book.materials[1].name
        await pilot.press("f5", "space", "down", "l", *"40", "enter", "escape")  # first off, second locked at 40 kg
        await settle(pilot)
        view = app.screen.query_one(PlanView)
        heat = demo_heat.with_changes(switched_off=frozenset({first}), locked_kg={second: 40.0})
        expected = RiskPlanner(demo_book).plan(heat).plan
        assert view.is_current and view.plan.to_json() == expected.to_json()
        kg = {a.material: a.kg for a in view.plan.additions}
        assert first not in kg and kg[second] == 40.0


async def test_the_temperature_field_feeds_the_sample_temperature_into_the_plan(demo_book, demo_heat, tmp_path,
                                                                                settle) -> None:
    expected = RiskPlanner(demo_book).plan(demo_heat.with_changes(temperature_c=1580.0)).plan
    app = make_app(demo_book, demo_heat, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        field, view = app.screen.query_one("#temperature", Input), app.screen.query_one(PlanView)
        assert field.value == ("" if demo_heat.temperature_c is None else f"{demo_heat.temperature_c:g}")
        field.focus()
        await pilot.press("ctrl+u", *"1580")
        await settle(pilot)
        assert view.is_current and view.plan is not None
        assert view.plan.temperature_after_c == expected.temperature_after_c
        assert view.plan.to_json() == expected.to_json()
        assert "1580 °C" in _shown(app.screen.query_one("#banner", Static))  # the banner follows the field
        await pilot.press("ctrl+u", *"hot")  # not a number: said in place, the plan goes stale
        await settle(pilot)
        assert field.has_class("-bad") and not view.is_current
        assert app.screen.query_one("#reason-temperature").display
        await pilot.press("ctrl+u")  # no reading: planned without a temperature
        await settle(pilot)
        assert view.is_current and view.plan is not None and view.plan.temperature_after_c is None
