"""The heat logbook: every heat, sample (with its burns), plan (with its inputs) and actual addition.

The logbook is a SQLite file (the default, for one station) or a PostgreSQL database (one logbook
for every station of a shop); :mod:`meltfix.records.logbook.backend` is the thin layer between them, and
the SQL here is written once for both. Every write is one transaction: a crash, a kill or a lost
server loses at most the write in progress, never one already returned.

A database that is not a logbook (damaged, another program's, or from a newer meltfix) is refused
with one clear message naming it and never written to; an older one is migrated (see
:mod:`meltfix.records.logbook.schema`).

Times are the shop's wall-clock time, stored naive to the second; an aware datetime is first
converted to this computer's local time.
"""

from __future__ import annotations

import json
import math
import os
import threading
import tomllib
from collections.abc import Callable, Collection, Iterable, Iterator, Mapping, Sequence
from contextlib import contextmanager
from dataclasses import asdict, fields
from datetime import date, datetime, time, timedelta
from itertools import islice
from types import MappingProxyType
from typing import TYPE_CHECKING, Any

from meltfix.base.errors import InputError
from meltfix.plan.result import Plan, PlanOptions
from meltfix.records.logbook.backend import Backend
from meltfix.records.logbook.location import LogbookLocation, ServerURL, default_logbook_path, logbook_location
from meltfix.records.logbook.records import (AdditionsRecord, CostLine, HeatHistory, HeatSummary, LineRecord,
                                             PlanRecord, SampleRecord, Shift)
from meltfix.records.logbook.schema import prepare
from meltfix.shop.analysis import Analysis
from meltfix.shop.heat import Heat, heat_to_toml, parse_heat

if TYPE_CHECKING:
    from meltfix.readers.samples import SpectroSample
    from meltfix.shop.recipes import RecipeBook

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


def _cell(path: object, heat_id: str, column: str, parse: Callable[[Any], Any], raw: Any) -> Any:
    """A cell read back through ``parse``; a damaged one (hand-edited, written by another program) is
    bad input naming the heat and the column, never a traceback in a report or a replay."""
    try:
        return parse(raw)
    except (ValueError, TypeError, KeyError, AttributeError) as exc:  # json.JSONDecodeError is a ValueError
        shown = repr(raw) if len(repr(raw)) <= 40 else repr(raw)[:37] + "..."
        raise InputError(path, f"heat {heat_id}: {column}", f"damaged logbook cell {shown} ({exc})") from None


def _kg(value: Any) -> float | None:
    """A weight column: a number or empty."""
    if value is None or (isinstance(value, (int, float)) and not isinstance(value, bool)):
        return value
    raise ValueError("not a number")


