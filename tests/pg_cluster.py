"""A throw-away PostgreSQL cluster for the tests and the logbook benchmark.

``initdb`` into a temporary folder, ``pg_ctl start`` on 127.0.0.1 at a free port (and a socket in
the same folder), and at the end ``pg_ctl stop`` and the folder removed, whatever happened in
between. PostgreSQL refuses to run as root, so as root the cluster belongs to an unprivileged
user (``nobody``, else a ``meltfix-pg`` system user made for it) and its commands run through
``runuser``. Password authentication over TCP (scram-sha-256), so a wrong password is refused as
on a shop's server.
"""

from __future__ import annotations

import os
import pwd
import secrets
import shutil
import socket
import subprocess
import tempfile
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

SUPERUSER = "meltfix_admin"


class ClusterUnavailable(Exception):
    """PostgreSQL is not installed here, or its cluster would not start (the reason says which)."""


@dataclass(frozen=True)
class Cluster:
    host: str
    port: int
    password: str
    folder: Path
    run_as: list[str]
    """The command prefix that runs a PostgreSQL program as the cluster's owner."""
    options: str
    """The server's settings, given again when it is started again."""

    def url(self, database: str = "postgres", *, user: str = SUPERUSER, password: str | None = None) -> str:
        secret = self.password if password is None else password
        return f"postgresql://{user}:{secret}@{self.host}:{self.port}/{database}"

    def admin(self, sql: str) -> None:
        """Run one statement as the superuser, outside any transaction (CREATE/DROP DATABASE)."""
        import psycopg

        with psycopg.connect(self.url(), autocommit=True) as conn:
            conn.execute(sql)

    def new_database(self) -> str:
        """A fresh, empty database; its URL."""
        name = f"logbook_{uuid.uuid4().hex[:12]}"
        self.admin(f"CREATE DATABASE {name}")
        return self.url(name)

    def drop_database(self, url: str) -> None:
        self.admin(f"DROP DATABASE IF EXISTS {url.rsplit('/', 1)[1]} WITH (FORCE)")

    def pg_ctl(self, *args: str) -> subprocess.CompletedProcess[str]:
        return subprocess.run([*self.run_as, "pg_ctl", "-D", str(self.folder / "data"), *args],
                              capture_output=True, text=True, timeout=120)

    def start(self) -> subprocess.CompletedProcess[str]:
        return self.pg_ctl("start", "-w", "-t", "60", "-l", str(self.folder / "server.log"), "-o", self.options)

    def stop(self) -> None:
        """Stop now, as a server restart does: every session is cut off, open transactions are lost."""
        self.pg_ctl("stop", "-m", "fast", "-w")


def _owner() -> tuple[list[str], int | None]:
    """The command prefix and uid to run PostgreSQL with: ourselves, or an unprivileged user as root."""
    if os.geteuid() != 0:
        return [], None
    for name in ("nobody", "meltfix-pg"):
        try:
            return ["runuser", "-u", name, "--"], pwd.getpwnam(name).pw_uid
        except KeyError:
            continue
    made = subprocess.run(["useradd", "--system", "--no-create-home", "--shell", "/usr/sbin/nologin", "meltfix-pg"],
                          capture_output=True, text=True)
    if made.returncode != 0:
        raise ClusterUnavailable(f"no unprivileged user to run PostgreSQL as ({made.stderr.strip()})")
    return ["runuser", "-u", "meltfix-pg", "--"], pwd.getpwnam("meltfix-pg").pw_uid


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@contextmanager
def throwaway_cluster(*, fast: bool = True) -> Iterator[Cluster]:
    """A running cluster for the duration of the ``with``; stopped and removed afterwards.

    ``fast`` turns off the flushes to disk (fine for tests that never pull the power); the
    benchmark keeps the server's defaults.
    """
    if not (shutil.which("initdb") and shutil.which("pg_ctl")):
        raise ClusterUnavailable("PostgreSQL's initdb and pg_ctl are not on the PATH")
    run_as, uid = _owner()
    folder = Path(tempfile.mkdtemp(prefix="meltfix-pg-"))
    started = False
    try:
        password = secrets.token_hex(12)
        (folder / "pwfile").write_text(password + "\n", encoding="utf-8")
        if uid is not None:
            for path in (folder, folder / "pwfile"):
                os.chown(path, uid, -1)
        port = _free_port()
        options = f"-c listen_addresses=127.0.0.1 -p {port} -k {folder} -c max_connections=60"
        if fast:
            options += " -c fsync=off -c full_page_writes=off"
        cluster = Cluster("127.0.0.1", port, password, folder, run_as, options)
        made = subprocess.run([*run_as, "initdb", "-D", str(folder / "data"), "-U", SUPERUSER, "-E", "UTF8",
                               "--no-locale", "--auth-local=trust", "--auth-host=scram-sha-256",
                               f"--pwfile={folder / 'pwfile'}"], capture_output=True, text=True, timeout=300)
        if made.returncode != 0:
            raise ClusterUnavailable(f"initdb failed: {made.stderr.strip()[-300:]}")
        start = cluster.start()
        started = True
        if start.returncode != 0:
            log = (folder / "server.log").read_text(errors="replace") if (folder / "server.log").exists() else ""
            raise ClusterUnavailable(f"pg_ctl start failed: {(start.stderr + log).strip()[-300:]}")
        yield cluster
    finally:
        if started:
            cluster.stop()
        shutil.rmtree(folder, ignore_errors=True)
