"""Fixtures shared by every test folder.

``hand_book`` is a small recipe book of round figures (tests/data/books/hand: two alloys, a
manganese-silicon grade "Test steel" and a manganese-only grade "Mn steel") for tests whose figures
are worked by hand. ``write_recipes`` writes a test's own recipe folder (materials, grades, an
optional shop.toml) when a test needs other figures.

``postgres`` is a throw-away PostgreSQL cluster for the whole session (see ``pg_cluster.py``),
started whenever ``initdb`` and ``pg_ctl`` are on the PATH. Without them the PostgreSQL tests
skip with the reason, unless ``MELTFIX_REQUIRE_PG=1`` (set by ``.ci/run`` on a machine that has
PostgreSQL), which turns the skip into a failure.
"""

from __future__ import annotations

import os
import signal
from collections.abc import Callable, Iterator, Mapping
from pathlib import Path

import pytest
from pg_cluster import Cluster, ClusterUnavailable, throwaway_cluster

from meltfix.shop.recipes import RecipeBook, load_recipes


def pytest_collection_modifyitems(items: list[pytest.Item]) -> None:
    """Marks ``slow`` by what a test uses: the PostgreSQL server (its fixture, or a logbook ``place``
    on the server) or hypothesis's generated cases; other slow tests carry the mark themselves."""
    for item in items:
        params = getattr(getattr(item, "callspec", None), "params", {})
        on_server = "postgres" in getattr(item, "fixturenames", ()) or params.get("place") == "postgresql"
        if on_server or getattr(getattr(item, "obj", None), "is_hypothesis_test", False):
            item.add_marker(pytest.mark.slow)


HAND_BOOK = Path(__file__).parent / "data" / "books" / "hand"


@pytest.fixture(scope="session")
def hand_book() -> RecipeBook:
    return load_recipes(HAND_BOOK)


WriteRecipes = Callable[..., Path]


def _write_recipes(folder: Path, materials: str, grades: str | Mapping[str, str], shop: str | None = None) -> Path:
    """A recipes folder at ``folder``: ``materials.toml``, one grade (text) or several (file name ->
    text) under ``grades/``, and ``shop.toml`` when given. Returns the folder."""
    (folder / "grades").mkdir(parents=True)
    (folder / "materials.toml").write_text(materials, encoding="utf-8")
    for name, text in ({"g.toml": grades} if isinstance(grades, str) else grades).items():
        (folder / "grades" / name).write_text(text, encoding="utf-8")
    if shop is not None:
        (folder / "shop.toml").write_text(shop, encoding="utf-8")
    return folder


@pytest.fixture(scope="session")
def write_recipes() -> WriteRecipes:
    """``write_recipes(folder, materials, grades, shop=None) -> folder`` (session-wide, so module
    fixtures may use it too)."""
    return _write_recipes


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
