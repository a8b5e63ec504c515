"""The heat logbook: every heat, sample (with its burns), plan (with its inputs) and actual addition.

One SQLite file (stdlib ``sqlite3``), in WAL mode so a reader never blocks the writer, with a busy
timeout so two meltfix processes can write at once. Every write is one ``BEGIN IMMEDIATE``
transaction: a crash or a kill loses at most the write in progress, never one already returned.

The file is recognised by its SQLite ``application_id``; its schema version is ``user_version``
and older versions are migrated in place (after a backup copy beside it). A file that is not a
logbook (damaged, or another program's SQLite database) is refused with one clear message and
never written to.

Times are the shop's wall-clock time, stored naive to the second; an aware datetime is first
converted to this computer's local time.
"""

from __future__ import annotations

import json
import math
import os
import sqlite3
import threading
import tomllib
from collections.abc import Collection, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import asdict, dataclass, fields
from datetime import date, datetime, time, timedelta
from pathlib import Path
from types import MappingProxyType
from typing import TYPE_CHECKING

from meltfix.analysis import Analysis
from meltfix.errors import InputError
from meltfix.heat import Heat, heat_to_toml, parse_heat

if TYPE_CHECKING:
    from meltfix.planner import Plan, PlanOptions
    from meltfix.recipes import RecipeBook
    from meltfix.spectro import SpectroSample

ENV_VAR = "MELTFIX_LOGBOOK"
SCHEMA_VERSION = 2
# "mfxl" as a big-endian 32-bit number: marks the file as a meltfix logbook (PRAGMA application_id).
APPLICATION_ID = 0x6D66786C
BUSY_TIMEOUT_S = 15.0
_SQLITE_MAGIC = b"SQLite format 3\x00"

# Three eight-hour shifts starting at 06:00, 14:00 and 22:00 (common practice); the night shift
# belongs to the date on which it began.
SHIFT_STARTS = (("early", 6), ("late", 14), ("night", 22))

_SCHEMA = (
    """CREATE TABLE meta (
        key   TEXT PRIMARY KEY,
        value TEXT NOT NULL)""",
    """CREATE TABLE heat (
        heat_id     TEXT PRIMARY KEY,
        grade       TEXT,
        bath_kg     REAL,
        capacity_kg REAL,
        started_at  TEXT NOT NULL,
        shift_date  TEXT NOT NULL DEFAULT '',
        shift       TEXT NOT NULL DEFAULT '')""",
    "CREATE INDEX heat_started ON heat (started_at)",
    """CREATE TABLE sample (
        id            INTEGER PRIMARY KEY,
        heat_id       TEXT NOT NULL REFERENCES heat (heat_id),
        sample_id     TEXT NOT NULL,
        taken_at      TEXT NOT NULL,
        analysis      TEXT NOT NULL,
        below_limit   TEXT NOT NULL,
        temperature_c REAL,
        flags         TEXT NOT NULL,
        UNIQUE (heat_id, sample_id))""",
    """CREATE TABLE burn (
        sample_row  INTEGER NOT NULL REFERENCES sample (id),
        burn_no     INTEGER NOT NULL,
        analysis    TEXT NOT NULL,
        below_limit TEXT NOT NULL,
        accepted    INTEGER NOT NULL,
        PRIMARY KEY (sample_row, burn_no))""",
    """CREATE TABLE plan (
        id         INTEGER PRIMARY KEY,
        heat_id    TEXT NOT NULL REFERENCES heat (heat_id),
        made_at    TEXT NOT NULL,
        grade      TEXT NOT NULL,
        status     TEXT NOT NULL,
        bath_kg    REAL NOT NULL,
        final_kg   REAL NOT NULL,
        total_cost REAL NOT NULL,
        currency   TEXT NOT NULL,
        heat_toml  TEXT NOT NULL,
        heat_extra TEXT NOT NULL,
        options    TEXT NOT NULL,
        prices     TEXT NOT NULL,
        result     TEXT NOT NULL)""",
    "CREATE INDEX plan_heat ON plan (heat_id)",
    """CREATE TABLE plan_line (
        plan_id      INTEGER NOT NULL REFERENCES plan (id),
        line_no      INTEGER NOT NULL,
        material     TEXT NOT NULL,
        kg           REAL NOT NULL,
        price_per_kg REAL NOT NULL,
        cost         REAL NOT NULL,
        PRIMARY KEY (plan_id, line_no))""",
    """CREATE TABLE addition_batch (
        id       INTEGER PRIMARY KEY,
        heat_id  TEXT NOT NULL REFERENCES heat (heat_id),
        added_at TEXT NOT NULL,
        plan_id  INTEGER REFERENCES plan (id))""",
    "CREATE INDEX batch_heat ON addition_batch (heat_id)",
    """CREATE TABLE addition (
        batch_id     INTEGER NOT NULL REFERENCES addition_batch (id),
        line_no      INTEGER NOT NULL,
        material     TEXT NOT NULL,
        kg           REAL NOT NULL,
        price_per_kg REAL,
        cost         REAL,
        PRIMARY KEY (batch_id, line_no))""",
)


