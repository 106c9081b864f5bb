"""A throwaway PostgreSQL for the tests, and the fixtures that run a test on both stores.

The session-wide ``postgres_cluster`` runs Debian's ``initdb`` and ``pg_ctl``
(as the ``postgres`` user when the tests run as root) in a temporary folder,
listening only on 127.0.0.1 at a free port, and stops it at the end. Each test
gets a database of its own. Where PostgreSQL cannot be started, the tests that
need it are skipped with the reason, and the reason is printed once more at
the end of the run.
"""

from __future__ import annotations

import glob
import os
import pwd
import shutil
import socket
import subprocess
import tempfile
import itertools
from pathlib import Path

import pytest

_why_not: list[str] = []


def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def find_pg_bin() -> Path | None:
    """The folder of initdb and pg_ctl: Debian's newest /usr/lib/postgresql/<ver>/bin, else PATH."""
    found = sorted(glob.glob("/usr/lib/postgresql/*/bin/initdb"),
                   key=lambda p: int(Path(p).parent.parent.name) if Path(p).parent.parent.name.isdigit() else 0)
    if found:
        return Path(found[-1]).parent
    on_path = shutil.which("initdb")
    return Path(on_path).parent if on_path else None


class ThrowawayPostgres:
    """One PostgreSQL server in a temporary folder on a loopback port, trusted local logins."""

    def __init__(self) -> None:
        self.bin = find_pg_bin()
        if self.bin is None:
            raise RuntimeError("initdb not found (Debian's postgresql package is not installed)")
        self.folder = Path(tempfile.mkdtemp(prefix="arrowmoot-pg-"))
        self.port = _free_port()
        self.user: str | None = None
        if os.geteuid() == 0:  # initdb refuses to run as root
            try:
                entry = pwd.getpwnam("postgres")
            except KeyError:
                raise RuntimeError("running as root and there is no postgres user to run initdb") from None
            os.chown(self.folder, entry.pw_uid, entry.pw_gid)
            self.user = "postgres"
        self._names = itertools.count(1)
        self.started = False

    def _run(self, *args: str) -> None:
        done = subprocess.run([str(self.bin / args[0]), *args[1:]], user=self.user, cwd=self.folder,
                              capture_output=True, text=True, timeout=120)
        if done.returncode != 0:
            raise RuntimeError(f"{args[0]} failed: {(done.stderr or done.stdout).strip()[-500:]}")

    def start(self) -> None:
        data = str(self.folder / "data")
        self._run("initdb", "-D", data, "-U", "postgres", "--auth=trust", "-E", "UTF8", "--no-sync")
        options = (f"-p {self.port} -k {self.folder} -c listen_addresses=127.0.0.1 -c fsync=off "
                   "-c synchronous_commit=off -c full_page_writes=off -c max_connections=200")
        self._run("pg_ctl", "-D", data, "-o", options, "-l", str(self.folder / "server.log"), "-w", "-t", "60",
                  "start")
        self.started = True

    def stop(self) -> None:
        if self.started:
            try:
                self._run("pg_ctl", "-D", str(self.folder / "data"), "-m", "fast", "-w", "stop")
            except (RuntimeError, subprocess.TimeoutExpired):
                self._run("pg_ctl", "-D", str(self.folder / "data"), "-m", "immediate", "stop")
            self.started = False
        shutil.rmtree(self.folder, ignore_errors=True)

    def url(self, database: str = "postgres") -> str:
        return f"postgresql://postgres@127.0.0.1:{self.port}/{database}"

    def new_database(self) -> str:
        """A fresh empty database; its URL."""
        import psycopg

        name = f"t{os.getpid()}_{next(self._names)}"
        with psycopg.connect(self.url(), autocommit=True) as conn:
            conn.execute(f'CREATE DATABASE "{name}"'.encode())
        return self.url(name)


@pytest.fixture(scope="session")
def postgres_cluster():
    """The throwaway PostgreSQL server, or a skip that says why there is none."""
    if _why_not:
        pytest.skip(_why_not[0])
    try:
        import psycopg  # noqa: F401
    except ImportError:
        _why_not.append("PostgreSQL tests skipped: psycopg is not installed (pip install -e '.[test]')")
        pytest.skip(_why_not[0])
    try:
        cluster = ThrowawayPostgres()
        cluster.start()
    except (RuntimeError, OSError, subprocess.TimeoutExpired) as exc:
        _why_not.append(f"PostgreSQL tests skipped: could not start a throwaway PostgreSQL: {exc}")
        pytest.skip(_why_not[0])
    yield cluster
    cluster.stop()


@pytest.fixture(params=["sqlite", "postgresql"])
def db_target(request, tmp_path) -> str:
    """The same test on an SQLite file and on a fresh PostgreSQL database."""
    if request.param == "sqlite":
        return str(tmp_path / "arrowmoot.sqlite3")
    return request.getfixturevalue("postgres_cluster").new_database()


def pytest_terminal_summary(terminalreporter):
    for reason in _why_not[:1]:
        terminalreporter.write_line(reason, yellow=True)
