"""The heat logbook: every heat, sample (with its burns), plan (with its inputs) and actual addition.

The logbook is a SQLite file (the default, for one station) or a PostgreSQL database (one logbook
for every station of a shop); :mod:`meltfix.records.logbook.backend` is the thin layer between them, and
the SQL here is written once for both. Every write is one transaction: a crash, a kill or a lost
server loses at most the write in progress, never one already returned.

A database that is not a logbook (damaged, another program's, or from a newer meltfix) is refused
with one clear message naming it and never written to; an older one is migrated (see
:mod:`meltfix.records.logbook.schema`).

How a value is written into a cell and read back is in :mod:`meltfix.records.logbook.cells`; the
read queries are in :mod:`meltfix.records.logbook.queries`.
"""

from __future__ import annotations

import json
import math
import os
import threading
import tomllib
from collections.abc import Callable, Collection, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import asdict
from datetime import date, datetime
from itertools import islice
from typing import TYPE_CHECKING

from meltfix.base.errors import InputError
from meltfix.plan.result import Plan, PlanOptions
from meltfix.records.logbook import queries
from meltfix.records.logbook.backend import Backend
from meltfix.records.logbook.cells import analysis_json, heat_extra, iso, stamp, unit_price
from meltfix.records.logbook.location import LogbookLocation, ServerURL, default_logbook_path, logbook_location
from meltfix.records.logbook.records import CostLine, HeatHistory, HeatSummary, Shift
from meltfix.records.logbook.schema import prepare
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, heat_to_toml

if TYPE_CHECKING:
    from meltfix.readers.samples import SpectroSample
    from meltfix.shop.recipes import RecipeBook


# A sample's other ids to try, at most (a heat has a handful of samples), and whole tries when a
# unique violation still gets through.
_MAX_SAMPLE_IDS = 1000
_SAMPLE_ATTEMPTS = 5


def _open_backend(location: LogbookLocation, *, create: bool, durable: bool) -> Backend:
    if isinstance(location, ServerURL):
        # Only here: the plain SQLite logbook never loads the PostgreSQL driver.
        from meltfix.records.logbook.postgres_backend import PostgresBackend

        return PostgresBackend(location)
    from meltfix.records.logbook.sqlite_backend import SQLiteBackend

    return SQLiteBackend(location, create=create, durable=durable)


class SampleTaken(InputError):
    """The heat already has a sample of this id (perhaps recorded a moment ago by another station)."""

    def __init__(self, source: object, heat_id: str, sample_id: str) -> None:
        super().__init__(source, f"heat {heat_id}",
                         f"sample '{sample_id}' is already recorded; give the new sample another id")
        self.heat_id, self.sample_id = heat_id, sample_id


