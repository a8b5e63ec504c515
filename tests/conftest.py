"""Fixtures shared by every test folder.

``postgres`` is a throw-away PostgreSQL cluster for the whole session (see ``pg_cluster.py``),
started whenever ``initdb`` and ``pg_ctl`` are on the PATH. Without them the PostgreSQL tests
skip with the reason, unless ``MELTFIX_REQUIRE_PG=1`` (set by ``.ci/run`` on a machine that has
PostgreSQL), which turns the skip into a failure.
"""

from __future__ import annotations

import os
import signal
from collections.abc import Iterator

import pytest
from pg_cluster import Cluster, ClusterUnavailable, throwaway_cluster


@pytest.fixture(scope="session")
def postgres() -> Iterator[Cluster]:
    # A run stopped with SIGTERM (a time-out, a stopped job) would skip the teardown and leave the
    # server running: while the cluster is up, SIGTERM is handled like Ctrl+C, which pytest unwinds.
    previous = signal.signal(signal.SIGTERM, signal.default_int_handler)
    try:
        with throwaway_cluster() as cluster:
            yield cluster
    except ClusterUnavailable as exc:
        if os.environ.get("MELTFIX_REQUIRE_PG") == "1":
            pytest.fail(f"PostgreSQL is required here (MELTFIX_REQUIRE_PG=1) but unavailable: {exc}")
        pytest.skip(f"no PostgreSQL for the logbook's server tests: {exc}")
    finally:
        signal.signal(signal.SIGTERM, previous)


@pytest.fixture()
def postgres_url(postgres: Cluster) -> Iterator[str]:
    """The URL of a fresh, empty database on the session's cluster, dropped after the test."""
    url = postgres.new_database()
    yield url
    postgres.drop_database(url)
