"""shop.toml `units`: `meltfix solve`'s tables and the crew ticket in US units, the JSON in SI, and
a bad value as one line naming shop.toml and the key."""

from __future__ import annotations

import shutil
from datetime import datetime
from pathlib import Path

import pytest

from meltfix.cli import main
from meltfix.plan.planner import Planner
from meltfix.shop.heat import load_heat
from meltfix.shop.recipes import load_recipes
from meltfix.tui.ticket import ticket_text

ROOT = Path(__file__).resolve().parents[2]
HEAT = ROOT / "demo" / "heats" / "KB-24101.toml"
KG_PER_LB = 0.45359237  # NIST SP 811 Appendix B.8, exact


def book_in(tmp_path: Path, units_line: str) -> Path:
    folder = tmp_path / "recipes"
    shutil.copytree(ROOT / "recipes", folder)
    shop = folder / "shop.toml"
    shop.write_text(units_line + "\n" + shop.read_text(encoding="utf-8"), encoding="utf-8")
    return folder


def solve(capsys: pytest.CaptureFixture[str], recipes: Path, *extra: str) -> tuple[int, str, str]:
    status = main(["solve", str(HEAT), "--recipes", str(recipes), "--draws", "200", *extra])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def test_us_tables_show_pounds_short_tons_and_fahrenheit_json_stays_si(
        capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    metric = book_in(tmp_path / "m", 'units = "metric"')
    us = book_in(tmp_path / "u", 'units = "us"')
    book = load_recipes(metric)
    bath_kg = load_heat(HEAT, book).bath_kg
    _, metric_out, _ = solve(capsys, metric)
    status, us_out, err = solve(capsys, us)
    assert status in (0, 4) and err == ""
    flat = " ".join(us_out.replace("│", " ").split())
    assert f"bath {bath_kg / KG_PER_LB:,.0f} →" in flat and " lb · " in flat
    assert "/short ton" in flat and "°F" in flat
    assert f"bath {bath_kg:,.0f} →" in " ".join(metric_out.replace("│", " ").split())
    # The JSON is the contract: SI whatever the shop reads.
    assert solve(capsys, metric, "--json")[1] == solve(capsys, us, "--json")[1]


def test_the_crew_ticket_in_us_units(tmp_path: Path) -> None:
    book = load_recipes(book_in(tmp_path, 'units = "us"'))
    heat = load_heat(HEAT, book)
    plan = Planner(book).plan(heat)
    text = ticket_text(heat, plan, book, datetime(2026, 3, 14, 10, 5))
    assert f"Bath {heat.bath_kg / KG_PER_LB:,.0f} lb ->" in text
    assert f"{'lb':>10}" in text and "°F" in text and "°C" not in text.split("CAUTIONS")[0]
    if heat.temperature_c is not None:  # °F = °C x 1.8 + 32 (NIST SP 811 Appendix B.9)
        assert f"Temperature {heat.temperature_c * 1.8 + 32:.0f} °F now" in text


@pytest.mark.parametrize("value", ['"imperial"', "1", '"US"'])
def test_a_bad_units_value_is_one_line_naming_shop_toml_and_units(
        capsys: pytest.CaptureFixture[str], tmp_path: Path, value: str) -> None:
    status, out, err = solve(capsys, book_in(tmp_path, f"units = {value}"))
    assert status == 2 and out == ""
    (line,) = err.splitlines()
    assert "shop.toml" in line and "units" in line and "Traceback" not in err
