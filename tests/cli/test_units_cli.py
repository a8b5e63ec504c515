"""shop.toml `units`: `meltfix solve`'s tables and the crew ticket in US units, the JSON in SI, and
a bad value as one line naming shop.toml and the key."""

from __future__ import annotations

import json
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
KG_PER_SHORT_TON = 2000 * KG_PER_LB  # NIST SP 811 Appendix B.8: ton, short (2000 lb)


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
    # The JSON is the contract: its numbers in SI whatever the shop reads. Its notes and cautions are
    # sentences for people and are written in the shop's units, like the tables.
    metric_json, us_json = (json.loads(solve(capsys, book, "--json")[1]) for book in (metric, us))
    texts = ("notes", "cautions")
    assert {k: v for k, v in metric_json.items() if k not in texts} == {k: v for k, v in us_json.items() if k not in texts}
    # A material's own notes are the shop's words from materials.toml ("25 kg bags"), shown as written.
    own = tuple(f"{m.name}: " for m in book.materials)
    us_words = " ".join(t for t in us_json["cautions"] + us_json["notes"] if not t.startswith(own))
    assert "°C" not in us_words and " kg " not in us_words and "°F" in us_words
    heat = load_heat(HEAT, book)
    if heat.temperature_c is not None:  # °F = °C x 1.8 + 32 (NIST SP 811 Appendix B.9)
        assert f"(from {heat.temperature_c * 1.8 + 32:.0f} °F)" in us_words


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


def test_report_in_short_tons_and_pounds_for_a_us_shop(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    from meltfix.records.demo_logbook import build_demo_logbook

    metric, us = book_in(tmp_path / "m", 'units = "metric"'), book_in(tmp_path / "u", 'units = "us"')
    logbook = tmp_path / "day.sqlite"
    build_demo_logbook(logbook, load_recipes(metric), days=1)
    outs = {}
    for name, recipes in (("metric", metric), ("us", us)):
        assert main(["report", "--logbook", str(logbook), "--recipes", str(recipes), "--csv",
                     str(tmp_path / f"{name}.csv")]) == 0
        outs[name] = " ".join(capsys.readouterr().out.split())
    # "Additions actually made 1,234 EUR, 5.67 EUR/t": per short ton = per t x 0.90718474 (NIST SP 811
    # Appendix B.8: a short ton is 907.18474 kg).
    per_t = float(outs["metric"].split(" EUR/t ")[0].rsplit(", ", 1)[1].replace(",", ""))
    per_short_ton = float(outs["us"].split(" EUR/short ton ")[0].rsplit(", ", 1)[1].replace(",", ""))
    assert per_short_ton == pytest.approx(per_t * KG_PER_SHORT_TON / 1000, abs=0.006)
    tonnes = float(outs["metric"].split(" t of bath")[0].rsplit(" ", 1)[1].replace(",", ""))
    short_tons = float(outs["us"].split(" short tons of bath")[0].rsplit(" ", 1)[1].replace(",", ""))
    assert short_tons == pytest.approx(tonnes * 1000 / KG_PER_SHORT_TON, abs=1.5)  # both rounded to whole tons
    assert "Planned lb" in outs["us"] and "Planned kg" in outs["metric"]
    # The CSV is data: SI whatever the shop reads.
    assert (tmp_path / "metric.csv").read_text(encoding="utf-8") == (tmp_path / "us.csv").read_text(encoding="utf-8")


def test_replay_in_pounds_and_fahrenheit_for_a_us_shop(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    record = ROOT / "demo" / "records" / "KB-24211.toml"
    us = book_in(tmp_path, 'units = "us"')
    assert main(["replay", str(record), "--recipes", str(us)]) == 0
    out = " ".join(capsys.readouterr().out.replace("│", " ").split())
    # The record's first sample: 80,000 kg at its temperature, read in lb and °F (NIST SP 811 factors).
    from meltfix.records.heat_record import load_record

    first = load_record(record, load_recipes(us)).samples[0]
    assert f"bath {80_000 / KG_PER_LB:,.0f} lb" in out
    if first.temperature_c is not None:
        assert f"· {first.temperature_c * 1.8 + 32:.0f} °F ·" in out
    assert " kg " not in out and "°C" not in out
    assert main(["replay", str(record), "--recipes", str(us), "--json"]) == 0  # the JSON stays SI
    assert '"bath_kg": 80000' in capsys.readouterr().out.replace(".0,", ",")


def test_a_trainee_of_a_us_shop_enters_pounds(tmp_path: Path) -> None:
    from meltfix.records.training import parse_entry

    book = load_recipes(book_in(tmp_path, 'units = "us"'))
    # 100 lb = 45.359237 kg (NIST SP 811 Appendix B.8); the unit may be written after the amount.
    ((name, kg),) = parse_entry("HC FeMn 100 lb", book)
    assert name == "HC FeMn" and kg == pytest.approx(100 * KG_PER_LB, rel=1e-12)
