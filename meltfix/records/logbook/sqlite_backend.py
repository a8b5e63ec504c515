"""The logbook in one SQLite file (stdlib ``sqlite3``): the default, for one station.

WAL mode so a reader never blocks the writer, a busy timeout so two meltfix processes can write
at once, and every write one ``BEGIN IMMEDIATE`` transaction: a crash or a kill loses at most the
write in progress. The file is recognised by its ``application_id``; its schema version is
``user_version``. Before a migration the file is copied to ``<name>.v<N>.bak``: the copy is made
under a temporary name, checked, flushed to disk and only then renamed, so a kill during the copy
never leaves a ``.bak`` that looks good and is not.
"""

from __future__ import annotations

import os
import sqlite3
from collections.abc import Iterable, Sequence
from pathlib import Path

from meltfix.base.errors import InputError
from meltfix.records.logbook.backend import Backend, Rows

BUSY_TIMEOUT_S = 15.0
_SQLITE_MAGIC = b"SQLite format 3\x00"


def _refused(path: Path, message: str) -> InputError:
    return InputError(path, "", f"{message}; it was left untouched — give another logbook with --logbook or "
                                "$MELTFIX_LOGBOOK")


def _unwritable_folder(path: Path) -> InputError | None:
    """The message for a logbook whose folder cannot be written (it names the folder, not the file)."""
    folder = path.parent
    if os.access(folder, os.W_OK | os.X_OK):
        return None
    return InputError(folder, "", f"this folder cannot be written (read-only?), and the logbook {path.name} needs "
                                  "to write its file and the -wal and -shm files beside it; give a writable "
                                  "place with --logbook or $MELTFIX_LOGBOOK")


