"""The heat logbook: what is recorded comes back whole, and nothing committed is ever lost.

Outside references: SQLite's own ``PRAGMA integrity_check`` and plain ``sqlite3`` reads of the file
(an engine independent of our code), costs worked by hand (kg x price), ISO 8601 dates.
"""

from __future__ import annotations

import math
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from collections.abc import Callable
from contextlib import contextmanager
from datetime import UTC, date, datetime
from pathlib import Path

import pytest

from meltfix.base.errors import InputError
from meltfix.plan.planner import Planner
from meltfix.plan.result import PlanOptions
from meltfix.records.logbook import (APPLICATION_ID, SCHEMA_VERSION, Logbook, PlanRecord, SampleRecord, Shift,
                                     default_logbook_path)
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat
from meltfix.shop.recipes import load_recipes

T0 = datetime(2026, 3, 2, 7, 30)


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request: pytest.FixtureRequest, tmp_path: Path) -> str:
    """Where a test's logbook lives: a SQLite file, or a fresh database on the test PostgreSQL server."""
    if request.param == "sqlite":
        return str(tmp_path / "log.sqlite")
    return request.getfixturevalue("postgres_url")


@pytest.fixture()
def book(tmp_path: Path, write_recipes: Callable[..., Path]):
    """A three-material recipe book, so the tests do not depend on the shop's data."""
    return load_recipes(write_recipes(tmp_path / "recipes", textwrap.dedent("""
        [[material]]
        name = "FeMn"
        price_per_kg = 1.35
        composition = { Mn = 79.0, C = 6.8 }
        recovery = { Mn = 0.90, C = 0.90 }

        [[material]]
        name = "Graphite"
        price_per_kg = 0.80
        composition = { C = 98.5 }
        recovery = { C = 0.90 }

        [[material]]
        name = "Scrap"
        price_per_kg = 0.36
        composition = { C = 0.05, Mn = 0.40 }
        """), textwrap.dedent("""
        name = "Plain"
        [window]
        C = [0.43, 0.50]
        Mn = [0.60, 0.90]
        [aim]
        C = 0.46
        Mn = 0.75
        """)))


def _heat(heat_id: str = "H1", **changes) -> Heat:
    return Heat(heat_id, "Plain", 60_000.0, Analysis({"C": 0.40, "Mn": 0.52}), capacity_kg=65_000.0,
                temperature_c=1595.0).with_changes(**changes)


def _integrity(path: Path) -> str:
    db = sqlite3.connect(path)
    try:
        return db.execute("PRAGMA integrity_check").fetchone()[0]
    finally:
        db.close()


# -- what is recorded comes back ----------------------------------------------------------------


def test_history_holds_samples_plans_and_additions_in_time_order(place: str, book) -> None:
    heat = _heat()
    plan = Planner(book).plan(heat)
    with Logbook(place, book) as logbook:
        logbook.record_sample("H1", "S1", heat.analysis, [Analysis({"C": 0.401, "Mn": 0.52}),
                                                         Analysis({"C": 0.399, "Mn": 0.52})], T0,
                              temperature_c=1595.0)
        plan_id = logbook.record_plan(heat, plan, T0.replace(minute=33))
        logbook.record_additions("H1", [("FeMn", 200.0), ("Graphite", 25.0)], plan_id, T0.replace(minute=36))
        logbook.record_sample("H1", "S2", Analysis({"C": 0.455, "Mn": 0.74}), (), T0.replace(minute=45))
        history = logbook.heat_history("H1")

    assert [type(e).__name__ for e in history.events] == ["SampleRecord", "PlanRecord", "AdditionsRecord",
                                                          "SampleRecord"]
    assert history.grade == "Plain" and history.bath_kg == 60_000.0 and history.corrections == 1
    assert history.shift == Shift(date(2026, 3, 2), "early")
    first = history.samples[0]
    assert first.analysis.pct == {"C": 0.40, "Mn": 0.52} and len(first.burns) == 2 and first.temperature_c == 1595.0
    (made,) = history.additions
    assert made.plan_id == plan_id
    # Costs at the prices in force, worked by hand: 200 kg x 1.35 + 25 kg x 0.80 = 290.
    assert [(line.material, line.kg, line.cost) for line in made.lines] == [("FeMn", 200.0, 270.0),
                                                                              ("Graphite", 25.0, 20.0)]
    assert math.isclose(made.total_cost, 290.0)