# ---------------------------------------------------------------------------------------------
# Records handed out by the logbook (all frozen; times naive shop time)


@dataclass(frozen=True, order=True)
class Shift:
    """One shift: the date it began and its name ("early", "late" or "night")."""

    shift_date: date
    name: str

    @classmethod
    def of(cls, when: datetime) -> Shift:
        """The shift a moment falls in."""
        starts = [(name, datetime.combine(when.date(), time(hour))) for name, hour in SHIFT_STARTS]
        for name, start in reversed(starts):
            if when >= start:
                return cls(start.date(), name)
        # Before the first start of the day: still the previous day's last shift.
        return cls(when.date() - timedelta(days=1), SHIFT_STARTS[-1][0])

    @property
    def label(self) -> str:
        return f"{self.shift_date.isoformat()} {self.name}"


@dataclass(frozen=True)
class LineRecord:
    """One material of a plan or of an actual addition."""

    material: str
    kg: float
    """Mass [kg]."""
    price_per_kg: float | None
    """Price in force when recorded [currency/kg]; None when no price was known."""
    cost: float | None
    """kg x price [currency]; None when no price was known."""


@dataclass(frozen=True)
class SampleRecord:
    """A bath sample: the analysis used (the average of the accepted burns) and the burns themselves."""

    heat_id: str
    sample_id: str
    taken_at: datetime
    analysis: Analysis
    burns: tuple[Analysis, ...]
    """Every burn sparked, in order, including rejected ones."""
    rejected_burns: frozenset[int]
    """Numbers (1-based) of the burns left out of the average."""
    temperature_c: float | None
    """Bath temperature at the sample [°C], when measured."""
    flags: tuple[str, ...]
    """Remarks on the sample (e.g. a burn that disagreed)."""


@dataclass(frozen=True)
class PlanRecord:
    """A plan as it was made: its inputs (enough to make it again) and its result."""

    plan_id: int
    heat_id: str
    made_at: datetime
    heat: Heat
    """The heat exactly as planned (bath, analysis and this heat's overrides)."""
    heat_toml: str
    """The same heat as HEAT.toml text."""
    options: PlanOptions
    status: str
    """"optimal" or "closest"."""
    lines: tuple[LineRecord, ...]
    total_cost: float
    """Cost of the planned additions [currency]."""
    bath_kg: float
    final_kg: float
    """Predicted bath mass after the additions [kg]."""
    predicted_pct: Mapping[str, float]
    """Predicted analysis after the additions [wt %]."""
    prices: Mapping[str, float]
    """Prices in force for every material known when planning [currency/kg]."""
    currency: str
    result: Mapping[str, object]
    """The plan's full JSON object (``Plan.to_json()``) as recorded."""


@dataclass(frozen=True)
class AdditionsRecord:
    """One round of additions actually made to the heat (one correction)."""

    batch_id: int
    heat_id: str
    added_at: datetime
    plan_id: int | None
    """The plan the additions were made from; None when made without one."""
    lines: tuple[LineRecord, ...]

    @property
    def total_kg(self) -> float:
        return math.fsum(line.kg for line in self.lines)

    @property
    def total_cost(self) -> float:
        """Cost of the priced lines [currency]."""
        return math.fsum(line.cost for line in self.lines if line.cost is not None)


HeatEvent = SampleRecord | PlanRecord | AdditionsRecord


def event_time(event: HeatEvent) -> datetime:
    """When a history event happened."""
    if isinstance(event, SampleRecord):
        return event.taken_at
    if isinstance(event, PlanRecord):
        return event.made_at
    return event.added_at


@dataclass(frozen=True)
class HeatHistory:
    """Everything recorded for one heat. Each tuple is in time order."""

    heat_id: str
    grade: str | None
    """The grade of the latest plan; None when the heat was never planned."""
    started_at: datetime
    shift: Shift
    bath_kg: float | None
    """Bath mass when the heat was first planned [kg]."""
    samples: tuple[SampleRecord, ...]
    plans: tuple[PlanRecord, ...]
    additions: tuple[AdditionsRecord, ...]

    @property
    def events(self) -> tuple[HeatEvent, ...]:
        """Samples, plans and additions merged in time order (at the same second: sample, plan, additions)."""
        ranked = [(s.taken_at, 0, k, s) for k, s in enumerate(self.samples)]
        ranked += [(p.made_at, 1, k, p) for k, p in enumerate(self.plans)]
        ranked += [(a.added_at, 2, k, a) for k, a in enumerate(self.additions)]
        return tuple(item[3] for item in sorted(ranked, key=lambda item: item[:3]))

    @property
    def corrections(self) -> int:
        """Rounds of additions made."""
        return len(self.additions)