class SQLiteBackend(Backend):
    types = {"id": "INTEGER PRIMARY KEY", "real": "REAL", "text": "TEXT"}
    errors = (sqlite3.Error,)

    def __init__(self, path: Path, *, create: bool, durable: bool) -> None:
        self.location = self.path = path
        self._durable = durable
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
            self._db = sqlite3.connect(path, timeout=BUSY_TIMEOUT_S, isolation_level=None, check_same_thread=False)
            self._db.execute(f"PRAGMA busy_timeout = {int(BUSY_TIMEOUT_S * 1000)}")
        except sqlite3.Error as exc:
            raise self.failure(exc, "open") from None

    def _check_header(self) -> None:
        """Refuse a non-empty file that does not start as an SQLite database does."""
        try:
            with self.path.open("rb") as handle:
                head = handle.read(100)
        except OSError as exc:
            raise InputError(self.path, "", f"the logbook cannot be read ({exc.strerror})") from None
        if head and (len(head) < 100 or not head.startswith(_SQLITE_MAGIC)):
            raise _refused(self.path, "is not a meltfix logbook (not an SQLite database, or a damaged one)")

    # -- statements and transactions -------------------------------------------------------
    def execute(self, sql: str, params: Sequence[object] = ()) -> Rows:
        return self._db.execute(sql, params)

    def executemany(self, sql: str, rows: Iterable[Sequence[object]]) -> None:
        self._db.executemany(sql, rows)

    def begin_write(self) -> None:
        # IMMEDIATE takes the write lock at once, so the busy timeout applies to it.
        self._db.execute("BEGIN IMMEDIATE")

    def begin_read(self) -> None:
        self._db.execute("BEGIN")

    def commit(self) -> None:
        self._db.execute("COMMIT")

    def rollback(self) -> None:
        # SQLite may already have rolled back on its own (e.g. disk full); a second ROLLBACK would fail.
        if self._db.in_transaction:
            self._db.execute("ROLLBACK")

    @property
    def in_transaction(self) -> bool:
        return self._db.in_transaction

    def close(self) -> None:
        self._db.close()

    # -- schema ------------------------------------------------------------------------------
    def identify(self) -> tuple[int, int, list[str]]:
        try:
            app_id = self._db.execute("PRAGMA application_id").fetchone()[0]
            version = self._db.execute("PRAGMA user_version").fetchone()[0]
            tables = [row[0] for row in self._db.execute(
                "SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        except sqlite3.DatabaseError as exc:
            raise self._diagnosed(exc) or _refused(self.path, f"is not a readable SQLite database ({exc})") from None
        return app_id, version, tables

    def damage(self) -> str:
        try:
            problems = [row[0] for row in self._db.execute("PRAGMA quick_check(5)")]
        except sqlite3.DatabaseError as exc:
            return str(exc)
        return "" if problems == ["ok"] else "; ".join(problems)

    def configure(self) -> None:
        try:
            self._db.execute("PRAGMA journal_mode = WAL")
            # FULL: a power cut must not lose a committed heat either.
            self._db.execute(f"PRAGMA synchronous = {'FULL' if self._durable else 'NORMAL'}")
            self._db.execute("PRAGMA foreign_keys = ON")
        except sqlite3.Error as exc:
            raise self.failure(exc, "prepare") from None

    def lock_schema(self) -> None:
        pass  # BEGIN IMMEDIATE already holds the file's only write lock

    def stamp(self, application_id: int, version: int) -> None:
        self._db.execute(f"PRAGMA application_id = {int(application_id)}")
        self._db.execute(f"PRAGMA user_version = {int(version)}")

    def back_up(self, version: int) -> None:
        """Copy the logbook beside itself and check the copy before anything is migrated.

        The copy is written under a temporary name, checked against the logbook as it was read
        (integrity, version, every table's row count, all in one read transaction), flushed to
        disk and only then renamed to ``<name>.v<N>.bak``, replacing an older one (the logbook
        holds all of that and more). A copy that fails the check stops the migration, with the
        logbook untouched; a kill leaves at most a ``.partial`` file, never a ``.bak``.
        """
        backup_path = self.path.with_name(f"{self.path.name}.v{version}.bak")
        # One name per process: two stations upgrading at once each make and check their own copy.
        partial = backup_path.with_name(f"{backup_path.name}.partial-{os.getpid()}")
        try:
            partial.unlink(missing_ok=True)
            self._db.execute("BEGIN")
            try:
                counts = self._counts(self._db)
                target = sqlite3.connect(partial)
                try:
                    self._db.backup(target)
                    problem = self._backup_problem(target, version, counts)
                finally:
                    target.close()
            finally:
                self.rollback()
            if problem:
                partial.unlink(missing_ok=True)
                raise InputError(self.path, "", f"the copy made before upgrading the logbook does not match it "
                                                f"({problem}); the logbook was not upgraded and is untouched")
            with partial.open("rb+") as handle:
                os.fsync(handle.fileno())
            os.replace(partial, backup_path)
            _sync_folder(backup_path.parent)
        except (sqlite3.Error, OSError) as exc:
            reason = exc.strerror if isinstance(exc, OSError) and exc.strerror else str(exc)
            raise InputError(backup_path, "", f"cannot copy the logbook here before upgrading it ({reason}); "
                                              "the logbook was not upgraded and is untouched") from None

    @staticmethod
    def _counts(db: sqlite3.Connection) -> dict[str, int]:
        names = [row[0] for row in db.execute("SELECT name FROM sqlite_master WHERE type = 'table' ORDER BY name")]
        return {name: db.execute(f'SELECT count(*) FROM "{name}"').fetchone()[0] for name in names}

    def _backup_problem(self, copy: sqlite3.Connection, version: int, counts: dict[str, int]) -> str:
        check = copy.execute("PRAGMA integrity_check").fetchone()[0]
        if check != "ok":
            return f"integrity check: {check}"
        if copy.execute("PRAGMA user_version").fetchone()[0] != version:
            return "its version differs"
        copied = self._counts(copy)
        if copied != counts:
            return f"rows {copied} instead of {counts}"
        return ""

    # -- errors ------------------------------------------------------------------------------
    def is_unique_violation(self, error: BaseException) -> bool:
        return isinstance(error, sqlite3.IntegrityError) and "UNIQUE" in str(error)

    def _diagnosed(self, error: BaseException) -> InputError | None:
        """A read-only folder or file is named as such, not blamed on the logbook's contents."""
        text = str(error).lower()
        if "unable to open" in text or "readonly" in text or "read-only" in text:
            folder = _unwritable_folder(self.path)
            if folder is not None:
                return folder
            if self.path.exists() and not os.access(self.path, os.W_OK):
                return InputError(self.path, "", "the logbook file is read-only; make it writable or give another "
                                                 "with --logbook or $MELTFIX_LOGBOOK")
        return None

    def failure(self, error: BaseException, doing: str) -> InputError:
        diagnosed = self._diagnosed(error)
        if diagnosed is not None:
            return diagnosed
        messages = {
            "open": f"the logbook cannot be opened ({error})",
            "prepare": f"the logbook cannot be prepared ({error})",
            "read": f"the logbook cannot be read ({error})",
            "begin": f"the logbook is busy or cannot be written ({error}); nothing was recorded, try again",
            "write": f"the logbook could not record this ({error}); nothing was recorded",
            "commit": f"the logbook could not record this ({error}); nothing was recorded",
        }
        return InputError(self.path, "", messages[doing])


def _sync_folder(folder: Path) -> None:
    """Make a rename durable: flush the folder's entry list (where the platform allows it)."""
    if os.name == "nt":
        return
    handle = os.open(folder, os.O_RDONLY)
    try:
        os.fsync(handle)
    finally:
        os.close(handle)
