"""`meltfix recoveries` end to end: the table, --json, the demo shop's week and bad input."""

from __future__ import annotations

import argparse
import json
import sys
import tomllib
from dataclasses import replace
from datetime import datetime, timedelta
from pathlib import Path
from types import MappingProxyType

import pytest

from meltfix import cli
from meltfix.base.errors import InputError
from meltfix.commands import recoveries
from meltfix.plan.massbalance import bath_after
from meltfix.plan.planner import Planner
from meltfix.records.demo_logbook import build_demo_logbook
from meltfix.records.logbook import Logbook
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import load_recipes

DAY = datetime(2026, 3, 9, 6, 0)
# What the heats below really take up of the manganese in the built-in HC FeMn (the book says 0.90).
TRUE_MN = 0.78


def _run(*argv: str) -> int:
    """The command as `meltfix recoveries ...` runs it: bad input is one line and exit 2 (meltfix.cli)."""
    if "recoveries" in cli.COMMANDS:
        return cli.main(["recoveries", *argv])
    parser = argparse.ArgumentParser(prog="meltfix recoveries")
    recoveries.add_arguments(parser)
    try:
        return recoveries.run(parser.parse_args(list(argv)))
    except InputError as exc:
        print(f"meltfix: {exc}", file=sys.stderr)
        return cli.EXIT_BAD_INPUT


@pytest.fixture(scope="module")
def logbook_path(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Eight SAE 1045 heats of the built-in recipes, each trimmed with HC FeMn that really recovers 0.78."""
    book = load_recipes()
    femn = book.material("HC FeMn")
    really = replace(femn, recovery=MappingProxyType({**femn.recovery, "Mn": TRUE_MN}))
    path = tmp_path_factory.mktemp("log") / "log.sqlite"
    planner = Planner(book)
    with Logbook(path, book) as logbook:
        for k in range(8):
            heat_id, when = f"KB-9{k}", DAY + timedelta(hours=2 * k)
            first = Analysis({"C": 0.40, "Si": 0.20, "Mn": 0.45 + 0.01 * k, "P": 0.010, "S": 0.012,
                              "Cr": 0.05, "Ni": 0.05, "Mo": 0.01, "Cu": 0.10})
            logbook.record_sample(heat_id, "S1", first, when=when)
            heat = Heat(heat_id, "SAE 1045", 60_000.0, first)
            plan_id = logbook.record_plan(heat, planner.plan(heat), when + timedelta(minutes=2))
            kg = 200.0 + 20.0 * k
            logbook.record_additions(heat_id, [("HC FeMn", kg)], plan_id, when + timedelta(minutes=4))
            _, after = bath_after(60_000.0, first.pct, [(really, kg)])
            logbook.record_sample(heat_id, "S2", Analysis(after), when=when + timedelta(minutes=12))
    return path


def test_json_has_the_promised_shape_and_proposes_the_real_recovery(
        logbook_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert _run("--logbook", str(logbook_path), "--json") == 0
    out = json.loads(capsys.readouterr().out)
    assert set(out) == {"estimates", "skipped", "notes"}
    assert isinstance(out["skipped"], int) and all(isinstance(n, str) for n in out["notes"])
    for row in out["estimates"]:
        assert set(row) == {"material", "element", "catalogue", "estimate", "ci_low", "ci_high", "cases", "propose"}
    (mn,) = [r for r in out["estimates"] if (r["material"], r["element"]) == ("HC FeMn", "Mn")]
    assert mn["catalogue"] == 0.9 and mn["cases"] == 8 and mn["propose"] is True
    assert mn["estimate"] == pytest.approx(TRUE_MN, abs=1e-9)  # exact analyses: the balance inverts exactly
    assert mn["ci_low"] <= mn["estimate"] <= mn["ci_high"] < 0.9


def test_the_table_shows_the_proposal_and_a_snippet_to_paste(
        logbook_path: Path, capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("COLUMNS", "110")
    assert _run("--logbook", str(logbook_path)) == 0
    out = capsys.readouterr().out
    for text in ("Material", "Catalogue", "Estimate", "95 % CI", "Cases", "Proposal", "HC FeMn", "→ 0.78",
                 "repeatability limits", "qualified person"):
        assert text in out, text
    line = next(line for line in out.splitlines() if line.startswith("recovery = {"))
    # The whole recovery line of HC FeMn: C and Si keep the book's values.
    assert tomllib.loads(line)["recovery"] == {"Mn": 0.78, "C": 0.9, "Si": 0.8, "P": 1.0, "S": 1.0}


def test_dates_and_min_cases_narrow_what_is_used(logbook_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert _run("--logbook", str(logbook_path), "--json", "--from", "2026-03-10") == 0
    assert json.loads(capsys.readouterr().out)["estimates"] == []
    assert _run("--logbook", str(logbook_path), "--json", "--min-cases", "9") == 0
    rows = json.loads(capsys.readouterr().out)["estimates"]
    assert not any(r["propose"] for r in rows)


@pytest.mark.parametrize(("argv", "message"), [
    (["--logbook", "{missing}"], "no logbook here yet"),
    (["--from", "2026-02-30"], "--from: '2026-02-30' is not a real date"),
    (["--to", "9 March"], "--to: '9 March' is not a date in the form YYYY-MM-DD"),
    (["--from", "2026-03-10", "--to", "2026-03-09"], "--from: 2026-03-10 is after --to 2026-03-09"),
    (["--min-cases", "1"], "--min-cases: '1' is not a whole number of at least 2"),
])
def test_bad_input_is_one_line_and_exit_2(tmp_path: Path, logbook_path: Path, capsys: pytest.CaptureFixture[str],
                                          argv: list[str], message: str) -> None:
    argv = [a.replace("{missing}", str(tmp_path / "none.sqlite")) for a in argv]
    if "--logbook" not in argv:
        argv += ["--logbook", str(logbook_path)]
    assert _run(*argv) == 2
    captured = capsys.readouterr()
    assert message in captured.err and len(captured.err.strip().splitlines()) == 1
    assert "Traceback" not in captured.err and captured.out == ""


def test_the_demo_week_runs(tmp_path: Path, monkeypatch: pytest.MonkeyPatch,
                            capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "demo.sqlite"
    build_demo_logbook(path, load_recipes(), days=2)
    monkeypatch.setattr("meltfix.records.demo_logbook.demo_logbook_path", lambda book=None: path)
    assert _run("--demo", "--json") == 0
    out = json.loads(capsys.readouterr().out)
    assert out["estimates"] and out["skipped"] > 0
    assert all(0 < r["estimate"] <= 1 for r in out["estimates"])
