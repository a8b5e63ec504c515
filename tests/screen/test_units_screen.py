"""A US shop (shop.toml `units = "us"`) on the screen with the pilot: fields typed and shown in lb and
°F, plan, materials, logbook and replay in lb, short tons and °F, while the heat planned stays SI."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from textual.widgets import DataTable, Input

from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes
from meltfix.tui.app import make_app
from meltfix.tui.screens.trim import TrimScreen
from meltfix.tui.widgets.plan_view import PlanView

ROOT = Path(__file__).resolve().parents[2]
# NIST SP 811 Appendix B.8 and B.9: 1 lb = 0.45359237 kg exactly; °F = 1.8 °C + 32.
KG_PER_LB = 0.45359237


@pytest.fixture()
def us_book(tmp_path: Path):
    folder = tmp_path / "recipes"
    shutil.copytree(ROOT / "recipes", folder)
    shop = folder / "shop.toml"
    shop.write_text('units = "us"\n' + shop.read_text(encoding="utf-8"), encoding="utf-8")
    return load_recipes(folder)


def _texts(screen, selector) -> str:
    return " ".join(str(widget.render()) for widget in screen.query(selector))


async def test_a_us_shop_types_and_reads_pounds_and_fahrenheit(us_book, demo_heat_path, tmp_path, settle) -> None:
    heat = load_heat(demo_heat_path, us_book)
    app = make_app(us_book, heat, logbook_path=tmp_path / "log.sqlite", tickets_dir=tmp_path)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, TrimScreen)
        labels = _texts(screen, ".form-row")  # each field's row draws its own label
        assert "Bath lb" in labels and "Vessel lb" in labels and "Temp °F" in labels
        assert screen.query_one("#bath", Input).value == f"{heat.bath_kg / KG_PER_LB:g}"
        # The heat as shown plans as the file says: not 80,000 kg read back from a rounded lb figure.
        assert screen.current is not None and screen.current[0].bath_kg == heat.bath_kg
        if heat.temperature_c is not None:
            assert screen.query_one("#temperature", Input).value == f"{heat.temperature_c * 1.8 + 32:g}"
            assert f"{heat.temperature_c * 1.8 + 32:.0f} °F" in _texts(screen, "#banner")
        totals = _texts(screen.query_one(PlanView), "#plan-totals")
        assert "EUR/short ton" in totals and " lb → " in totals and "°F" in totals and "kg" not in totals
        cautions = _texts(screen.query_one(PlanView), "#plan-cautions-text")
        assert "°C" not in cautions

        # Typed in the shop's units, planned in SI: 130,000 lb = 58,967.0081 kg; 2,900 °F = 1,593.3 °C.
        screen.query_one("#bath", Input).value = "130000"
        screen.query_one("#temperature", Input).value = "2900"
        await settle(pilot)
        assert screen.current is not None, (screen.plannable, _texts(screen, "#plan-status"), _texts(screen, ".reason"))
        planned = screen.current[0]
        assert planned.bath_kg == pytest.approx(130_000 * KG_PER_LB, rel=1e-12)
        assert planned.temperature_c == pytest.approx((2900 - 32) / 1.8, rel=1e-12)

        # Prices per lb and stock in lb in the materials dialog: 2.70 EUR/kg is 1.22 EUR/lb.
        await pilot.press("f5")
        await settle(pilot)
        table = app.screen.query_one(DataTable)
        headers = [str(column.label) for column in table.columns.values()]
        assert "EUR/lb" in headers and "stock lb" in headers
        shot = us_book.material("Aluminium shot")
        price = str(table.get_cell(shot.name, "price")).strip(" *")
        assert float(price) == pytest.approx(shot.price_per_kg * KG_PER_LB, abs=0.005)


async def test_the_replay_screen_of_a_us_shop_reads_pounds_and_fahrenheit(us_book) -> None:
    import io

    from rich.console import Console
    from textual.app import App
    from textual.widgets import Static

    from meltfix.base.paths import demo_dir
    from meltfix.records.heat_record import load_record
    from meltfix.tui.screens.replay import ReplayScreen

    record = load_record(demo_dir() / "records" / "KB-24211.toml", us_book)
    screen = ReplayScreen(record, us_book)

    class Host(App[None]):
        def on_mount(self) -> None:
            self.push_screen(screen)

    def shown(selector: str) -> str:
        console = Console(record=True, width=140, file=io.StringIO())
        console.print(screen.query_one(selector, Static).content)
        return " ".join(console.export_text().replace("│", " ").split())

    async with Host().run_test(size=(140, 50)) as pilot:
        await pilot.app.workers.wait_for_complete()
        await pilot.pause()
        title = shown("#replay-title")
        assert f"bath {record.bath_kg / KG_PER_LB:,.0f} lb" in title
        first = record.samples[0]
        if first.temperature_c is not None:
            assert f"{first.temperature_c * 1.8 + 32:.0f} °F" in title
        assert " lb " in f" {shown('#replay-actual')} " and " kg " not in f" {shown('#replay-actual')} "


async def test_the_logbook_screen_of_a_us_shop_counts_short_tons(us_book, demo_heat_path, one_day_logbook,
                                                               settle) -> None:
    from meltfix.tui.screens.logbook import LogbookScreen

    app = make_app(us_book, load_heat(demo_heat_path, us_book), logbook_path=one_day_logbook)
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(pilot)
        await pilot.press("f10")
        await settle(pilot)
        screen = app.screen
        assert isinstance(screen, LogbookScreen)
        table = screen.query_one("#logbook-heats", DataTable)
        headers = [str(column.label) for column in table.columns.values()]
        assert "Bath short ton" in headers and "per short ton" in headers
        assert "EUR/short ton" in _texts(screen, "#logbook-totals")
        # The first heat's bath in short tons: kg / 907.18474 (NIST SP 811 Appendix B.8).
        heat = screen.heats[0]
        if heat.bath_kg is not None:
            assert str(table.get_row_at(0)[2]) == f"{heat.bath_kg / (2000 * KG_PER_LB):,.1f}"
