"""The logbook's tables, written once for every back end, and the steps from each older version.

The statements are plain SQL with three words left for the back end to fill in (``{id}``, ``{real}``,
``{text}``: the few types SQLite and PostgreSQL spell differently), and ``?`` placeholders that the
back end turns into its own. The schema version and the "this is a meltfix logbook" mark are kept
where each engine keeps such things (SQLite: ``user_version`` and ``application_id``; PostgreSQL:
the ``meta`` table); :func:`prepare` reads them, refuses what is not ours, and creates or migrates.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import datetime

from meltfix.base.errors import InputError
from meltfix.records.logbook.backend import Backend
from meltfix.records.logbook.records import Shift

SCHEMA_VERSION = 2
# "mfxl" as a big-endian 32-bit number: marks a database as a meltfix logbook.
APPLICATION_ID = 0x6D66786C

TABLES = (
    """CREATE TABLE meta (
        key   {text} PRIMARY KEY,
        value {text} NOT NULL)""",
    """CREATE TABLE heat (
        heat_id     {text} PRIMARY KEY,
        grade       {text},
        bath_kg     {real},
        capacity_kg {real},
        started_at  {text} NOT NULL,
        shift_date  {text} NOT NULL DEFAULT '',
        shift       {text} NOT NULL DEFAULT '')""",
    "CREATE INDEX heat_started ON heat (started_at)",
    # UNIQUE (heat_id, sample_id): two stations can never record the same sample number of a heat.
    """CREATE TABLE sample (
        id            {id},
        heat_id       {text} NOT NULL REFERENCES heat (heat_id),
        sample_id     {text} NOT NULL,
        taken_at      {text} NOT NULL,
        analysis      {text} NOT NULL,
        below_limit   {text} NOT NULL,
        temperature_c {real},
        flags         {text} NOT NULL,
        UNIQUE (heat_id, sample_id))""",
    """CREATE TABLE burn (
        sample_row  INTEGER NOT NULL REFERENCES sample (id),
        burn_no     INTEGER NOT NULL,
        analysis    {text} NOT NULL,
        below_limit {text} NOT NULL,
        accepted    INTEGER NOT NULL,
        PRIMARY KEY (sample_row, burn_no))""",
    """CREATE TABLE plan (
        id         {id},
        heat_id    {text} NOT NULL REFERENCES heat (heat_id),
        made_at    {text} NOT NULL,
        grade      {text} NOT NULL,
        status     {text} NOT NULL,
        bath_kg    {real} NOT NULL,
        final_kg   {real} NOT NULL,
        total_cost {real} NOT NULL,
        currency   {text} NOT NULL,
        heat_toml  {text} NOT NULL,
        heat_extra {text} NOT NULL,
        options    {text} NOT NULL,
        prices     {text} NOT NULL,
        result     {text} NOT NULL)""",
    "CREATE INDEX plan_heat ON plan (heat_id)",
    """CREATE TABLE plan_line (
        plan_id      INTEGER NOT NULL REFERENCES plan (id),
        line_no      INTEGER NOT NULL,
        material     {text} NOT NULL,
        kg           {real} NOT NULL,
        price_per_kg {real} NOT NULL,
        cost         {real} NOT NULL,
        PRIMARY KEY (plan_id, line_no))""",
    """CREATE TABLE addition_batch (
        id       {id},
        heat_id  {text} NOT NULL REFERENCES heat (heat_id),
        added_at {text} NOT NULL,
        plan_id  INTEGER REFERENCES plan (id))""",
    "CREATE INDEX batch_heat ON addition_batch (heat_id)",
    """CREATE TABLE addition (
        batch_id     INTEGER NOT NULL REFERENCES addition_batch (id),
        line_no      INTEGER NOT NULL,
        material     {text} NOT NULL,
        kg           {real} NOT NULL,
        price_per_kg {real},
        cost         {real},
        PRIMARY KEY (batch_id, line_no))""",
)

# The tables that hold a shop's history, parents first (the order a copy fills them in).
HISTORY_TABLES = ("heat", "sample", "burn", "plan", "plan_line", "addition_batch", "addition")


def _v1_to_v2(db: Backend) -> None:
    """v1 worked the shift out when reading; v2 stores each heat's shift so a shift can be listed."""
    db.execute("ALTER TABLE heat ADD COLUMN shift_date {text} NOT NULL DEFAULT ''".format(**db.types))
    db.execute("ALTER TABLE heat ADD COLUMN shift {text} NOT NULL DEFAULT ''".format(**db.types))
    rows = db.execute("SELECT heat_id, started_at FROM heat").fetchall()
    for heat_id, started_at in rows:
        shift = Shift.of(datetime.fromisoformat(started_at))
        db.execute("UPDATE heat SET shift_date = ?, shift = ? WHERE heat_id = ?",
                   (shift.shift_date.isoformat(), shift.name, heat_id))


# MIGRATIONS[v] turns a version-v logbook into version v + 1, on any back end.
MIGRATIONS: dict[int, Callable[[Backend], None]] = {1: _v1_to_v2}


def refusal(backend: Backend, message: str) -> InputError:
    """A logbook that is not ours, or not one this meltfix can read: named, and never written to."""
    return InputError(backend.location, "", f"{message}; it was left untouched — give another logbook with "
                                            "--logbook or $MELTFIX_LOGBOOK")


def prepare(backend: Backend, create: bool) -> None:
    """Check that the back end holds a meltfix logbook this version reads; create or migrate it.

    Anything else (another program's tables, a newer version, a damaged file) is refused before a
    single byte is written.
    """
    app_id, version, tables = backend.identify()
    if not tables:
        if not create:
            raise InputError(backend.location, "", "holds no logbook yet (one is created when the first heat is "
                                                   "recorded)")
    elif app_id != APPLICATION_ID:
        shown = ", ".join(tables[:5]) + (" ..." if len(tables) > 5 else "")
        raise refusal(backend, f"is a database of another program (tables: {shown}), not a meltfix logbook")
    elif version > SCHEMA_VERSION:
        raise refusal(backend, f"was written by a newer meltfix (logbook version {version}; this one reads "
                               f"up to {SCHEMA_VERSION})")
    elif version not in MIGRATIONS and version != SCHEMA_VERSION:
        raise refusal(backend, f"has no logbook version this meltfix knows ({version}; it reads "
                               f"versions {min(MIGRATIONS)} to {SCHEMA_VERSION})")
    else:
        problem = backend.damage()
        if problem:
            raise refusal(backend, f"is damaged ({problem})")
    backend.configure()
    if tables and version == SCHEMA_VERSION:
        return
    if tables:
        backend.back_up(version)
    # Created or migrated inside one write transaction, re-checked there: another station may
    # have done it in the meantime.
    backend.begin_write()
    try:
        backend.lock_schema()
        app_id, version, tables = backend.identify()
        if not tables:
            for statement in TABLES:
                backend.execute(statement.format(**backend.types))
        elif version < SCHEMA_VERSION:
            for step in range(version, SCHEMA_VERSION):
                MIGRATIONS[step](backend)
        backend.stamp(APPLICATION_ID, SCHEMA_VERSION)
        backend.commit()
    except BaseException:
        backend.rollback()
        raise