def test_a_recorded_plan_can_be_made_again_from_its_inputs(place: str, book) -> None:
    heat = _heat(price_per_kg={"FeMn": 1.50}, switched_off=frozenset({"Scrap"}), max_temp_drop_c=30.0,
                 analysis=Analysis({"C": 0.40, "Mn": 0.001}, frozenset({"Mn"})))
    options = PlanOptions(continuous=True, aim_penalty=2.0)
    plan = Planner(book).plan(heat, options)
    with Logbook(place, book) as logbook:
        plan_id = logbook.record_plan(heat, plan, T0, options=options)
        (record,) = logbook.heat_history("H1").plans
    assert isinstance(record, PlanRecord) and record.plan_id == plan_id
    assert record.heat == heat and record.options == options
    again = Planner(book).plan(record.heat, record.options)
    assert again.total_cost == pytest.approx(plan.total_cost, rel=1e-9)
    assert [(a.material, a.kg) for a in again.additions] == [(line.material, line.kg) for line in record.lines]
    assert record.prices["FeMn"] == 1.50  # this heat's price, not the book's 1.35
    assert record.result["status"] == plan.status


def test_actual_additions_are_priced_as_planned_even_off_plan(place: str, book) -> None:
    heat = _heat(price_per_kg={"FeMn": 2.00})
    plan = Planner(book).plan(heat)
    with Logbook(place, book) as logbook:
        plan_id = logbook.record_plan(heat, plan, T0)
        # FeMn at this heat's 2.00; Scrap was not in the plan: the book's 0.36 in force when planned.
        logbook.record_additions("H1", [("FeMn", 100.0), ("Scrap", 500.0)], plan_id, T0)
        (made,) = logbook.heat_history("H1").additions
    assert [line.cost for line in made.lines] == [200.0, 180.0]


def test_a_line_without_a_known_price_is_still_recorded(place: str) -> None:
    with Logbook(place) as logbook:  # no recipe book, no plan
        logbook.record_additions("H9", [("Mystery alloy", 12.5)], when=T0)
        (summary,) = logbook.list_heats()
        (made,) = logbook.heat_history("H9").additions
    assert made.lines[0].kg == 12.5 and made.lines[0].cost is None
    assert summary.unpriced_lines == 1 and summary.actual_cost == 0.0 and summary.grade is None


@pytest.mark.parametrize("additions, field", [
    ([("FeMn", -5.0)], "additions.FeMn"),
    ([("FeMn", float("nan"))], "additions.FeMn"),
    ([("FeMn", "ten")], "additions.FeMn"),
    ([("Unobtainium", 5.0)], "additions.Unobtainium"),
    ([], ""),
])
def test_bad_additions_are_refused_and_nothing_is_written(place: str, book, additions, field) -> None:
    with Logbook(place, book) as logbook:
        logbook.record_additions("H1", [("FeMn", 10.0)], when=T0)
        with pytest.raises(InputError) as caught:
            logbook.record_additions("H1", additions, when=T0)
        assert caught.value.field == field
        assert logbook.list_heats()[0].corrections == 1


def test_a_plan_of_another_heat_is_refused(place: str, book) -> None:
    with Logbook(place, book) as logbook:
        plan_id = logbook.record_plan(_heat("H1"), Planner(book).plan(_heat("H1")), T0)
        with pytest.raises(InputError, match="not a plan of heat H2"):
            logbook.record_additions("H2", [("FeMn", 10.0)], plan_id)


def test_a_sample_id_is_recorded_once(place: str) -> None:
    with Logbook(place) as logbook:
        logbook.record_sample("H1", "S1", Analysis({"C": 0.40}), when=T0)
        with pytest.raises(InputError, match="already recorded"):
            logbook.record_sample("H1", "S1", Analysis({"C": 0.99}), when=T0)
        assert logbook.heat_history("H1").samples[0].analysis.pct == {"C": 0.40}
        # Given other ids, the logbook takes the first one still free, and says which.
        assert logbook.record_sample("H1", "S1", Analysis({"C": 0.45}), when=T0, if_taken=["S2", "S3"]) == "S2"
        assert logbook.record_sample("H1", "S1", Analysis({"C": 0.46}), when=T0, if_taken=["S2", "S3"]) == "S3"