@dataclass(frozen=True)
class HeatSummary:
    """One line of the heat list: who, when, and what the additions cost."""

    heat_id: str
    grade: str | None
    started_at: datetime
    shift: Shift
    bath_kg: float | None
    """Bath mass when the heat was first planned [kg]."""
    samples: int
    plans: int
    corrections: int
    """Rounds of additions actually made."""
    added_kg: float
    """Mass actually added [kg]."""
    planned_cost: float
    """Total of the plans the additions were made from [currency]."""
    actual_cost: float
    """Cost of the additions actually made [currency] (priced lines only)."""
    unpriced_lines: int
    """Actual addition lines recorded without a known price."""
    currency: str

    @property
    def cost(self) -> float:
        return self.actual_cost

    @property
    def cost_per_t(self) -> float | None:
        """Actual cost per tonne of bath [currency/t]; None when the bath mass is unknown."""
        if not self.bath_kg:
            return None
        return self.actual_cost / (self.bath_kg / 1000.0)


@dataclass(frozen=True)
class CostLine:
    """A planned or actual line with the heat it belongs to, for the cost report."""

    heat_id: str
    source: str
    """"planned" (a plan the additions were made from) or "actual"."""
    material: str
    kg: float
    price_per_kg: float | None
    cost: float | None


# ---------------------------------------------------------------------------------------------
# Where the logbook lives


def default_logbook_path() -> Path:
    """$MELTFIX_LOGBOOK, else ``meltfix/logbook.sqlite`` in the user's data folder.

    The data folder is $XDG_DATA_HOME (when set to an absolute path), else ~/.local/share; on
    Windows %LOCALAPPDATA%.
    """
    configured = os.environ.get(ENV_VAR, "").strip()
    if configured:
        return Path(configured).expanduser()
    if os.name == "nt" and os.environ.get("LOCALAPPDATA"):
        base = Path(os.environ["LOCALAPPDATA"])
    else:
        xdg = os.environ.get("XDG_DATA_HOME", "").strip()
        base = Path(xdg) if xdg and Path(xdg).is_absolute() else Path.home() / ".local" / "share"
    return base / "meltfix" / "logbook.sqlite"


def _stamp(when: datetime | None) -> datetime:
    if when is None:
        when = datetime.now()
    elif when.tzinfo is not None:
        when = when.astimezone().replace(tzinfo=None)
    return when.replace(microsecond=0)


def _iso(when: datetime) -> str:
    return when.isoformat(timespec="seconds")


def _unit_price(cost: float, kg: float) -> float:
    # A plan line carries kg and cost = kg x price: rounding to 1e-9 undoes the division's last-bit noise.
    return round(cost / kg, 9)


def _analysis_json(analysis: Analysis) -> tuple[str, str]:
    return json.dumps(dict(analysis.pct)), json.dumps(sorted(analysis.below_limit))


def _analysis_from(pct_json: str, below_json: str) -> Analysis:
    return Analysis(pct=json.loads(pct_json), below_limit=frozenset(json.loads(below_json)))


# Heat fields HEAT.toml text (heat_to_toml) does not carry, kept beside it so a plan can be made again.
def _heat_extra(heat: Heat) -> str:
    return json.dumps({
        "stage": heat.stage,
        "max_temp_drop_c": heat.max_temp_drop_c,
        "switched_off": sorted(heat.switched_off),
        "locked_kg": dict(heat.locked_kg),
        "price_per_kg": dict(heat.price_per_kg),
        "stock_kg": dict(heat.stock_kg),
    })


