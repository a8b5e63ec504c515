"""Moving a shop's history from one logbook to another (SQLite to PostgreSQL and back).

Every heat with its samples, burns, plans, plan lines, addition rounds and addition lines is read
from the source in one snapshot and written to the target in one transaction. Row ids differ
between logbooks, so rows are compared by what identifies them in the shop's terms: a heat by its
id, a sample by (heat, sample id), a plan or an addition round by (heat, its place in the heat's
order). Before the transaction commits, the target's rows of the copied heats are read back and
must equal the source's, table by table, and every table's count must have grown by exactly the
rows copied; otherwise nothing is written.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

from meltfix.base.errors import InputError
from meltfix.records.logbook.backend import Backend
from meltfix.records.logbook.schema import HISTORY_TABLES
from meltfix.records.logbook.store import Logbook

_HEAT = "heat_id, grade, bath_kg, capacity_kg, started_at, shift_date, shift"
_SAMPLE = "heat_id, sample_id, taken_at, analysis, below_limit, temperature_c, flags"
_BURN = "burn_no, analysis, below_limit, accepted"
_PLAN = ("heat_id, made_at, grade, status, bath_kg, final_kg, total_cost, currency, heat_toml, heat_extra, options, "
         "prices, result")
_LINE = "line_no, material, kg, price_per_kg, cost"
_BATCH = "heat_id, added_at"
# How many leading fields of each table's rows identify a row (the rest is its content).
_KEY_LENGTH = {"heat": 1, "sample": 2, "burn": 3, "plan": 2, "plan_line": 3, "addition_batch": 2, "addition": 3}

Rows = dict[str, list[tuple]]


@dataclass(frozen=True)
class TableCopied:
    """One table of a copy: rows of the copied heats in the source, and the target before and after."""

    table: str
    source_rows: int
    target_before: int
    target_after: int


@dataclass(frozen=True)
class CopyResult:
    heats: int
    """Heats copied."""
    skipped: tuple[str, ...]
    """Heats the target held already, left as they were there (--skip-existing)."""
    tables: tuple[TableCopied, ...]


def _history(db: Backend, heat_ids: set[str] | None = None) -> Rows:
    """The history tables' rows keyed by the shop's identifiers (no row ids), of the given heats or all."""
    def rows(sql: str) -> list[tuple]:
        return [tuple(row) for row in db.execute(sql).fetchall()]

    def wanted(heat_id: str) -> bool:
        return heat_ids is None or heat_id in heat_ids

    out: Rows = {"heat": [row for row in rows(f"SELECT {_HEAT} FROM heat") if wanted(row[0])]}
    samples = {row[0]: row[1:] for row in rows(f"SELECT id, {_SAMPLE} FROM sample ORDER BY id") if wanted(row[1])}
    out["sample"] = list(samples.values())
    out["burn"] = [(*samples[row[0]][:2], *row[1:]) for row in rows(
        f"SELECT sample_row, {_BURN} FROM burn ORDER BY sample_row, burn_no") if row[0] in samples]
    plans = _numbered(rows(f"SELECT id, {_PLAN} FROM plan ORDER BY id"), wanted)
    out["plan"] = [(*key, *row[2:]) for key, row in plans.values()]
    out["plan_line"] = [(*plans[row[0]][0], *row[1:]) for row in rows(
        f"SELECT plan_id, {_LINE} FROM plan_line ORDER BY plan_id, line_no") if row[0] in plans]
    batches = _numbered(rows(f"SELECT id, {_BATCH}, plan_id FROM addition_batch ORDER BY id"), wanted)
    out["addition_batch"] = [(*key, row[2], None if row[3] is None else plans[row[3]][0][1])
                             for key, row in batches.values()]
    out["addition"] = [(*batches[row[0]][0], *row[1:]) for row in rows(
        f"SELECT batch_id, {_LINE} FROM addition ORDER BY batch_id, line_no") if row[0] in batches]
    return {table: sorted(found, key=_key_of(table)) for table, found in out.items()}


def _key_of(table: str) -> Callable[[tuple], tuple]:
    """A row's identifying fields: rows sort by them (their content may hold None, which does not sort)."""
    length = _KEY_LENGTH[table]
    return lambda row: row[:length]