def test_spectrometer_sample_is_recorded_with_its_burns(place: str) -> None:
    from meltfix.readers.spectro import read_export

    export = Path(__file__).parents[1] / "data" / "spectro" / "three_burns_outlier.csv"
    sample = read_export(export, drop_flagged=True).samples[0]
    with Logbook(place) as logbook:
        logbook.record_spectro_sample("KB-24117", sample, T0, temperature_c=1601.0)
        (record,) = logbook.heat_history("KB-24117").samples
    assert isinstance(record, SampleRecord)
    assert record.sample_id == sample.sample_id and len(record.burns) == 3
    assert record.burns[2].pct["Mn"] == pytest.approx(0.842)
    assert record.rejected_burns == frozenset(k for k, b in enumerate(sample.burns, 1) if not b.accepted)
    assert record.analysis.pct == dict(sample.analysis.pct) and record.flags == sample.flags


# -- heats, shifts and dates --------------------------------------------------------------------


@pytest.mark.parametrize("moment, shift", [
    # Three eight-hour shifts from 06:00, 14:00 and 22:00 (common practice).
    (datetime(2026, 3, 2, 5, 59), Shift(date(2026, 3, 1), "night")),
    (datetime(2026, 3, 2, 6, 0), Shift(date(2026, 3, 2), "early")),
    (datetime(2026, 3, 2, 13, 59), Shift(date(2026, 3, 2), "early")),
    (datetime(2026, 3, 2, 14, 0), Shift(date(2026, 3, 2), "late")),
    (datetime(2026, 3, 2, 22, 0), Shift(date(2026, 3, 2), "night")),
    (datetime(2026, 3, 3, 0, 30), Shift(date(2026, 3, 2), "night")),
])
def test_shift_of_a_moment(moment: datetime, shift: Shift) -> None:
    assert Shift.of(moment) == shift


def test_list_heats_by_date_and_by_shift(place: str) -> None:
    with Logbook(place) as logbook:
        for heat_id, moment in (("A", datetime(2026, 3, 2, 23, 0)), ("B", datetime(2026, 3, 3, 1, 0)),
                                ("C", datetime(2026, 3, 3, 9, 0)), ("D", datetime(2026, 3, 4, 0, 0))):
            logbook.record_additions(heat_id, [("FeMn", 10.0)], when=moment, prices={"FeMn": 1.0})
        # A heat first seen late but with an earlier sample moves back to its real start.
        logbook.record_sample("D", "S1", Analysis({"C": 0.1}), when=datetime(2026, 3, 3, 21, 0))
        assert [h.heat_id for h in logbook.list_heats()] == ["A", "B", "C", "D"]
        assert [h.heat_id for h in logbook.list_heats(date(2026, 3, 3), date(2026, 3, 3))] == ["B", "C", "D"]
        assert [h.heat_id for h in logbook.list_heats(date_to=date(2026, 3, 2))] == ["A"]
        night = Shift(date(2026, 3, 2), "night")
        assert [h.heat_id for h in logbook.list_heats(shift=night)] == ["A", "B"]
        assert logbook.shifts() == [night, Shift(date(2026, 3, 3), "early"), Shift(date(2026, 3, 3), "late")]
        assert logbook.list_heats(shift=night)[0].actual_cost == 10.0


def test_times_are_kept_as_shop_wall_clock_to_the_second(place: str) -> None:
    aware = datetime(2026, 3, 2, 12, 0, 7, 654321, tzinfo=UTC)
    with Logbook(place) as logbook:
        logbook.record_sample("H1", "S1", Analysis({"C": 0.1}), when=aware)
        (record,) = logbook.heat_history("H1").samples
    assert record.taken_at == aware.astimezone().replace(tzinfo=None, microsecond=0)


def test_reads_inside_reading_see_one_state_while_another_writer_carries_on(place: str) -> None:
    with Logbook(place) as reader, Logbook(place) as writer:
        writer.record_sample("H1", "S1", Analysis({"C": 0.1}), when=T0)
        with reader.reading():
            assert len(reader.list_heats()) == 1
            # Not blocked by the reader (SQLite's WAL; PostgreSQL's snapshot).
            writer.record_sample("H2", "S1", Analysis({"C": 0.1}), when=T0)
            assert len(reader.list_heats()) == 1
        assert len(reader.list_heats()) == 2


def test_unknown_heat_history_is_a_clear_error(place: str) -> None:
    with Logbook(place) as logbook, pytest.raises(InputError, match="not in the logbook"):
        logbook.heat_history("nope")