def _heat_from(toml_text: str, extra_json: str, source: str, heat_id: str) -> Heat:
    try:
        data = tomllib.loads(toml_text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(source, "heat_toml", f"the recorded heat is not valid TOML ({exc})") from None
    heat = parse_heat(data, source, default_id=heat_id)
    extra = _cell(source, heat_id, "heat_extra", json.loads, extra_json)
    return _cell(source, heat_id, "heat_extra", lambda e: heat.with_changes(
        stage=e["stage"],
        max_temp_drop_c=e["max_temp_drop_c"],
        switched_off=frozenset(e["switched_off"]),
        locked_kg=MappingProxyType(e["locked_kg"]),
        price_per_kg=MappingProxyType(e["price_per_kg"]),
        stock_kg=MappingProxyType(e["stock_kg"]),
    ), extra)


def _options_from(options_json: str) -> PlanOptions:
    from meltfix.plan.result import PlanOptions

    # Options added or dropped in later versions of meltfix keep their defaults.
    known = {f.name for f in fields(PlanOptions)}
    return PlanOptions(**{k: v for k, v in json.loads(options_json).items() if k in known})



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
            (heat_id, _iso(when), shift.shift_date.isoformat(), shift.name))

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
        from meltfix.plan.result import PlanOptions

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
                "heat_toml, heat_extra, options, prices, result) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?) "
                "RETURNING id",
                (heat.heat_id, _iso(when), plan.grade, plan.status, plan.bath_kg, plan.final_kg, plan.total_cost,
                 plan.currency, heat_toml, _heat_extra(heat), json.dumps(asdict(options or PlanOptions())),
                 json.dumps(prices), json.dumps(plan.to_json())))
            plan_id = int(cursor.fetchone()[0])
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
            batch = db.execute("INSERT INTO addition_batch (heat_id, added_at, plan_id) VALUES (?, ?, ?) RETURNING id",
                               (heat_id, _iso(when), plan_id)).fetchone()[0]
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
        when = _stamp(when)
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
        pct_json, below_json = _analysis_json(analysis)
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
                    (heat_id, sample_id, _iso(when), pct_json, below_json, temperature_c, json.dumps(list(flags))),
                ).fetchone()[0]
            except db.errors as exc:
                if db.is_unique_violation(exc):
                    raise SampleTaken(self.path, heat_id, sample_id) from None
                raise
            db.executemany(
                "INSERT INTO burn (sample_row, burn_no, analysis, below_limit, accepted) VALUES (?, ?, ?, ?, ?)",
                [(row, k, *_analysis_json(burn), int(k not in rejected_burns)) for k, burn in enumerate(burns, 1)])
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
        path = self.path
        return [HeatSummary(heat_id=r[0], grade=r[1], started_at=_cell(path, r[0], "started_at", datetime.fromisoformat, r[2]),
                            shift=Shift(_cell(path, r[0], "shift_date", date.fromisoformat, r[3]), r[4]),
                            bath_kg=_cell(path, r[0], "bath_kg", _kg, r[5]), samples=r[6], plans=r[7],
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
        path = self.path

        burns: dict[int, list[tuple[Analysis, bool]]] = {}
        for sample_row, pct, below, accepted in self._read(
                "SELECT b.sample_row, b.analysis, b.below_limit, b.accepted FROM burn b JOIN sample s "
                "ON b.sample_row = s.id WHERE s.heat_id = ? ORDER BY b.sample_row, b.burn_no", (heat_id,)):
            burns.setdefault(sample_row, []).append(
                (_cell(path, heat_id, "burn.analysis", lambda a: _analysis_from(*a), (pct, below)), bool(accepted)))
        samples = []
        for row, sample_id, taken_at, pct, below, temperature, flags in self._read(
                "SELECT id, sample_id, taken_at, analysis, below_limit, temperature_c, flags FROM sample "
                "WHERE heat_id = ? ORDER BY taken_at, id", (heat_id,)):
            sparks = burns.get(row, [])
            samples.append(SampleRecord(
                heat_id, sample_id, _cell(path, heat_id, "sample.taken_at", datetime.fromisoformat, taken_at),
                _cell(path, heat_id, "sample.analysis", lambda a: _analysis_from(*a), (pct, below)),
                tuple(b for b, _ in sparks), frozenset(k for k, (_, ok) in enumerate(sparks, 1) if not ok),
                temperature, tuple(_cell(path, heat_id, "sample.flags", json.loads, flags))))

        plan_lines = self._lines("SELECT l.plan_id, l.material, l.kg, l.price_per_kg, l.cost FROM plan_line l "
                                 "JOIN plan p ON l.plan_id = p.id WHERE p.heat_id = ? ORDER BY l.plan_id, l.line_no",
                                 heat_id)
        plans = []
        for (plan_id, made_at, status, total_cost, plan_bath, final_kg, currency, toml_text, extra, options,
             prices, result) in self._read(
                "SELECT id, made_at, status, total_cost, bath_kg, final_kg, currency, heat_toml, heat_extra, "
                "options, prices, result FROM plan WHERE heat_id = ? ORDER BY made_at, id", (heat_id,)):
            result_obj = _cell(path, heat_id, f"plan {plan_id} result", lambda r: dict(json.loads(r)), result)
            plans.append(PlanRecord(
                plan_id=plan_id, heat_id=heat_id,
                made_at=_cell(path, heat_id, f"plan {plan_id} made_at", datetime.fromisoformat, made_at),
                heat=_heat_from(toml_text, extra, f"{path} heat {heat_id} plan {plan_id}", heat_id), heat_toml=toml_text,
                options=_cell(path, heat_id, f"plan {plan_id} options", _options_from, options), status=status,
                lines=plan_lines.get(plan_id, ()), total_cost=total_cost, bath_kg=plan_bath, final_kg=final_kg,
                predicted_pct=MappingProxyType(result_obj.get("predicted", {})),
                prices=MappingProxyType(_cell(path, heat_id, f"plan {plan_id} prices", json.loads, prices)),
                currency=currency,
                result=MappingProxyType(result_obj)))

        batch_lines = self._lines("SELECT a.batch_id, a.material, a.kg, a.price_per_kg, a.cost FROM addition a "
                                  "JOIN addition_batch b ON a.batch_id = b.id WHERE b.heat_id = ? "
                                  "ORDER BY a.batch_id, a.line_no", heat_id)
        additions = tuple(
            AdditionsRecord(batch_id, heat_id, _cell(path, heat_id, "addition_batch.added_at", datetime.fromisoformat,
                                                     added_at), plan_id, batch_lines.get(batch_id, ()))
            for batch_id, added_at, plan_id in self._read(
                "SELECT id, added_at, plan_id FROM addition_batch WHERE heat_id = ? ORDER BY added_at, id", (heat_id,)))
        return HeatHistory(heat_id, grade, _cell(path, heat_id, "started_at", datetime.fromisoformat, started_at),
                           Shift(_cell(path, heat_id, "shift_date", date.fromisoformat, shift_date), shift_name),
                           _cell(path, heat_id, "bath_kg", _kg, bath_kg),
                           tuple(samples), tuple(plans), additions)

    def _lines(self, sql: str, heat_id: str) -> dict[int, tuple[LineRecord, ...]]:
        grouped: dict[int, list[LineRecord]] = {}
        for owner, material, kg, price, cost in self._read(sql, (heat_id,)):
            grouped.setdefault(owner, []).append(LineRecord(material, kg, price, cost))
        return {owner: tuple(lines) for owner, lines in grouped.items()}
