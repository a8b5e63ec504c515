"""The replay screen driven with Textual's pilot: walking a heat, and one training answer."""

from __future__ import annotations

import io

from rich.console import Console
from textual.app import App
from textual.geometry import Region
from textual.widget import Widget
from textual.widgets import Input, Static

from meltfix.base.paths import demo_dir
from meltfix.records.heat_record import load_record
from meltfix.shop.recipes import load_recipes
from meltfix.tui.screens.replay import ReplayScreen


class _Host(App[None]):
    def __init__(self, screen: ReplayScreen) -> None:
        super().__init__()
        self.replay_screen = screen

    def on_mount(self) -> None:
        self.push_screen(self.replay_screen)


def _text(screen: ReplayScreen, selector: str) -> str:
    """What a Static of the screen shows, as plain text."""
    console = Console(record=True, width=140, file=io.StringIO())
    console.print(screen.query_one(selector, Static).content)
    return console.export_text()


def _shown(widget: Widget) -> str:
    """What a widget paints, line by line, at its size on screen."""
    lines = widget.render_lines(Region(0, 0, widget.size.width, widget.size.height))
    return "\n".join(strip.text.rstrip() for strip in lines)


def _title(screen: ReplayScreen) -> str:
    return _text(screen, "#replay-title")


async def test_walks_a_recorded_heat_sample_by_sample() -> None:
    book = load_recipes()
    screen = ReplayScreen(load_record(demo_dir() / "records" / "KB-24211.toml", book), book)
    app = _Host(screen)
    async with app.run_test(size=(140, 50)) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert "sample S1 (1 of 4)" in _title(screen)
        assert screen.check_action("step", (-1,)) is None  # greyed: nothing before the first sample
        await pilot.press("n", "n", "n")
        assert "sample S4 (4 of 4)" in _title(screen)
        assert screen.check_action("step", (1,)) is None
        await pilot.press("p")
        assert "sample S3 (3 of 4)" in _title(screen)


async def test_training_hides_the_plan_until_the_trainee_answers_then_scores() -> None:
    book = load_recipes()
    screen = ReplayScreen(load_record(demo_dir() / "records" / "KB-24215.toml", book), book)
    app = _Host(screen)
    async with app.run_test(size=(140, 50)) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        await pilot.press("ctrl+t")
        assert not screen.revealed and "TRAINING" in _title(screen)
        assert "hidden until you enter your additions" in _text(screen, "#replay-plan")
        assert screen.focused is screen.query_one("#replay-entry", Input)
        # The additions the melt shop actually made on this clean heat: in spec by the mass balance.
        screen.query_one("#replay-entry", Input).value = "hc fecr 140; simn 100; femo 25; FeSi 75 10"
        await pilot.press("enter")
        await app.workers.wait_for_complete()
        await pilot.pause()
        score = screen.scores[0]
        assert screen.revealed and score.in_spec and 0 < score.points <= 100
        assert "points" in _text(screen, "#replay-score")
        assert "SiMn" in _text(screen, "#replay-plan")  # the plan is shown once answered


async def test_usable_at_80_by_24_and_side_by_side_when_wide() -> None:
    book = load_recipes()
    record = load_record(demo_dir() / "records" / "KB-24211.toml", book)
    screen = ReplayScreen(record, book)
    app = _Host(screen)
    async with app.run_test(size=(80, 24)) as pilot:
        await app.workers.wait_for_complete()
        await pilot.pause()
        await pilot.press("n", "n")  # the third sample, outside the grade
        chemistry, plan, actual = (screen.query_one(f"#replay-{part}") for part in ("chemistry", "plan", "actual"))
        assert screen.has_class("-narrow")
        # The chemistry across the screen; the plan beside the actual additions under it, each wide
        # enough for a material's name and its figures, nothing cut off at the right.
        assert plan.region.y > chemistry.region.y and plan.region.y == actual.region.y
        assert min(plan.region.width, actual.region.width) >= 35 and actual.region.right <= 80
        plan_text = _shown(plan)
        third = screen.steps[2].plan
        assert third is not None
        for addition in third.additions:
            assert all(word in plan_text for word in addition.material.split())
        await pilot.press("n")  # the last sample: the longest path chart, four values per element
        # In spec, Si at its minimum: the plan to the target odds shows, as `meltfix solve` makes it.
        fourth = screen.steps[3].plan
        assert fourth is not None and fourth.additions and "Plan meltfix makes" in _shown(plan)
        chart = _shown(screen.query_one("#replay-chart"))
        assert "…" not in chart and all(f"{low:.2f}–{high:.2f}" in chart for low, high in
                                        (book.grade(record.grade).window_pct[s] for s in ("C", "Mn", "Mo")))
        body = screen.query_one("#replay-body")
        assert screen.focused is body and body.max_scroll_y > 0  # the rest is a scroll away, by keyboard

        await pilot.resize_terminal(140, 40)
        await pilot.pause()
        assert screen.has_class("-wide")
        assert plan.region.x >= chemistry.region.right and plan.region.y == chemistry.region.y
        assert actual.region.y > plan.region.y