# -- where the logbook lives --------------------------------------------------------------------


def test_default_path_env_then_xdg_then_home(monkeypatch: pytest.MonkeyPatch, tmp_path: Path) -> None:
    monkeypatch.setenv("MELTFIX_LOGBOOK", str(tmp_path / "mine.sqlite"))
    assert default_logbook_path() == tmp_path / "mine.sqlite"
    monkeypatch.delenv("MELTFIX_LOGBOOK")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "data"))
    assert default_logbook_path() == tmp_path / "data" / "meltfix" / "logbook.sqlite"
    monkeypatch.setenv("XDG_DATA_HOME", "relative/ignored")  # the XDG spec: relative paths are invalid
    monkeypatch.setenv("HOME", str(tmp_path / "home"))
    assert default_logbook_path() == tmp_path / "home" / ".local" / "share" / "meltfix" / "logbook.sqlite"


def test_created_on_first_use_with_its_folder(tmp_path: Path) -> None:
    path = tmp_path / "deep" / "er" / "log.sqlite"
    with pytest.raises(InputError, match="no logbook here yet"):
        Logbook(path, create=False)
    assert not path.exists()
    Logbook(path).close()
    db = sqlite3.connect(path)
    assert db.execute("PRAGMA application_id").fetchone()[0] == APPLICATION_ID
    assert db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    assert db.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    db.close()