def _numbered(rows: list[tuple], wanted: Callable[[str], bool]) -> dict[int, tuple[tuple[str, int], tuple]]:
    """Rows (id, heat_id, ...) in id order -> {id: ((heat_id, place in the heat), row)}."""
    seen: dict[str, int] = {}
    out = {}
    for row in rows:
        if wanted(row[1]):
            seen[row[1]] = seen.get(row[1], 0) + 1
            out[row[0]] = ((row[1], seen[row[1]]), row)
    return out


def _write(db: Backend, history: Rows) -> None:
    """Insert the rows into a logbook whose heats they do not share, mapping the shop's keys to new ids."""
    def placeholders(columns: str, extra: int = 0) -> str:
        return ", ".join("?" * (columns.count(",") + 1 + extra))

    db.executemany(f"INSERT INTO heat ({_HEAT}) VALUES ({placeholders(_HEAT)})", history["heat"])
    sample_ids = {row[:2]: db.execute(f"INSERT INTO sample ({_SAMPLE}) VALUES ({placeholders(_SAMPLE)}) RETURNING id",
                                      row).fetchone()[0] for row in history["sample"]}
    db.executemany(f"INSERT INTO burn (sample_row, {_BURN}) VALUES ({placeholders(_BURN, 1)})",
                   [(sample_ids[row[:2]], *row[2:]) for row in history["burn"]])
    plan_ids = {row[:2]: db.execute(f"INSERT INTO plan ({_PLAN}) VALUES ({placeholders(_PLAN)}) RETURNING id",
                                    (row[0], *row[2:])).fetchone()[0] for row in history["plan"]}
    db.executemany(f"INSERT INTO plan_line (plan_id, {_LINE}) VALUES ({placeholders(_LINE, 1)})",
                   [(plan_ids[row[:2]], *row[2:]) for row in history["plan_line"]])
    batch_ids = {row[:2]: db.execute(
        "INSERT INTO addition_batch (heat_id, added_at, plan_id) VALUES (?, ?, ?) RETURNING id",
        (row[0], row[2], None if row[3] is None else plan_ids[(row[0], row[3])])).fetchone()[0]
        for row in history["addition_batch"]}
    db.executemany(f"INSERT INTO addition (batch_id, {_LINE}) VALUES ({placeholders(_LINE, 1)})",
                   [(batch_ids[row[:2]], *row[2:]) for row in history["addition"]])


def _counts(db: Backend) -> dict[str, int]:
    return {table: int(db.execute(f"SELECT count(*) FROM {table}").fetchone()[0]) for table in HISTORY_TABLES}


def copy_logbook(source: Logbook, target: Logbook, *, skip_existing: bool = False) -> CopyResult:
    """Copy every heat of ``source`` into ``target``, checked table by table before it is committed.

    A target that already holds any of the same heats is refused (nothing written) unless
    ``skip_existing``: those heats are then left as they are in the target and the others copied.
    """
    if str(source.path) == str(target.path):
        raise InputError(target.path, "", "is the source itself; give another logbook to copy into")
    with source.reading():
        try:
            history = _history(source._db)
        except source._db.errors as exc:
            raise source._db.failure(exc, "read") from None
        shop_name = source.shop_name
    with target._write() as db:
        held = {row[0] for row in db.execute("SELECT heat_id FROM heat").fetchall()}
        shared = sorted(held.intersection(row[0] for row in history["heat"]))
        if shared and not skip_existing:
            shown = ", ".join(shared[:5]) + (" ..." if len(shared) > 5 else "")
            raise InputError(target.path, "", f"already holds {len(shared)} of the same heats ({shown}); nothing "
                                              "was copied — give --skip-existing to copy only the others")
        if shared:
            history = _history_without(history, set(shared))
        before = _counts(db)
        _write(db, history)
        if shop_name is not None:
            db.execute("INSERT INTO meta (key, value) VALUES ('shop_name', ?) ON CONFLICT (key) DO NOTHING",
                       (shop_name,))
        after = _counts(db)
        copied = _history(db, {row[0] for row in history["heat"]})
        for table in HISTORY_TABLES:
            if after[table] - before[table] != len(history[table]) or copied[table] != history[table]:
                raise InputError(target.path, table, "the copy does not match the source; nothing was copied")
    return CopyResult(len(history["heat"]), tuple(shared),
                      tuple(TableCopied(t, len(history[t]), before[t], after[t]) for t in HISTORY_TABLES))


def _history_without(history: Rows, heat_ids: set[str]) -> Rows:
    return {table: [row for row in rows if row[0] not in heat_ids] for table, rows in history.items()}