class Logbook:
    """The shop's logbook. Safe to share between threads; several processes may write at once.

    ``path`` is a SQLite file's path or a ``postgresql://`` URL (a :class:`ServerURL` or text);
    None means ``$MELTFIX_LOGBOOK``, else the user's data folder. ``book`` (optional) lets the
    logbook price actual additions from the recipe book and check material names.
    ``create=False`` refuses a place where no logbook exists yet. ``durable=False`` (SQLite only)
    skips the wait for the disk on each commit: only for a scratch file that is thrown away if the
    program stops (a kill still loses nothing committed; a power cut might).
    """

    def __init__(self, path: LogbookLocation | str | os.PathLike[str] | None = None,
                 book: RecipeBook | None = None, *, create: bool = True, durable: bool = True) -> None:
        self.path: LogbookLocation = logbook_location(path) if path is not None else default_logbook_path()
        """Where the logbook lives: a file's path, or the server's URL (shown without its password)."""
        self.book = book
        self._lock = threading.RLock()
        self._db = _open_backend(self.path, create=create, durable=durable)
        try:
            prepare(self._db, create)
        except self._db.errors as exc:
            self._db.close()
            raise self._db.failure(exc, "prepare") from None
        except BaseException:
            self._db.close()
            raise

    # -- plumbing ------------------------------------------------------------------------------
    def close(self) -> None:
        with self._lock:
            self._db.close()

    def __enter__(self) -> Logbook:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def _begun(self, begin: Callable[[], None], doing: str) -> Backend:
        """The back end with a transaction just opened by ``begin``, or the failure in one line."""
        try:
            begin()
        except self._db.errors as exc:
            self._db.rollback()
            raise self._db.failure(exc, doing) from None
        return self._db

    @contextmanager
    def _write(self) -> Iterator[Backend]:
        """One write transaction; nothing of it stays when it fails."""
        with self._lock:
            db = self._begun(self._db.begin_write, "begin")
            try:
                yield db
            except db.errors as exc:
                db.rollback()
                raise db.failure(exc, "write") from None
            except BaseException:
                db.rollback()
                raise
            try:
                db.commit()
            except db.errors as exc:
                db.rollback()
                raise db.failure(exc, "commit") from None

    @contextmanager
    def reading(self) -> Iterator[None]:
        """Several reads that see one state of the logbook while other processes carry on writing.

        Record nothing inside it (a write needs its own transaction)."""
        with self._lock:
            if self._db.in_transaction:
                yield
                return
            db = self._begun(self._db.begin_read, "read")
            try:
                yield
            finally:
                if db.in_transaction:
                    try:
                        db.commit()
                    except db.errors:
                        db.rollback()  # a read-only transaction: nothing to lose

    def _read(self, sql: str, params: Sequence[object] = ()) -> list[tuple]:
        with self._lock:
            try:
                return [tuple(row) for row in self._db.execute(sql, params).fetchall()]
            except self._db.errors as exc:
                raise self._db.failure(exc, "read") from None

    def _touch_heat(self, db: Backend, heat_id: str, when: datetime) -> None:
        """Make sure the heat exists; an earlier event moves its start (and shift) back."""
        shift = Shift.of(when)
        db.execute(
            "INSERT INTO heat (heat_id, started_at, shift_date, shift) VALUES (?, ?, ?, ?) "
            "ON CONFLICT (heat_id) DO UPDATE SET started_at = excluded.started_at, "
            "shift_date = excluded.shift_date, shift = excluded.shift WHERE excluded.started_at < heat.started_at",
            (heat_id, iso(when), shift.shift_date.isoformat(), shift.name))

    # -- meta ----------------------------------------------------------------------------------
    @property
    def shop_name(self) -> str | None:
        """The shop the logbook belongs to, when recorded."""
        rows = self._read("SELECT value FROM meta WHERE key = 'shop_name'")
        return rows[0][0] if rows else None

    def set_shop_name(self, name: str) -> None:
        with self._write() as db:
            db.execute("INSERT INTO meta (key, value) VALUES ('shop_name', ?) "
                       "ON CONFLICT (key) DO UPDATE SET value = excluded.value", (name,))

    # -- writing -------------------------------------------------------------------------------
    def record_plan(self, heat: Heat, plan: Plan, when: datetime | None = None, *,
                    options: PlanOptions | None = None) -> int:
        """Record a plan with the heat and options it was made from; returns the plan's id."""
        if plan.heat_id != heat.heat_id:
            raise ValueError(f"plan is for heat {plan.heat_id!r}, not {heat.heat_id!r}")
        heat_toml = heat_to_toml(heat)
        try:
            tomllib.loads(heat_toml)
        except tomllib.TOMLDecodeError as exc:  # e.g. a NumPy number written as "np.float64(...)"
            raise ValueError(f"heat {heat.heat_id} does not write as valid HEAT.toml text ({exc})") from None
        when = stamp(when)
        prices: dict[str, float] = {}
        if self.book is not None:
            prices.update((m.name, m.price_per_kg) for m in self.book.materials)
        prices.update(heat.price_per_kg)
        prices.update((a.material, unit_price(a.cost, a.kg)) for a in plan.additions if a.kg > 0)
        with self._write() as db:
            self._touch_heat(db, heat.heat_id, when)
            # The heat's grade follows its latest plan; its size is the bath when first planned.
            db.execute("UPDATE heat SET grade = ?, bath_kg = coalesce(bath_kg, ?), "
                       "capacity_kg = coalesce(?, capacity_kg) WHERE heat_id = ?",
                       (plan.grade, heat.bath_kg, heat.capacity_kg, heat.heat_id))
            cursor = db.execute(
                "INSERT INTO plan (heat_id, made_at, grade, status, bath_kg, final_kg, total_cost, currency, "
                "heat_toml, heat_extra, options, prices, result) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) "
                "RETURNING id",
                (heat.heat_id, iso(when), plan.grade, plan.status, plan.bath_kg, plan.final_kg, plan.total_cost,
                 plan.currency, heat_toml, heat_extra(heat), json.dumps(asdict(options or PlanOptions())),
                 json.dumps(prices), json.dumps(plan.to_json())))
            plan_id = int(cursor.fetchone()[0])
            db.executemany(
                "INSERT INTO plan_line (plan_id, line_no, material, kg, price_per_kg, cost) VALUES (?, ?, ?, ?, ?, ?)",
                [(plan_id, k, a.material, a.kg, unit_price(a.cost, a.kg) if a.kg > 0 else 0.0, a.cost)
                 for k, a in enumerate(plan.additions, start=1)])
        return plan_id

    def record_additions(self, heat_id: str, additions: Sequence[tuple[str, float]], plan_id: int | None = None,
                         when: datetime | None = None, *, prices: Mapping[str, float] | None = None) -> None:
        """Record one round of additions actually made (material, kg), priced at the prices in force.

        A line's price comes from ``prices``, else from the plan it was made from, else from the
        heat's latest plan, else from the recipe book; a line with no known price is still recorded.
        """
        lines = self._checked_lines(additions)
        when = stamp(when)
        with self._write() as db:
            if plan_id is not None:
                found = db.execute("SELECT heat_id FROM plan WHERE id = ?", (plan_id,)).fetchone()
                if found is None or found[0] != heat_id:
                    raise InputError(self.path, "plan_id", f"plan {plan_id} is not a plan of heat {heat_id}")
            known = self._prices_for(db, heat_id, plan_id)
            known.update(prices or {})
            self._touch_heat(db, heat_id, when)
            batch = db.execute("INSERT INTO addition_batch (heat_id, added_at, plan_id) VALUES (?, ?, ?) RETURNING id",
                               (heat_id, iso(when), plan_id)).fetchone()[0]
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

    def _prices_for(self, db: Backend, heat_id: str, plan_id: int | None) -> dict[str, float]:
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
                      temperature_c: float | None = None, flags: Sequence[str] = (),
                      if_taken: Iterable[str] = ()) -> str:
        """Record a sample: the analysis used (average of the accepted burns) and every burn; returns its id.

        ``rejected_burns`` numbers (1-based) the burns left out of the average. ``if_taken`` lists
        ids to use, in order, when ``sample_id`` is already recorded for the heat: the id is chosen
        inside the write transaction with the heat's row locked, so two stations recording at once
        never choose the same one. Without it a taken id raises :class:`SampleTaken`.
        """
        for number in rejected_burns:
            if not 1 <= number <= len(burns):
                raise InputError("sample", f"{sample_id}.rejected_burns",
                                 f"burn {number} does not exist (the sample has {len(burns)} burns)")
        when = stamp(when)
        candidates = list(islice(if_taken, _MAX_SAMPLE_IDS)) if if_taken else []
        for attempt in range(_SAMPLE_ATTEMPTS):
            try:
                return self._insert_sample(heat_id, [sample_id, *candidates], analysis, burns, when,
                                           rejected_burns, temperature_c, flags)
            except SampleTaken:
                # Only where the heat's lock could not keep another station out (a brand-new heat
                # on both at once): the UNIQUE (heat_id, sample_id) constraint refused it; try again.
                if not candidates or attempt == _SAMPLE_ATTEMPTS - 1:
                    raise
        raise AssertionError("unreachable")

    def _insert_sample(self, heat_id: str, ids: Sequence[str], analysis: Analysis, burns: Sequence[Analysis],
                       when: datetime, rejected_burns: Collection[int], temperature_c: float | None,
                       flags: Sequence[str]) -> str:
        pct_json, below_json = analysis_json(analysis)
        with self._write() as db:
            # The heat's row first: on PostgreSQL it stays locked until this transaction ends, so
            # the ids read next cannot change under it (SQLite's write lock covers the whole file).
            self._touch_heat(db, heat_id, when)
            taken = {row[0] for row in db.execute("SELECT sample_id FROM sample WHERE heat_id = ?", (heat_id,))
                     .fetchall()}
            sample_id = next((i for i in ids if i not in taken), None)
            if sample_id is None:
                raise SampleTaken(self.path, heat_id, ids[0])
            try:
                row = db.execute(
                    "INSERT INTO sample (heat_id, sample_id, taken_at, analysis, below_limit, temperature_c, flags) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?) RETURNING id",
                    (heat_id, sample_id, iso(when), pct_json, below_json, temperature_c, json.dumps(list(flags))),
                ).fetchone()[0]
            except db.errors as exc:
                if db.is_unique_violation(exc):
                    raise SampleTaken(self.path, heat_id, sample_id) from None
                raise
            db.executemany(
                "INSERT INTO burn (sample_row, burn_no, analysis, below_limit, accepted) VALUES (?, ?, ?, ?, ?)",
                [(row, k, *analysis_json(burn), int(k not in rejected_burns)) for k, burn in enumerate(burns, 1)])
        return sample_id

    def record_spectro_sample(self, heat_id: str, sample: SpectroSample, when: datetime | None = None, *,
                              temperature_c: float | None = None, if_taken: Iterable[str] = ()) -> str:
        """Record a sample read from a spectrometer export, with its burns, left-out burns and flags;
        returns its id (see :meth:`record_sample` for ``if_taken``)."""
        burns = [Analysis({s: r.pct for s, r in burn.readings.items()},
                          frozenset(s for s, r in burn.readings.items() if r.below_limit)) for burn in sample.burns]
        rejected = {k for k, burn in enumerate(sample.burns, 1) if not burn.accepted}
        return self.record_sample(heat_id, sample.sample_id, sample.analysis, burns, when, rejected_burns=rejected,
                                  temperature_c=temperature_c, flags=sample.flags, if_taken=if_taken)

    # -- reading (the queries are in meltfix.records.logbook.queries) ----------------------------
    def list_heats(self, date_from: date | None = None, date_to: date | None = None, *,
                   shift: Shift | None = None) -> list[HeatSummary]:
        """Heats that started between two dates (inclusive, either may be open), or in one shift,
        oldest first, with what their additions cost."""
        return queries.list_heats(self._read, self.path, date_from, date_to, shift)

    def shifts(self) -> list[Shift]:
        """Every shift with at least one heat, oldest first."""
        rows = self._read("SELECT DISTINCT shift_date, shift FROM heat")
        return sorted(Shift(date.fromisoformat(d), name) for d, name in rows)

    def cost_lines(self, date_from: date | None = None, date_to: date | None = None) -> list[CostLine]:
        """Planned lines (of the plans additions were made from) and actual lines of the heats in range."""
        return queries.cost_lines(self._read, date_from, date_to)

    def heat_history(self, heat_id: str) -> HeatHistory:
        """Everything recorded for one heat, in time order."""
        with self.reading():
            return queries.heat_history(self._read, self.path, heat_id)