def test_an_empty_file_becomes_a_logbook(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    path.touch()
    with Logbook(path) as logbook:
        logbook.record_sample("H1", "S1", Analysis({"C": 0.2}), when=T0)
    assert _integrity(path) == "ok"


# -- reliability --------------------------------------------------------------------------------

_CHILD_PRELUDE = textwrap.dedent("""
    import sys, time
    from datetime import datetime
    from meltfix.records.logbook import Logbook
    logbook = Logbook(sys.argv[1])
    """)


def _child(tmp_path: Path, name: str, body: str) -> Path:
    script = tmp_path / f"{name}.py"
    script.write_text(_CHILD_PRELUDE + textwrap.dedent(body), encoding="utf-8")
    return script


def _wait_for(process: subprocess.Popen, word: str) -> None:
    line = process.stdout.readline()
    assert line.strip() == word, (line, process.stderr.read() if process.poll() is not None else "")


def _open_transactions(url: str) -> int:
    """Sessions of this database with a transaction open on the server (PostgreSQL's own view)."""
    import psycopg

    with psycopg.connect(url, autocommit=True) as conn:
        return conn.execute("SELECT count(*) FROM pg_stat_activity WHERE datname = current_database() "
                            "AND state = 'idle in transaction'").fetchone()[0]


def test_a_writer_killed_mid_transaction_loses_nothing_committed(tmp_path: Path, place: str) -> None:
    path = place
    script = _child(tmp_path, "killed", """
        for k in range(25):
            logbook.record_additions("H1", [("FeMn", 10.0 + k)], prices={"FeMn": 1.0})
        print("committed", flush=True)
        with logbook._write() as db:
            if "://" not in sys.argv[1]:
                # A tiny page cache makes SQLite spill the open transaction into the WAL file, so
                # the kill leaves uncommitted frames on disk for the next open to discard.
                db.execute("PRAGMA cache_size = 5")
            db.execute("INSERT INTO addition_batch (heat_id, added_at) VALUES ('H1', '2026-03-02T08:00:00')")
            batch = db.execute("SELECT max(id) FROM addition_batch").fetchone()[0]
            db.executemany("INSERT INTO addition (batch_id, line_no, material, kg) VALUES (?, ?, 'FeMn', 1.0)",
                           [(batch, n) for n in range(1, 20001)])
            print("inside", flush=True)
            time.sleep(60)
        """)
    child = subprocess.Popen([sys.executable, str(script), str(path)], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    try:
        _wait_for(child, "committed")
        _wait_for(child, "inside")
        if "://" in path:
            assert _open_transactions(path) == 1
        else:
            assert Path(f"{path}-wal").stat().st_size > 0
        os.kill(child.pid, signal.SIGKILL)
    finally:
        child.kill()
        child.wait(timeout=10)
    assert child.returncode == -signal.SIGKILL
    with Logbook(path) as logbook:
        (summary,) = logbook.list_heats()
        assert summary.corrections == 25
        assert summary.added_kg == pytest.approx(sum(10.0 + k for k in range(25)))
    if "://" not in path:
        assert _integrity(Path(path)) == "ok"


def test_two_processes_writing_at_once_both_succeed(tmp_path: Path, place: str) -> None:
    path = place
    Logbook(path).close()
    holder = _child(tmp_path, "holder", """
        with logbook._write() as db:
            # Heat B, held: SQLite locks the whole file, PostgreSQL the heat's row.
            logbook._touch_heat(db, "B", datetime(2026, 3, 2, 7, 0))
            print("holding", flush=True)
            time.sleep(1.0)  # the other writer must wait on the busy timeout, not fail
        for k in range(30):
            logbook.record_additions("A", [("FeMn", 1.0)], prices={"FeMn": 1.0})
        print("done", flush=True)
        """)
    other = _child(tmp_path, "other", """
        for k in range(30):
            logbook.record_additions("B", [("FeMn", 2.0)], prices={"FeMn": 1.0})
        print("done", flush=True)
        """)
    first = subprocess.Popen([sys.executable, str(holder), str(path)], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    _wait_for(first, "holding")
    started = time.monotonic()
    second = subprocess.Popen([sys.executable, str(other), str(path)], stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True)
    outputs = [p.communicate(timeout=60) for p in (first, second)]
    assert [p.returncode for p in (first, second)] == [0, 0], outputs
    assert time.monotonic() - started > 0.3
    with Logbook(path) as logbook:
        assert {h.heat_id: (h.corrections, h.added_kg) for h in logbook.list_heats()} == {"A": (30, 30.0),
                                                                                           "B": (30, 60.0)}


def _refused_untouched(path: Path, words: str) -> None:
    before = path.read_bytes()
    with pytest.raises(InputError) as caught:
        Logbook(path)
    message = str(caught.value)
    assert str(path) in message and words in message and "left untouched" in message
    assert path.read_bytes() == before


def test_a_file_that_is_not_sqlite_is_refused_and_left_untouched(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    path.write_bytes(b"heat,grade\nKB-1,SAE 1045\n" * 50)
    _refused_untouched(path, "not a meltfix logbook")


def test_a_damaged_logbook_is_refused_and_left_untouched(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    with Logbook(path) as logbook:
        for k in range(200):
            logbook.record_sample("H1", f"S{k}", Analysis({"C": 0.1, "Mn": 0.5}), when=T0)
    data = bytearray(path.read_bytes())
    page = int.from_bytes(data[16:18], "big")
    data[page * 2: page * 4] = b"\xa5" * (2 * page)  # scribble over pages 3 and 4
    path.write_bytes(bytes(data))
    _refused_untouched(path, "damaged")


def test_another_programs_sqlite_file_is_refused_and_left_untouched(tmp_path: Path) -> None:
    path = tmp_path / "shop.db"
    db = sqlite3.connect(path)
    db.execute("CREATE TABLE customers (id INTEGER PRIMARY KEY, name TEXT)")
    db.execute("INSERT INTO customers (name) VALUES ('someone')")
    db.commit()
    db.close()
    _refused_untouched(path, "another program (tables: customers)")


def test_a_logbook_from_a_newer_meltfix_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    Logbook(path).close()
    db = sqlite3.connect(path)
    db.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    db.close()
    _refused_untouched(path, "newer meltfix")


# Version 1 of the logbook: the same tables, but the heat had no shift columns.
_V1_SCHEMA = """
CREATE TABLE meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE heat (heat_id TEXT PRIMARY KEY, grade TEXT, bath_kg REAL, capacity_kg REAL, started_at TEXT NOT NULL);
CREATE INDEX heat_started ON heat (started_at);
CREATE TABLE sample (id INTEGER PRIMARY KEY, heat_id TEXT NOT NULL REFERENCES heat (heat_id),
    sample_id TEXT NOT NULL, taken_at TEXT NOT NULL, analysis TEXT NOT NULL, below_limit TEXT NOT NULL,
    temperature_c REAL, flags TEXT NOT NULL, UNIQUE (heat_id, sample_id));
CREATE TABLE burn (sample_row INTEGER NOT NULL REFERENCES sample (id), burn_no INTEGER NOT NULL,
    analysis TEXT NOT NULL, below_limit TEXT NOT NULL, accepted INTEGER NOT NULL, PRIMARY KEY (sample_row, burn_no));
CREATE TABLE plan (id INTEGER PRIMARY KEY, heat_id TEXT NOT NULL REFERENCES heat (heat_id), made_at TEXT NOT NULL,
    grade TEXT NOT NULL, status TEXT NOT NULL, bath_kg REAL NOT NULL, final_kg REAL NOT NULL,
    total_cost REAL NOT NULL, currency TEXT NOT NULL, heat_toml TEXT NOT NULL, heat_extra TEXT NOT NULL,
    options TEXT NOT NULL, prices TEXT NOT NULL, result TEXT NOT NULL);
CREATE INDEX plan_heat ON plan (heat_id);
CREATE TABLE plan_line (plan_id INTEGER NOT NULL REFERENCES plan (id), line_no INTEGER NOT NULL,
    material TEXT NOT NULL, kg REAL NOT NULL, price_per_kg REAL NOT NULL, cost REAL NOT NULL,
    PRIMARY KEY (plan_id, line_no));
CREATE TABLE addition_batch (id INTEGER PRIMARY KEY, heat_id TEXT NOT NULL REFERENCES heat (heat_id),
    added_at TEXT NOT NULL, plan_id INTEGER REFERENCES plan (id));
CREATE INDEX batch_heat ON addition_batch (heat_id);
CREATE TABLE addition (batch_id INTEGER NOT NULL REFERENCES addition_batch (id), line_no INTEGER NOT NULL,
    material TEXT NOT NULL, kg REAL NOT NULL, price_per_kg REAL, cost REAL, PRIMARY KEY (batch_id, line_no));
INSERT INTO heat VALUES ('OLD-1', 'Plain', 60000, NULL, '2026-02-27T23:40:00');
INSERT INTO heat VALUES ('OLD-2', 'Plain', 60000, NULL, '2026-02-28T10:05:00');
INSERT INTO addition_batch VALUES (1, 'OLD-1', '2026-02-27T23:50:00', NULL);
INSERT INTO addition VALUES (1, 1, 'FeMn', 150.0, 1.35, 202.5);
"""


def _v1_logbook(path: Path) -> None:
    db = sqlite3.connect(path)
    db.executescript(_V1_SCHEMA)
    db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
    db.execute("PRAGMA user_version = 1")
    db.commit()
    db.close()


def test_an_older_logbook_is_migrated_after_a_backup(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    _v1_logbook(path)
    with Logbook(path) as logbook:
        heats = {h.heat_id: h for h in logbook.list_heats()}
        assert heats["OLD-1"].shift == Shift(date(2026, 2, 27), "night")
        assert heats["OLD-2"].shift == Shift(date(2026, 2, 28), "early")
        assert heats["OLD-1"].actual_cost == 202.5
        logbook.record_sample("OLD-2", "S9", Analysis({"C": 0.3}), when=datetime(2026, 2, 28, 10, 30))
    db = sqlite3.connect(path)
    assert db.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    columns = [row[1] for row in db.execute("PRAGMA table_info(heat)")]
    assert columns[-2:] == ["shift_date", "shift"]
    db.close()
    backup = sqlite3.connect(tmp_path / "log.sqlite.v1.bak")
    assert backup.execute("PRAGMA user_version").fetchone()[0] == 1
    assert backup.execute("SELECT count(*) FROM heat").fetchone()[0] == 2
    backup.close()
    assert _integrity(path) == "ok"


def test_a_kill_during_the_upgrade_backup_leaves_no_backup_the_next_run_trusts(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    _v1_logbook(path)
    backup = tmp_path / "log.sqlite.v1.bak"
    # The child is killed after copying and checking, just before the copy takes its real name.
    script = tmp_path / "killed_backup.py"
    script.write_text(textwrap.dedent("""
        import os, sys, time
        from meltfix.records.logbook import Logbook
        def stall(*args):
            print("copied", flush=True)
            time.sleep(60)
        os.replace = stall
        Logbook(sys.argv[1])
        """), encoding="utf-8")
    child = subprocess.Popen([sys.executable, str(script), str(path)], stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    try:
        _wait_for(child, "copied")
        os.kill(child.pid, signal.SIGKILL)
    finally:
        child.kill()
        child.wait(timeout=10)
    assert not backup.exists()
    db = sqlite3.connect(path)
    assert db.execute("PRAGMA user_version").fetchone()[0] == 1  # not migrated without its backup
    db.close()
    # An empty .bak (as an older meltfix could leave) is not trusted either: a checked copy replaces it.
    backup.touch()
    with Logbook(path) as logbook:
        assert len(logbook.list_heats()) == 2
    copy = sqlite3.connect(backup)
    assert copy.execute("SELECT count(*) FROM heat").fetchone()[0] == 2
    assert copy.execute("PRAGMA user_version").fetchone()[0] == 1
    copy.close()
    assert _integrity(backup) == "ok"


def test_a_backup_that_cannot_be_written_stops_the_upgrade(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    _v1_logbook(path)
    (tmp_path / "log.sqlite.v1.bak").mkdir()  # a folder where the backup should go
    with pytest.raises(InputError) as caught:
        Logbook(path)
    assert "log.sqlite.v1.bak" in str(caught.value) and "not upgraded" in str(caught.value)
    db = sqlite3.connect(path)
    assert db.execute("PRAGMA user_version").fetchone()[0] == 1
    db.close()


@contextmanager
def _read_only(folder: Path):
    """A folder this process cannot write in, even as root (the immutable flag), else skip."""
    if os.geteuid() == 0:
        made = subprocess.run(["chattr", "+i", str(folder)], capture_output=True, text=True)
        if made.returncode != 0:
            pytest.skip(f"cannot make a read-only folder as root here: {made.stderr.strip()}")
        try:
            yield
        finally:
            subprocess.run(["chattr", "-i", str(folder)], check=True)
    else:
        folder.chmod(0o555)
        try:
            yield
        finally:
            folder.chmod(0o755)


@pytest.mark.parametrize("existing", [False, True])
def test_a_read_only_folder_is_named_not_the_logbook(tmp_path: Path, existing: bool) -> None:
    folder = tmp_path / "share"
    folder.mkdir()
    path = folder / "log.sqlite"
    if existing:
        with Logbook(path) as logbook:
            logbook.record_sample("H1", "S1", Analysis({"C": 0.2}), when=T0)
    with _read_only(folder), pytest.raises(InputError) as caught:
        Logbook(path)
    message = str(caught.value)
    assert message.startswith(f"{folder}: this folder cannot be written"), message
    assert "damaged" not in message and "\n" not in message


def test_a_sqlite_logbook_never_loads_the_postgresql_driver(tmp_path: Path) -> None:
    code = textwrap.dedent(f"""
        import sys
        from meltfix.shop.analysis import Analysis
        from meltfix.records.logbook import Logbook
        with Logbook({str(tmp_path / "log.sqlite")!r}) as logbook:
            logbook.record_sample("H1", "S1", Analysis({{"C": 0.2}}))
            assert len(logbook.list_heats()) == 1
        assert "psycopg" not in sys.modules, sorted(m for m in sys.modules if m.startswith("psycopg"))
        """)
    subprocess.run([sys.executable, "-c", code], check=True)


# -- on a PostgreSQL server -----------------------------------------------------------------------


def _tables(url: str) -> list[str]:
    import psycopg

    with psycopg.connect(url, autocommit=True) as conn:
        return [row[0] for row in conn.execute(
            "SELECT table_name FROM information_schema.tables WHERE table_schema = 'public' ORDER BY 1")]


def test_another_programs_database_is_refused_and_left_untouched(postgres_url: str) -> None:
    import psycopg

    with psycopg.connect(postgres_url, autocommit=True) as conn:
        conn.execute("CREATE TABLE customers (id integer PRIMARY KEY, name text)")
    with pytest.raises(InputError) as caught:
        Logbook(postgres_url)
    message = str(caught.value)
    assert "another program (tables: customers)" in message and "left untouched" in message
    assert _tables(postgres_url) == ["customers"]


def test_a_server_logbook_from_a_newer_meltfix_is_refused(postgres_url: str) -> None:
    import psycopg

    Logbook(postgres_url).close()
    with psycopg.connect(postgres_url, autocommit=True) as conn:
        conn.execute("UPDATE meta SET value = %s WHERE key = 'schema_version'", (str(SCHEMA_VERSION + 1),))
    with pytest.raises(InputError, match="newer meltfix"):
        Logbook(postgres_url)


def test_bad_server_logbooks_are_one_line_naming_the_logbook_without_its_password(postgres) -> None:
    cases = {
        postgres.url("postgres", password="wrong-secret"): "password authentication failed",
        postgres.url("no_such_db"): 'database "no_such_db" does not exist',
        f"postgresql://meltfix_admin:pw@127.0.0.1:{postgres.port + 1 if postgres.port < 65535 else 1}/x":
            "cannot connect to the logbook server",
        "postgresql://meltfix_admin:pw@127.0.0.1:notaport/x": "not a valid PostgreSQL URL",
        "postgresql://127.0.0.1/": "names no database",
        "mysql://u:pw@host/x": "'mysql' logbooks are not known",
    }
    for url, words in cases.items():
        with pytest.raises(InputError) as caught:
            Logbook(url)
        message = str(caught.value)
        assert words in message and "\n" not in message, message
        assert "wrong-secret" not in message and ":pw@" not in message and postgres.password not in message
    assert "logbook_" not in " ".join(_tables(postgres.url()))  # nothing written to the server's own database


def test_a_lost_server_is_one_line_nothing_half_written_and_the_next_write_succeeds(postgres, postgres_url) -> None:
    with Logbook(postgres_url) as logbook:
        logbook.record_additions("H1", [("FeMn", 10.0)], when=T0, prices={"FeMn": 1.0})
        postgres.stop()
        try:
            with pytest.raises(InputError) as caught:
                logbook.record_additions("H1", [("FeMn", 20.0)], when=T0, prices={"FeMn": 1.0})
            message = str(caught.value)
            assert "lost the connection to the logbook server" in message and "nothing was recorded" in message
            assert "\n" not in message and postgres.password not in message
            with pytest.raises(InputError, match="cannot connect to the logbook server"):
                logbook.record_additions("H1", [("FeMn", 20.0)], when=T0, prices={"FeMn": 1.0})
        finally:
            assert postgres.start().returncode == 0
        logbook.record_additions("H1", [("FeMn", 30.0)], when=T0, prices={"FeMn": 1.0})  # the server is back
        (summary,) = logbook.list_heats()
    assert (summary.corrections, summary.added_kg) == (2, 40.0)


def test_a_connection_lost_inside_a_write_leaves_nothing_of_it(postgres_url: str) -> None:
    import psycopg

    with Logbook(postgres_url) as logbook:
        with pytest.raises(InputError, match="lost the connection"), logbook._write() as db:
            db.execute("INSERT INTO heat (heat_id, started_at) VALUES ('H9', '2026-03-02T07:00:00')")
            with psycopg.connect(postgres_url, autocommit=True) as admin:
                admin.execute("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = "
                              "current_database() AND pid <> pg_backend_pid()")
            db.execute("INSERT INTO heat (heat_id, started_at) VALUES ('H10', '2026-03-02T07:00:00')")
        assert logbook.list_heats() == []


def test_several_stations_accepting_into_one_heat_never_share_a_sample_number(tmp_path: Path, place: str,
                                                                               book) -> None:
    """Four processes accept 8 plans each for one heat, each with its own analysis: 32 samples
    S1..S32 and 32 plans, none lost, none duplicated (the UNIQUE (heat, sample) constraint decides)."""
    Logbook(place).close()
    script = tmp_path / "station.py"
    script.write_text(textwrap.dedent("""
        import sys
        from meltfix.shop.analysis import Analysis
        from meltfix.shop.heat import Heat
        from meltfix.records.logbook import Logbook
        from meltfix.plan.planner import Planner
        from meltfix.shop.recipes import load_recipes
        from meltfix.tui.accept import record_accepted
        heat = Heat("KB-1", "Plain", 60000.0, Analysis({"C": 0.40, "Mn": 0.52}))
        plan = Planner(load_recipes(sys.argv[2])).plan(heat)
        station = int(sys.argv[3])
        with Logbook(sys.argv[1]) as logbook:
            for k in range(8):
                analysis = Analysis({"C": 0.30 + station / 100 + k / 1000, "Mn": 0.52})
                record_accepted(logbook, heat.with_changes(analysis=analysis), plan)
        """), encoding="utf-8")
    stations = [subprocess.Popen([sys.executable, str(script), place, str(tmp_path / "recipes"), str(n)],
                                 stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True) for n in range(4)]
    outputs = [p.communicate(timeout=240) for p in stations]
    assert [p.returncode for p in stations] == [0] * 4, outputs
    with Logbook(place) as logbook:
        history = logbook.heat_history("KB-1")
    assert sorted(s.sample_id for s in history.samples) == sorted(f"S{n}" for n in range(1, 33))
    assert len(history.plans) == 32