def _heat_from(toml_text: str, extra_json: str, source: str, heat_id: str) -> Heat:
    try:
        data = tomllib.loads(toml_text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(source, "heat_toml", f"the recorded heat is not valid TOML ({exc})") from None
    heat = parse_heat(data, source, default_id=heat_id)
    extra = json.loads(extra_json)
    return heat.with_changes(
        stage=extra["stage"],
        max_temp_drop_c=extra["max_temp_drop_c"],
        switched_off=frozenset(extra["switched_off"]),
        locked_kg=MappingProxyType(extra["locked_kg"]),
        price_per_kg=MappingProxyType(extra["price_per_kg"]),
        stock_kg=MappingProxyType(extra["stock_kg"]),
    )


def _options_from(options_json: str) -> PlanOptions:
    from meltfix.planner import PlanOptions

    # Options added or dropped in later versions of meltfix keep their defaults.
    known = {f.name for f in fields(PlanOptions)}
    return PlanOptions(**{k: v for k, v in json.loads(options_json).items() if k in known})


# ---------------------------------------------------------------------------------------------
# Schema versions


def _v1_to_v2(db: sqlite3.Connection) -> None:
    """v1 worked the shift out when reading; v2 stores each heat's shift so a shift can be listed."""
    db.execute("ALTER TABLE heat ADD COLUMN shift_date TEXT NOT NULL DEFAULT ''")
    db.execute("ALTER TABLE heat ADD COLUMN shift TEXT NOT NULL DEFAULT ''")
    rows = db.execute("SELECT heat_id, started_at FROM heat").fetchall()
    for heat_id, started_at in rows:
        shift = Shift.of(datetime.fromisoformat(started_at))
        db.execute("UPDATE heat SET shift_date = ?, shift = ? WHERE heat_id = ?",
                   (shift.shift_date.isoformat(), shift.name, heat_id))


# _MIGRATIONS[v] turns a version-v logbook into version v + 1.
_MIGRATIONS = {1: _v1_to_v2}


# ---------------------------------------------------------------------------------------------


class Logbook:
    """The shop's logbook file. Safe to share between threads; several processes may write at once.

    ``book`` (optional) lets the logbook price actual additions from the recipe book and check
    material names. ``create=False`` refuses a path where no logbook exists yet. ``durable=False``
    skips the wait for the disk on each commit: only for a scratch file that is thrown away if
    the program stops (a kill still loses nothing committed; a power cut might).
    """

    def __init__(self, path: Path | str | None = None, book: RecipeBook | None = None, *,
                 create: bool = True, durable: bool = True) -> None:
        self.path = Path(path).expanduser() if path is not None else default_logbook_path()
        self.book = book
        self._durable = durable
        self._lock = threading.RLock()
        self._db = self._open(create)

    # -- opening -------------------------------------------------------------------------------
    def _refuse(self, message: str) -> InputError:
        return InputError(self.path, "", f"{message}; it was left untouched — give another file with "
                                         "--logbook or $MELTFIX_LOGBOOK")

    def _check_header(self) -> None:
        """Refuse a non-empty file that does not start as an SQLite database does."""
        try:
            with self.path.open("rb") as handle:
                head = handle.read(100)
        except OSError as exc:
            raise InputError(self.path, "", f"the logbook cannot be read ({exc.strerror})") from None
        if head and (len(head) < 100 or not head.startswith(_SQLITE_MAGIC)):
            raise self._refuse("is not a meltfix logbook (not an SQLite database, or a damaged one)")

    def _open(self, create: bool) -> sqlite3.Connection:
        path = self.path
        if path.is_dir():
            raise InputError(path, "", "is a folder, not a logbook file")
        if path.exists():
            self._check_header()
        elif not create:
            raise InputError(path, "", "no logbook here yet (one is created when the first heat is recorded)")
        else:
            try:
                path.parent.mkdir(parents=True, exist_ok=True)
            except OSError as exc:
                raise InputError(path.parent, "", f"cannot create the logbook's folder ({exc.strerror})") from None
        try:
            db = sqlite3.connect(path, timeout=BUSY_TIMEOUT_S, isolation_level=None, check_same_thread=False)
        except sqlite3.Error as exc:
            raise InputError(path, "", f"the logbook cannot be opened ({exc})") from None
        try:
            self._prepare(db)
        except BaseException:
            db.close()
            raise
        return db

    def _prepare(self, db: sqlite3.Connection) -> None:
        db.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        try:
            app_id, version, tables = self._identify(db)
        except sqlite3.DatabaseError as exc:
            raise self._refuse(f"is not a readable SQLite database ({exc})") from None
        if app_id == 0 and version == 0 and not tables:
            pass  # a new (or empty) file: nothing in it to lose
        elif app_id != APPLICATION_ID:
            shown = ", ".join(tables[:5]) + (" ..." if len(tables) > 5 else "")
            raise self._refuse(f"is an SQLite database of another program (tables: {shown or 'none'}), "
                               "not a meltfix logbook")
        elif version > SCHEMA_VERSION:
            raise self._refuse(f"was written by a newer meltfix (logbook version {version}; this one reads "
                               f"up to {SCHEMA_VERSION})")
        elif version not in _MIGRATIONS and version != SCHEMA_VERSION:
            raise self._refuse(f"has no logbook version this meltfix knows ({version}; it reads "
                               f"versions {min(_MIGRATIONS)} to {SCHEMA_VERSION})")
        else:
            try:
                problems = [row[0] for row in db.execute("PRAGMA quick_check(5)")]
            except sqlite3.DatabaseError as exc:
                raise self._refuse(f"is damaged ({exc})") from None
            if problems != ["ok"]:
                raise self._refuse(f"is damaged ({'; '.join(problems)})")
        try:
            db.execute("PRAGMA journal_mode = WAL")
            # FULL: a power cut must not lose a committed heat either.
            db.execute(f"PRAGMA synchronous = {'FULL' if self._durable else 'NORMAL'}")
            db.execute("PRAGMA foreign_keys = ON")
            self._set_up_schema(db)
        except sqlite3.Error as exc:
            raise InputError(self.path, "", f"the logbook cannot be prepared ({exc})") from None

    @staticmethod
    def _identify(db: sqlite3.Connection) -> tuple[int, int, list[str]]:
        app_id = db.execute("PRAGMA application_id").fetchone()[0]
        version = db.execute("PRAGMA user_version").fetchone()[0]
        tables = [row[0] for row in db.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        return app_id, version, tables

    def _set_up_schema(self, db: sqlite3.Connection) -> None:
        """Create a new logbook or migrate an old one; re-checked inside the write lock because
        another process may have done it in the meantime."""
        app_id, version, tables = self._identify(db)
        if app_id == APPLICATION_ID and version == SCHEMA_VERSION:
            return
        if tables and app_id == APPLICATION_ID:
            self._back_up(db, version)
        db.execute("BEGIN IMMEDIATE")
        try:
            app_id, version, tables = self._identify(db)
            if not tables:
                for statement in _SCHEMA:
                    db.execute(statement)
                db.execute(f"PRAGMA application_id = {APPLICATION_ID}")
            elif version < SCHEMA_VERSION:
                for step in range(version, SCHEMA_VERSION):
                    _MIGRATIONS[step](db)
            db.execute(f"PRAGMA user_version = {SCHEMA_VERSION}")
            db.execute("COMMIT")
        except BaseException:
            if db.in_transaction:
                db.execute("ROLLBACK")
            raise

    def _back_up(self, db: sqlite3.Connection, version: int) -> None:
        """Copy an older logbook beside itself before migrating it (kept if one exists already)."""
        backup_path = self.path.with_name(f"{self.path.name}.v{version}.bak")
        if backup_path.exists():
            return
        backup = sqlite3.connect(backup_path)
        try:
            db.backup(backup)
        finally:
            backup.close()

    # -- plumbing ------------------------------------------------------------------------------
    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> Logbook:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @contextmanager
    def _write(self) -> Iterator[sqlite3.Connection]:
        """One write transaction, taking the write lock at once so the busy timeout applies."""
        with self._lock:
            try:
                self._db.execute("BEGIN IMMEDIATE")
            except sqlite3.OperationalError as exc:
                raise InputError(self.path, "", f"the logbook is busy or cannot be written ({exc}); "
                                                "nothing was recorded, try again") from None
            try:
                yield self._db
                self._db.execute("COMMIT")
            except sqlite3.Error as exc:
                self._roll_back()
                raise InputError(self.path, "", f"the logbook could not record this ({exc}); "
                                                "nothing was recorded") from None
            except BaseException:
                self._roll_back()
                raise

    def _roll_back(self) -> None:
        # SQLite may already have rolled back on its own (e.g. disk full); a second ROLLBACK would fail.
        if self._db.in_transaction:
            self._db.execute("ROLLBACK")

    @contextmanager
    def reading(self) -> Iterator[None]:
        """Several reads that see one state of the file while other processes carry on writing.

        Record nothing inside it (a write needs its own transaction)."""
        with self._lock:
            if self._db.in_transaction:
                yield
                return
            try:
                self._db.execute("BEGIN")
            except sqlite3.Error as exc:
                raise InputError(self.path, "", f"the logbook cannot be read ({exc})") from None
            try:
                yield
            finally:
                if self._db.in_transaction:
                    self._db.execute("COMMIT")

    def _read(self, sql: str, params: Sequence[object] = ()) -> list[tuple]:
        with self._lock:
            try:
                return self._db.execute(sql, params).fetchall()
            except sqlite3.Error as exc:
                raise InputError(self.path, "", f"the logbook cannot be read ({exc})") from None

    def _touch_heat(self, db: sqlite3.Connection, heat_id: str, when: datetime) -> None:
        """Make sure the heat exists; an earlier event moves its start (and shift) back."""
        shift = Shift.of(when)
        db.execute(
            "INSERT INTO heat (heat_id, started_at, shift_date, shift) VALUES (?, ?, ?, ?) "
            "ON CONFLICT (heat_id) DO UPDATE SET started_at = excluded.started_at, "
            "shift_date = excluded.shift_date, shift = excluded.shift WHERE excluded.started_at < heat.started_at",
            (heat_id, _iso(when), shift.shift_date.isoformat(), shift.name))

    # -- meta ----------------------------------------------------------------------------------
    @property
    def shop_name(self) -> str | None:
        """The shop the logbook belongs to, when recorded."""
        rows = self._read("SELECT value FROM meta WHERE key = 'shop_name'")
        return rows[0][0] if rows else None

    def set_shop_name(self, name: str) -> None:
        with self._write() as db:
            db.execute("INSERT OR REPLACE INTO meta (key, value) VALUES ('shop_name', ?)", (name,))

    # -- writing -------------------------------------------------------------------------------
    def record_plan(self, heat: Heat, plan: Plan, when: datetime | None = None, *,
                    options: PlanOptions | None = None) -> int:
        """Record a plan with the heat and options it was made from; returns the plan's id."""
        from meltfix.planner import PlanOptions

        if plan.heat_id != heat.heat_id:
            raise ValueError(f"plan is for heat {plan.heat_id!r}, not {heat.heat_id!r}")
        heat_toml = heat_to_toml(heat)
        try:
            tomllib.loads(heat_toml)
        except tomllib.TOMLDecodeError as exc:  # e.g. a NumPy number written as "np.float64(...)"
            raise ValueError(f"heat {heat.heat_id} does not write as valid HEAT.toml text ({exc})") from None
        when = _stamp(when)
        prices: dict[str, float] = {}
        if self.book is not None:
            prices.update((m.name, m.price_per_kg) for m in self.book.materials)
        prices.update(heat.price_per_kg)
        prices.update((a.material, _unit_price(a.cost, a.kg)) for a in plan.additions if a.kg > 0)
        with self._write() as db:
            self._touch_heat(db, heat.heat_id, when)
            # The heat's grade follows its latest plan; its size is the bath when first planned.
            db.execute("UPDATE heat SET grade = ?, bath_kg = coalesce(bath_kg, ?), "
                       "capacity_kg = coalesce(?, capacity_kg) WHERE heat_id = ?",
                       (plan.grade, heat.bath_kg, heat.capacity_kg, heat.heat_id))
            cursor = db.execute(
                "INSERT INTO plan (heat_id, made_at, grade, status, bath_kg, final_kg, total_cost, currency, "
                "heat_toml, heat_extra, options, prices, result) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
                (heat.heat_id, _iso(when), plan.grade, plan.status, plan.bath_kg, plan.final_kg, plan.total_cost,
                 plan.currency, heat_toml, _heat_extra(heat), json.dumps(asdict(options or PlanOptions())),
                 json.dumps(prices), json.dumps(plan.to_json())))
            plan_id = int(cursor.lastrowid)
            db.executemany(
                "INSERT INTO plan_line (plan_id, line_no, material, kg, price_per_kg, cost) VALUES (?, ?, ?, ?, ?, ?)",
                [(plan_id, k, a.material, a.kg, _unit_price(a.cost, a.kg) if a.kg > 0 else 0.0, a.cost)
                 for k, a in enumerate(plan.additions, start=1)])
        return plan_id

    def record_additions(self, heat_id: str, additions: Sequence[tuple[str, float]], plan_id: int | None = None,
                         when: datetime | None = None, *, prices: Mapping[str, float] | None = None) -> None:
        """Record one round of additions actually made (material, kg), priced at the prices in force.

        A line's price comes from ``prices``, else from the plan it was made from, else from the
        heat's latest plan, else from the recipe book; a line with no known price is still recorded.
        """
        lines = self._checked_lines(additions)
        when = _stamp(when)
        with self._write() as db:
            if plan_id is not None:
                found = db.execute("SELECT heat_id FROM plan WHERE id = ?", (plan_id,)).fetchone()
                if found is None or found[0] != heat_id:
                    raise InputError(self.path, "plan_id", f"plan {plan_id} is not a plan of heat {heat_id}")
            known = self._prices_for(db, heat_id, plan_id)
            known.update(prices or {})
            self._touch_heat(db, heat_id, when)
            batch = db.execute("INSERT INTO addition_batch (heat_id, added_at, plan_id) VALUES (?, ?, ?)",
                               (heat_id, _iso(when), plan_id)).lastrowid
            rows = []
            for k, (material, kg) in enumerate(lines, start=1):
                price = known.get(material)
                rows.append((batch, k, material, kg, price, None if price is None else kg * price))
            db.executemany("INSERT INTO addition (batch_id, line_no, material, kg, price_per_kg, cost) "
                           "VALUES (?, ?, ?, ?, ?, ?)", rows)

    def _checked_lines(self, additions: Sequence[tuple[str, float]]) -> list[tuple[str, float]]:
        lines = []
        names = set(self.book.material_names) if self.book is not None else None
        for material, kg in additions:
            where = f"additions.{material}"
            if not isinstance(material, str) or not material.strip():
                raise InputError("additions", "material", f"expected a material name, got {material!r}")
            if names is not None and material not in names:
                raise InputError("additions", where, f"no material named '{material}' in the recipe book")
            if isinstance(kg, bool) or not isinstance(kg, int | float) or not math.isfinite(kg) or kg <= 0:
                raise InputError("additions", where, f"the mass must be a number of kg above 0, got {kg!r}")
            lines.append((material, float(kg)))
        if not lines:
            raise InputError("additions", "", "lists no material")
        return lines

    def _prices_for(self, db: sqlite3.Connection, heat_id: str, plan_id: int | None) -> dict[str, float]:
        known: dict[str, float] = {}
        if self.book is not None:
            known.update((m.name, m.price_per_kg) for m in self.book.materials)
        latest = db.execute("SELECT prices FROM plan WHERE heat_id = ? ORDER BY made_at DESC, id DESC LIMIT 1",
                            (heat_id,)).fetchone()
        if latest is not None:
            known.update(json.loads(latest[0]))
        if plan_id is not None:
            known.update(json.loads(db.execute("SELECT prices FROM plan WHERE id = ?", (plan_id,)).fetchone()[0]))
        return known

    def record_sample(self, heat_id: str, sample_id: str, analysis: Analysis, burns: Sequence[Analysis] = (),
                      when: datetime | None = None, *, rejected_burns: Collection[int] = (),
                      temperature_c: float | None = None, flags: Sequence[str] = ()) -> None:
        """Record a sample: the analysis used (average of the accepted burns) and every burn.

        ``rejected_burns`` numbers (1-based) the burns left out of the average.
        """
        for number in rejected_burns:
            if not 1 <= number <= len(burns):
                raise InputError("sample", f"{sample_id}.rejected_burns",
                                 f"burn {number} does not exist (the sample has {len(burns)} burns)")
        when = _stamp(when)
        pct_json, below_json = _analysis_json(analysis)
        with self._write() as db:
            if db.execute("SELECT 1 FROM sample WHERE heat_id = ? AND sample_id = ?", (heat_id, sample_id)).fetchone():
                raise InputError(self.path, f"heat {heat_id}",
                                 f"sample '{sample_id}' is already recorded; give the new sample another id")
            self._touch_heat(db, heat_id, when)
            row = db.execute(
                "INSERT INTO sample (heat_id, sample_id, taken_at, analysis, below_limit, temperature_c, flags) "
                "VALUES (?, ?, ?, ?, ?, ?, ?)",
                (heat_id, sample_id, _iso(when), pct_json, below_json, temperature_c, json.dumps(list(flags))),
            ).lastrowid
            db.executemany(
                "INSERT INTO burn (sample_row, burn_no, analysis, below_limit, accepted) VALUES (?, ?, ?, ?, ?)",
                [(row, k, *_analysis_json(burn), int(k not in rejected_burns)) for k, burn in enumerate(burns, 1)])

    def record_spectro_sample(self, heat_id: str, sample: SpectroSample, when: datetime | None = None, *,
                              temperature_c: float | None = None) -> None:
        """Record a sample read from a spectrometer export, with its burns, left-out burns and flags."""
        burns = [Analysis({s: r.pct for s, r in burn.readings.items()},
                          frozenset(s for s, r in burn.readings.items() if r.below_limit)) for burn in sample.burns]
        rejected = {k for k, burn in enumerate(sample.burns, 1) if not burn.accepted}
        self.record_sample(heat_id, sample.sample_id, sample.analysis, burns, when, rejected_burns=rejected,
                           temperature_c=temperature_c, flags=sample.flags)

    # -- reading -------------------------------------------------------------------------------
    def list_heats(self, date_from: date | None = None, date_to: date | None = None, *,
                   shift: Shift | None = None) -> list[HeatSummary]:
        """Heats that started between two dates (inclusive, either may be open), or in one shift,
        oldest first, with what their additions cost."""
        where, params = self._heat_filter(date_from, date_to, shift)
        rows = self._read(f"""
            SELECT h.heat_id, h.grade, h.started_at, h.shift_date, h.shift, h.bath_kg,
              (SELECT count(*) FROM sample s WHERE s.heat_id = h.heat_id),
              (SELECT count(*) FROM plan p WHERE p.heat_id = h.heat_id),
              (SELECT count(*) FROM addition_batch b WHERE b.heat_id = h.heat_id),
              (SELECT coalesce(sum(a.kg), 0) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
                 WHERE b.heat_id = h.heat_id),
              (SELECT coalesce(sum(p.total_cost), 0) FROM plan p
                 WHERE p.id IN (SELECT b.plan_id FROM addition_batch b WHERE b.heat_id = h.heat_id)),
              (SELECT coalesce(sum(a.cost), 0) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
                 WHERE b.heat_id = h.heat_id),
              (SELECT count(*) FROM addition a JOIN addition_batch b ON a.batch_id = b.id
                 WHERE b.heat_id = h.heat_id AND a.cost IS NULL),
              (SELECT p.currency FROM plan p WHERE p.heat_id = h.heat_id ORDER BY p.made_at DESC, p.id DESC LIMIT 1)
            FROM heat h {where} ORDER BY h.started_at, h.heat_id""", params)
        return [HeatSummary(heat_id=r[0], grade=r[1], started_at=datetime.fromisoformat(r[2]),
                            shift=Shift(date.fromisoformat(r[3]), r[4]), bath_kg=r[5], samples=r[6], plans=r[7],
                            corrections=r[8], added_kg=r[9], planned_cost=r[10], actual_cost=r[11],
                            unpriced_lines=r[12], currency=r[13] or "")
                for r in rows]

    @staticmethod
    def _heat_filter(date_from: date | None, date_to: date | None,
                     shift: Shift | None) -> tuple[str, list[object]]:
        clauses: list[str] = []
        params: list[object] = []
        if date_from is not None:
            clauses.append("h.started_at >= ?")
            params.append(_iso(datetime.combine(date_from, time())))
        if date_to is not None:
            clauses.append("h.started_at < ?")
            params.append(_iso(datetime.combine(date_to + timedelta(days=1), time())))
        if shift is not None:
            clauses.append("h.shift_date = ? AND h.shift = ?")
            params += [shift.shift_date.isoformat(), shift.name]
        return ("WHERE " + " AND ".join(clauses)) if clauses else "", params

    def shifts(self) -> list[Shift]:
        """Every shift with at least one heat, oldest first."""
        rows = self._read("SELECT DISTINCT shift_date, shift FROM heat")
        return sorted(Shift(date.fromisoformat(d), name) for d, name in rows)

    def cost_lines(self, date_from: date | None = None, date_to: date | None = None) -> list[CostLine]:
        """Planned lines (of the plans additions were made from) and actual lines of the heats in range."""
        where, params = self._heat_filter(date_from, date_to, None)
        rows = self._read(f"""
            SELECT h.heat_id, 'planned', l.material, l.kg, l.price_per_kg, l.cost
              FROM heat h JOIN plan p ON p.heat_id = h.heat_id JOIN plan_line l ON l.plan_id = p.id
              {where} {'AND' if where else 'WHERE'}
              p.id IN (SELECT b.plan_id FROM addition_batch b WHERE b.heat_id = h.heat_id)
            UNION ALL
            SELECT h.heat_id, 'actual', a.material, a.kg, a.price_per_kg, a.cost
              FROM heat h JOIN addition_batch b ON b.heat_id = h.heat_id JOIN addition a ON a.batch_id = b.id
              {where}""", params + params)
        return [CostLine(*row) for row in rows]

    def heat_history(self, heat_id: str) -> HeatHistory:
        """Everything recorded for one heat, in time order."""
        with self.reading():
            return self._history(heat_id)

    def _history(self, heat_id: str) -> HeatHistory:
        heat = self._read("SELECT grade, started_at, shift_date, shift, bath_kg FROM heat WHERE heat_id = ?",
                          (heat_id,))
        if not heat:
            raise InputError(self.path, f"heat {heat_id}", "is not in the logbook")
        grade, started_at, shift_date, shift_name, bath_kg = heat[0]

        burns: dict[int, list[tuple[Analysis, bool]]] = {}
        for sample_row, pct, below, accepted in self._read(
                "SELECT b.sample_row, b.analysis, b.below_limit, b.accepted FROM burn b JOIN sample s "
                "ON b.sample_row = s.id WHERE s.heat_id = ? ORDER BY b.sample_row, b.burn_no", (heat_id,)):
            burns.setdefault(sample_row, []).append((_analysis_from(pct, below), bool(accepted)))
        samples = []
        for row, sample_id, taken_at, pct, below, temperature, flags in self._read(
                "SELECT id, sample_id, taken_at, analysis, below_limit, temperature_c, flags FROM sample "
                "WHERE heat_id = ? ORDER BY taken_at, id", (heat_id,)):
            sparks = burns.get(row, [])
            samples.append(SampleRecord(
                heat_id, sample_id, datetime.fromisoformat(taken_at), _analysis_from(pct, below),
                tuple(b for b, _ in sparks), frozenset(k for k, (_, ok) in enumerate(sparks, 1) if not ok),
                temperature, tuple(json.loads(flags))))

        plan_lines = self._lines("SELECT l.plan_id, l.material, l.kg, l.price_per_kg, l.cost FROM plan_line l "
                                 "JOIN plan p ON l.plan_id = p.id WHERE p.heat_id = ? ORDER BY l.plan_id, l.line_no",
                                 heat_id)
        plans = []
        for (plan_id, made_at, status, total_cost, plan_bath, final_kg, currency, toml_text, extra, options,
             prices, result) in self._read(
                "SELECT id, made_at, status, total_cost, bath_kg, final_kg, currency, heat_toml, heat_extra, "
                "options, prices, result FROM plan WHERE heat_id = ? ORDER BY made_at, id", (heat_id,)):
            result_obj = json.loads(result)
            plans.append(PlanRecord(
                plan_id=plan_id, heat_id=heat_id, made_at=datetime.fromisoformat(made_at),
                heat=_heat_from(toml_text, extra, f"{self.path} plan {plan_id}", heat_id), heat_toml=toml_text,
                options=_options_from(options), status=status, lines=plan_lines.get(plan_id, ()),
                total_cost=total_cost, bath_kg=plan_bath, final_kg=final_kg,
                predicted_pct=MappingProxyType(result_obj.get("predicted", {})),
                prices=MappingProxyType(json.loads(prices)), currency=currency,
                result=MappingProxyType(result_obj)))

        batch_lines = self._lines("SELECT a.batch_id, a.material, a.kg, a.price_per_kg, a.cost FROM addition a "
                                  "JOIN addition_batch b ON a.batch_id = b.id WHERE b.heat_id = ? "
                                  "ORDER BY a.batch_id, a.line_no", heat_id)
        additions = tuple(
            AdditionsRecord(batch_id, heat_id, datetime.fromisoformat(added_at), plan_id, batch_lines.get(batch_id, ()))
            for batch_id, added_at, plan_id in self._read(
                "SELECT id, added_at, plan_id FROM addition_batch WHERE heat_id = ? ORDER BY added_at, id", (heat_id,)))
        return HeatHistory(heat_id, grade, datetime.fromisoformat(started_at),
                           Shift(date.fromisoformat(shift_date), shift_name), bath_kg,
                           tuple(samples), tuple(plans), additions)

    def _lines(self, sql: str, heat_id: str) -> dict[int, tuple[LineRecord, ...]]:
        grouped: dict[int, list[LineRecord]] = {}
        for owner, material, kg, price, cost in self._read(sql, (heat_id,)):
            grouped.setdefault(owner, []).append(LineRecord(material, kg, price, cost))
        return {owner: tuple(lines) for owner, lines in grouped.items()}
