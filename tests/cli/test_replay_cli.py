"""`meltfix replay` end to end: the JSON object, the tables and chart, and bad records (exit 2)."""

from __future__ import annotations

import json
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path

import pytest

from meltfix.cli import main
from meltfix.shop.recipes import load_recipes

ROOT = Path(__file__).resolve().parents[2]
RECORDS = ROOT / "demo" / "records"
STEP_KEYS = {"sample", "planned", "actual", "predicted", "measured_next", "planned_cost", "actual_cost"}


def _run(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[int, str, str]:
    status = main(["replay", *argv])
    captured = capsys.readouterr()
    return status, captured.out, captured.err


def test_json_has_the_promised_shape(capsys: pytest.CaptureFixture[str]) -> None:
    status, out, err = _run(capsys, str(RECORDS / "KB-24211.toml"), "--json")
    assert status == 0, err
    doc = json.loads(out)
    assert doc["heat"] == "KB-24211"
    assert [s["sample"] for s in doc["steps"]] == ["S1", "S2", "S3", "S4"]
    for step in doc["steps"]:
        assert STEP_KEYS <= set(step)
        assert all({"material", "kg", "cost"} <= set(a) for a in step["planned"] + step["actual"])
    first = doc["steps"][0]
    # The record's additions between S1 (10:02) and S2 (10:16), priced from recipes/materials.toml.
    assert {a["material"]: a["kg"] for a in first["actual"]} == {
        "HC FeCr": 300, "HC FeMn": 120, "FeMo 65": 75, "Carbon raiser (graphitised)": 25, "FeSi 75": 40}
    book = load_recipes()
    assert first["actual_cost"] == pytest.approx(sum(a["kg"] * book.material(a["material"]).price_per_kg
                                                     for a in first["actual"]))
    assert first["measured_next"]["Cr"] == 0.78
    assert doc["steps"][-1]["measured_next"] is None


def test_json_with_own_recipes_matches_hand_arithmetic(tmp_path: Path, capsys: pytest.CaptureFixture[str],
                                                      write_recipes: Callable[..., Path]) -> None:
    # No scatter: the plan to the target odds is the plan on paper, so the arithmetic below holds.
    folder = write_recipes(tmp_path / "book",
                           '[[material]]\nname = "Mn metal"\nprice_per_kg = 3.0\ncomposition = { Mn = 100.0 }\n',
                           'name = "G"\n[window]\nMn = [0.5, 1.0]\n',
                           "[scatter]\nrecovery = 0\nbath = 0\nanalysis = 0\n")
    record = tmp_path / "two.toml"
    record.write_text(
        'grade = "G"\nbath_kg = 20000\n'
        '[[sample]]\nid = 1\ntime = "08:00"\n[sample.analysis]\nMn = 0.40\n'
        '[[sample]]\nid = 2\ntime = "08:10"\n[sample.analysis]\nMn = "0,69"\n'
        '[[addition]]\ntime = "08:03"\nmaterial = "Mn metal"\nkg = 60\n', encoding="utf-8")
    status, out, err = _run(capsys, str(record), "--json", "--recipes", str(folder))
    assert status == 0, err
    doc = json.loads(out)
    assert doc["heat"] == "two"  # no heat key: the file's name
    first = doc["steps"][0]
    # Pure manganese, recovery 1: Mn (20000 * 0.004 + 60) / (20000 + 60) = 140 / 20060 = 0.697906 %.
    assert first["predicted"]["Mn"] == pytest.approx(0.697906, abs=1e-6)
    assert first["actual_cost"] == pytest.approx(180.0)
    assert first["measured_next"] == {"Mn": 0.69}
    # Plan to the window minimum 0.5 (no aim): x = 20000 * (0.005 - 0.004) / (1 - 0.005) = 20.1005 kg.
    assert first["planned"][0]["kg"] == pytest.approx(20.1005, abs=1e-3)


def test_tables_and_chart(capsys: pytest.CaptureFixture[str]) -> None:
    status, out, _ = _run(capsys, str(RECORDS / "KB-24214.toml"))
    assert status == 0
    for text in ("Plan meltfix makes", "Actually added", "Chemistry path", "Heat summary", "A1", "A2", "A3",
                 "61.7 %"):  # the Mn recovery the next sample implies, as a per cent (meltfix.plan.numbers)
        assert text in out


@pytest.mark.parametrize(("change", "expected"), [
    (('material = "SiMn"', 'material = "Si Mn"'), "addition #1.material: no material named 'Si Mn'"),
    (('time = "11:35"', 'time = "11:05"'), "sample 'A2'.time"),
    (("bath_kg = 90000", "bath_kg = 0"), "bath_kg: must be above 0"),
])
def test_bad_record_is_one_line_and_exit_2(tmp_path: Path, change: tuple[str, str], expected: str) -> None:
    text = (RECORDS / "KB-24214.toml").read_text(encoding="utf-8")
    assert change[0] in text
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace(change[0], change[1], 1), encoding="utf-8")
    done = subprocess.run([sys.executable, "-m", "meltfix.cli", "replay", str(bad), "--json"],
                          capture_output=True, text=True)
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr.count("\n") == 1 and "Traceback" not in done.stderr
    assert str(bad) in done.stderr and expected in done.stderr


def test_missing_file(capsys: pytest.CaptureFixture[str], tmp_path: Path) -> None:
    status, _, err = _run(capsys, str(tmp_path / "none.toml"))
    assert status == 2 and "file not found" in err
