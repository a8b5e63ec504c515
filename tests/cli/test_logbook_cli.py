"""`meltfix logbook copy` and logbooks given as PostgreSQL URLs on the command line.

The copy is checked the way a supervisor would: the report read from the copy equals the report
read from the source, row for row (its CSV, byte for byte), and each table's rows are counted
independently with SQLite's own ``sqlite3`` and PostgreSQL's ``psycopg``.
"""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest

from meltfix.cli import main
from meltfix.records.demo_logbook import demo_logbook_path
from meltfix.records.logbook import SCHEMA_VERSION, Logbook

TABLES = ("heat", "sample", "burn", "plan", "plan_line", "addition_batch", "addition")


def _counts(place: str) -> dict[str, int]:
    if "://" in place:
        import psycopg

        with psycopg.connect(place) as conn:
            return {t: conn.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in TABLES}
    db = sqlite3.connect(place)
    try:
        return {t: db.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in TABLES}
    finally:
        db.close()


def _report_csv(place: str, folder: Path, name: str) -> bytes:
    target = folder / f"{name}.csv"
    assert main(["report", "--logbook", place, "--csv", str(target)]) == 0
    return target.read_bytes()


def test_copy_to_postgresql_and_back_keeps_the_report_row_for_row(postgres_url: str, tmp_path: Path,
                                                                     capsys: pytest.CaptureFixture[str]) -> None:
    source = str(demo_logbook_path())
    back = str(tmp_path / "back.sqlite")
    assert main(["logbook", "copy", source, postgres_url]) == 0
    assert main(["logbook", "copy", postgres_url, back]) == 0
    out = capsys.readouterr().out
    assert "every table checked" in out and "***" in out  # the URL's password is never printed
    expected = _counts(source)
    assert _counts(postgres_url) == expected == _counts(back)
    assert expected["heat"] > 50 and expected["addition"] > 0
    report = _report_csv(source, tmp_path, "source")
    assert _report_csv(postgres_url, tmp_path, "server") == report
    assert _report_csv(back, tmp_path, "back") == report
    with Logbook(source) as one, Logbook(postgres_url) as other:
        heat = one.list_heats()[3].heat_id
        assert other.heat_history(heat) == one.heat_history(heat)


def test_copy_refuses_a_target_holding_the_same_heats_unless_told_to_skip(tmp_path: Path,
                                                                          capsys: pytest.CaptureFixture[str]) -> None:
    source = str(demo_logbook_path())
    target = str(tmp_path / "target.sqlite")
    with Logbook(source) as full, Logbook(target) as part:
        first = full.heat_history(full.list_heats()[0].heat_id)
        for sample in first.samples:
            part.record_sample(first.heat_id, sample.sample_id, sample.analysis, when=sample.taken_at)
    before = _counts(target)
    assert main(["logbook", "copy", source, target]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and target in err and "already holds 1 of the same heats" in err
    assert _counts(target) == before  # nothing written
    assert main(["logbook", "copy", source, target, "--skip-existing"]) == 0
    after, expected = _counts(target), _counts(source)
    assert after["heat"] == expected["heat"]
    with Logbook(target) as logbook:
        assert len(logbook.heat_history(first.heat_id).plans) == 0  # the held heat is left as it was


def _newer(url: str) -> None:
    import psycopg

    Logbook(url).close()
    with psycopg.connect(url, autocommit=True) as conn:
        conn.execute("UPDATE meta SET value = %s WHERE key = 'schema_version'", (str(SCHEMA_VERSION + 1),))


def _another_program(url: str) -> None:
    import psycopg

    with psycopg.connect(url, autocommit=True) as conn:
        conn.execute("CREATE TABLE invoices (id integer PRIMARY KEY)")


@pytest.mark.parametrize("case", ["malformed", "unreachable", "wrong password", "another program", "newer schema"])
@pytest.mark.parametrize("command", [["report"], ["recoveries"], ["replay", "--heat", "KB-1"]])
def test_bad_server_logbooks_are_one_line_exit_2_nothing_written(postgres, postgres_url: str, case: str,
                                                                 command: list[str],
                                                                 capsys: pytest.CaptureFixture[str]) -> None:
    url = {"malformed": "postgresql://meltfix_admin:pw@127.0.0.1:port/x",
           "unreachable": f"postgresql://meltfix_admin:pw@127.0.0.1:{postgres.port + 1}/x",
           "wrong password": postgres_url.replace(postgres.password, "not-the-password"),
           }.get(case, postgres_url)
    if case == "another program":
        _another_program(url)
    elif case == "newer schema":
        _newer(url)
    before = _tables(postgres_url)
    assert main([*command, "--logbook", url]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and err.startswith("meltfix: postgresql://"), err
    assert postgres.password not in err and ":pw@" not in err and "not-the-password" not in err
    assert _tables(postgres_url) == before


def _tables(url: str) -> list[str]:
    import psycopg

    with psycopg.connect(url) as conn:
        return [row[0] for row in conn.execute(
            "SELECT table_name FROM information_schema.tables WHERE table_schema = 'public' ORDER BY 1")]
