"""`meltfix report` end to end, and the demo shop's week of heats behind `meltfix report --demo`."""

from __future__ import annotations

import csv
import os
import sqlite3
import subprocess
import sys
from datetime import datetime
from pathlib import Path

import pytest

from meltfix.cli import main
from meltfix.records.demo_logbook import build_demo_logbook
from meltfix.records.logbook import Logbook
from meltfix.shop.analysis import Analysis
from meltfix.shop.recipes import load_recipes


@pytest.fixture(scope="session")
def demo_run(tmp_path_factory: pytest.TempPathFactory) -> dict[str, object]:
    """One `meltfix report --demo --csv` in a fresh process with an empty cache: it builds the demo."""
    folder = tmp_path_factory.mktemp("demo")
    env = dict(os.environ, XDG_CACHE_HOME=str(folder / "cache"), COLUMNS="100")
    done = subprocess.run([sys.executable, "-m", "meltfix.cli", "report", "--demo", "--csv", str(folder / "week.csv")],
                          capture_output=True, text=True, env=env, timeout=300)
    (logbook,) = (folder / "cache" / "meltfix").glob("demo-logbook-*.sqlite")
    return {"run": done, "csv": folder / "week.csv", "logbook": logbook, "env": env}


@pytest.fixture()
def logbook_path(tmp_path: Path) -> Path:
    path = tmp_path / "log.sqlite"
    with Logbook(path) as logbook:
        logbook.set_shop_name("Kestrel Bend Foundry & Steel")
        for heat_id, when, kg in (("KB-1", datetime(2026, 3, 2, 7, 0), 100.0),
                                  ("KB-2", datetime(2026, 3, 3, 9, 0), 40.0)):
            logbook.record_sample(heat_id, "S1", Analysis({"C": 0.3}), when=when)
            logbook.record_additions(heat_id, [("FeMn", kg)], when=when, prices={"FeMn": 1.35})
    return path


