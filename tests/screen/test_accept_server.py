"""A station on a shared PostgreSQL logbook that loses the server keeps its plan and accepts again."""

from __future__ import annotations

from meltfix.records.logbook import Logbook, logbook_location
from meltfix.tui.app import make_app
from meltfix.tui.screens.trim import TrimScreen


async def test_a_lost_server_is_one_line_and_the_plan_stays_for_the_next_accept(demo_book, demo_heat, tmp_path,
                                                                                settle, postgres,
                                                                                postgres_url) -> None:
    url = logbook_location(postgres_url)
    app = make_app(demo_book, demo_heat, logbook_path=url, tickets_dir=tmp_path)
    async with app.run_test(size=(100, 32)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, TrimScreen) and screen.current is not None
        on_screen = screen.current
        postgres.stop()
        try:
            await pilot.press("f6")
            await settle(pilot)
            (note,) = [n for n in app._notifications if n.title == "Not recorded"]
            assert "cannot connect to the logbook server" in note.message and "\n" not in note.message
            assert postgres.password not in note.message
            assert screen.accepted is None and screen.current == on_screen  # the plan is still there
        finally:
            assert postgres.start().returncode == 0
        await pilot.press("f6")  # the server is back: the same plan is accepted
        await settle(pilot)
        assert screen.accepted is not None and screen.accepted[1] == on_screen[1]
    with Logbook(url, create=False) as logbook:
        history = logbook.heat_history(demo_heat.heat_id)
    assert [s.sample_id for s in history.samples] == ["S1"] and len(history.plans) == 1
