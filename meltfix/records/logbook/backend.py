"""What the logbook needs from a database engine: the thin layer between its SQL and SQLite or PostgreSQL.

The logbook writes its SQL once, with ``?`` placeholders, ``RETURNING id`` for new rows and
``INSERT ... ON CONFLICT`` for upserts (both engines speak these). A back end supplies the rest:
its placeholders, the few type names that differ, transactions, how it marks a database as a
logbook, and what its errors mean in a melter's words.
"""

from __future__ import annotations

from abc import ABC, abstractmethod
from collections.abc import Iterable, Mapping, Sequence
from typing import Any, Protocol

from meltfix.base.errors import InputError


class Rows(Protocol):
    """A cursor after ``execute``: both sqlite3 and psycopg cursors fit."""

    def fetchone(self) -> Any: ...
    def fetchall(self) -> list[Any]: ...


class Backend(ABC):
    """One open connection to a logbook (a SQLite file or a PostgreSQL database).

    ``location`` names the logbook in every message (a path, or a URL with its password hidden).
    Statements run inside a transaction opened with :meth:`begin_write` or :meth:`begin_read`
    (outside one each statement is its own).
    """

    location: object
    types: Mapping[str, str]
    """The schema's type words for this engine: ``id``, ``real`` and ``text``."""
    errors: tuple[type[BaseException], ...]
    """The engine's own error classes, turned into one-line messages by :meth:`failure`."""

    @abstractmethod
    def execute(self, sql: str, params: Sequence[object] = ()) -> Rows: ...

    @abstractmethod
    def executemany(self, sql: str, rows: Iterable[Sequence[object]]) -> None: ...

    @abstractmethod
    def begin_write(self) -> None:
        """Open a write transaction, waiting for other writers (within the engine's timeout)."""

    @abstractmethod
    def begin_read(self) -> None:
        """Open a read-only transaction that sees one state while others write."""

    @abstractmethod
    def commit(self) -> None: ...

    @abstractmethod
    def rollback(self) -> None:
        """Undo the open transaction, if any is still open (the engine may have ended it already)."""

    @property
    @abstractmethod
    def in_transaction(self) -> bool: ...

    @abstractmethod
    def close(self) -> None: ...

    # -- what the schema code asks of the engine ------------------------------------------
    @abstractmethod
    def identify(self) -> tuple[int, int, list[str]]:
        """(application id, schema version, table names); ``(0, 0, [])`` for an empty database."""

    @abstractmethod
    def damage(self) -> str:
        """What the engine's own check finds wrong with the stored data; empty when sound."""

    @abstractmethod
    def configure(self) -> None:
        """Per-connection settings, once the database is known to be a logbook (or empty)."""

    @abstractmethod
    def lock_schema(self) -> None:
        """Inside the write transaction: keep other stations from creating or migrating at once."""

    @abstractmethod
    def stamp(self, application_id: int, version: int) -> None:
        """Mark the database as a logbook of this schema version (inside the write transaction)."""

    @abstractmethod
    def back_up(self, version: int) -> None:
        """Keep a verified copy of an older logbook before it is migrated (just before the write transaction)."""

    # -- errors ----------------------------------------------------------------------------
    @abstractmethod
    def is_unique_violation(self, error: BaseException) -> bool: ...

    @abstractmethod
    def failure(self, error: BaseException, doing: str) -> InputError:
        """One line naming the logbook and what went wrong ``doing`` ("read", "write" or "begin")."""