def test_report_prints_the_tables(logbook_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", "--logbook", str(logbook_path)]) == 0
    out = capsys.readouterr().out
    for text in ("Kestrel Bend Foundry & Steel", "Cost per heat", "Per grade",
                 "Per material", "KB-1", "KB-2", "135"):  # 100 kg x 1.35 EUR/kg
        assert text in out


def test_report_reads_the_logbook_named_by_the_environment(logbook_path: Path, monkeypatch: pytest.MonkeyPatch,
                                                           capsys: pytest.CaptureFixture[str]) -> None:
    monkeypatch.setenv("MELTFIX_LOGBOOK", str(logbook_path))
    assert main(["report", "--from", "2026-03-03"]) == 0
    out = capsys.readouterr().out
    assert "KB-2" in out and "KB-1" not in out


def test_report_writes_the_csv(logbook_path: Path, tmp_path: Path) -> None:
    target = tmp_path / "out.csv"
    assert main(["report", "--logbook", str(logbook_path), "--csv", str(target)]) == 0
    with target.open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    assert [(row["heat"], float(row["cost"])) for row in rows] == [("KB-1", 135.0), ("KB-2", 54.0)]


def test_an_empty_period_says_so(logbook_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", "--logbook", str(logbook_path), "--from", "2027-01-01"]) == 0
    assert "No heats were recorded in this period" in capsys.readouterr().out


@pytest.mark.parametrize("option, value, problem", [
    ("--from", "03/02/2026", "is not a date in the form YYYY-MM-DD"),
    ("--to", "2026-3-2", "is not a date in the form YYYY-MM-DD"),
    ("--to", "yesterday", "is not a date in the form YYYY-MM-DD"),
    ("--from", "2026-13-01", "is not a real date (month must be in 1..12)"),
    ("--from", "2026-02-30", "is not a real date (day is out of range for month)"),  # ISO 8601 calendar
])
def test_a_bad_date_is_exit_2_with_one_clear_line(logbook_path: Path, capsys: pytest.CaptureFixture[str],
                                                  option: str, value: str, problem: str) -> None:
    assert main(["report", "--logbook", str(logbook_path), option, value]) == 2
    assert capsys.readouterr().err == f"meltfix: command line: {option}: '{value}' {problem}\n"


def test_from_after_to_is_exit_2(logbook_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["report", "--logbook", str(logbook_path), "--from", "2026-03-05", "--to", "2026-03-01"]) == 2
    assert "--from: 2026-03-05 is after --to 2026-03-01" in capsys.readouterr().err


def test_a_missing_logbook_is_exit_2_and_not_created(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "none.sqlite"
    assert main(["report", "--logbook", str(path)]) == 2
    assert "no logbook here yet" in capsys.readouterr().err
    assert not path.exists()


def test_a_foreign_file_is_exit_2_and_left_untouched(tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    path = tmp_path / "other.db"
    db = sqlite3.connect(path)
    db.execute("CREATE TABLE orders (id INTEGER)")
    db.commit()
    db.close()
    before = path.read_bytes()
    assert main(["report", "--logbook", str(path)]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "not a meltfix logbook" in err and "Traceback" not in err
    assert path.read_bytes() == before


def test_an_unwritable_csv_is_exit_2(logbook_path: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    target = tmp_path / "no such folder" / "out.csv"
    assert main(["report", "--logbook", str(logbook_path), "--csv", str(target)]) == 2
    assert f"meltfix: {target}: cannot write the CSV file" in capsys.readouterr().err


def test_demo_and_logbook_together_are_refused(logbook_path: Path) -> None:
    assert main(["report", "--demo", "--logbook", str(logbook_path)]) == 2


# -- the demo shop ------------------------------------------------------------------------------


def test_demo_report_runs_cleanly(demo_run: dict[str, object]) -> None:
    done = demo_run["run"]
    assert done.returncode == 0, done.stderr
    assert done.stderr == ""
    out = done.stdout
    assert out.startswith("Addition cost report — Kestrel Bend Foundry & Steel")
    assert "Heats that needed more than one correction" in out
    assert "Highs" not in out  # the solver's own chatter is kept off the report


def test_demo_week_has_what_the_report_and_screen_need(demo_run: dict[str, object]) -> None:
    book = load_recipes()
    with Logbook(demo_run["logbook"], create=False) as logbook:
        heats = logbook.list_heats()
        assert logbook.shop_name == "Kestrel Bend Foundry & Steel"
        assert len(heats) >= 60
        assert len({h.shift.shift_date for h in heats}) == 7 and len(logbook.shifts()) == 21
        assert len({h.grade for h in heats}) >= 8 and {h.grade for h in heats} <= set(book.grades)
        corrections = [h.corrections for h in heats]
        assert corrections.count(2) >= 5 and corrections.count(3) >= 3
        assert sum(h.unpriced_lines for h in heats) == 0
        histories = [logbook.heat_history(h.heat_id) for h in heats]
    samples = [s for history in histories for s in history.samples]
    assert all(len(s.burns) >= 2 for s in samples)
    assert any(s.rejected_burns and s.flags for s in samples)
    off_plan = 0
    for history in histories:
        plans = {p.plan_id: p for p in history.plans}
        for made in history.additions:
            planned = {(line.material, round(line.kg)) for line in plans[made.plan_id].lines}
            off_plan += planned != {(line.material, round(line.kg)) for line in made.lines}
            assert {line.material for line in made.lines} <= set(book.material_names)
    assert off_plan >= 10


def test_demo_csv_has_one_row_per_heat(demo_run: dict[str, object]) -> None:
    with Path(demo_run["csv"]).open(newline="", encoding="utf-8") as handle:
        rows = list(csv.DictReader(handle))
    with Logbook(demo_run["logbook"], create=False) as logbook:
        heats = logbook.list_heats()
    assert [row["heat"] for row in rows] == [h.heat_id for h in heats]
    total = sum(h.actual_cost for h in heats)
    assert sum(float(row["cost"]) for row in rows) == pytest.approx(total, abs=0.01 * len(rows))  # cents rounded


def test_demo_is_built_once_then_read_from_the_cache(demo_run: dict[str, object]) -> None:
    path = Path(demo_run["logbook"])
    before = path.stat().st_mtime_ns
    done = subprocess.run([sys.executable, "-m", "meltfix.cli", "report", "--demo", "--from", "2026-03-04",
                           "--to", "2026-03-04"], capture_output=True, text=True, env=demo_run["env"], timeout=120)
    assert done.returncode == 0, done.stderr
    assert "2026-03-04 to 2026-03-04" in done.stdout
    assert [p.name for p in path.parent.iterdir() if not p.name.endswith(("-wal", "-shm"))] == [path.name]
    assert path.stat().st_mtime_ns == before


def test_demo_build_is_deterministic(tmp_path: Path) -> None:
    book = load_recipes()
    dumps = []
    for name in ("one", "two"):
        path = tmp_path / f"{name}.sqlite"
        build_demo_logbook(path, book, days=1)
        db = sqlite3.connect(path)
        dumps.append([db.execute(f"SELECT * FROM {table} ORDER BY 1, 2").fetchall()
                      for table in ("heat", "sample", "plan_line", "addition_batch", "addition")])
        db.close()
    assert dumps[0] == dumps[1] and len(dumps[0][0]) >= 9
