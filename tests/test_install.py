"""The package installs as a wheel and serves from any folder.

Builds the wheel from a clean copy of the source, installs it (without
dependencies, reusing this interpreter's packages) into a fresh virtual
environment, and starts ``arrowmoot serve`` from an unrelated empty folder:
pages, static files and the demo session must all come from the installed
copy, and the database and attached files must land next to ``--db`` or, without
it, in the per-user data folder, never in the current folder.
"""

from __future__ import annotations

import os
import shutil
import signal
import subprocess
import sys
import time
import zipfile
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import free_port

ROOT = Path(__file__).resolve().parent.parent
SHIPPED = ("static", "templates", "sample_data")


def _copy_source(target: Path) -> None:
    ignore = shutil.ignore_patterns("__pycache__", "*.pyc", "*.egg-info", "build")
    for name in ("app", *SHIPPED):
        shutil.copytree(ROOT / name, target / name, ignore=ignore)
    for name in ("pyproject.toml", "README.md"):
        shutil.copy2(ROOT / name, target / name)


def _run(args, **kwargs) -> subprocess.CompletedProcess:
    done = subprocess.run(args, capture_output=True, text=True, timeout=300, **kwargs)
    assert done.returncode == 0, f"{args}\n{done.stdout}\n{done.stderr}"
    return done


@pytest.fixture(scope="module")
def installed(tmp_path_factory):
    """A fresh virtual environment with the built wheel installed; yields (venv, wheel)."""
    base = tmp_path_factory.mktemp("install")
    source, dist, venv = base / "source", base / "dist", base / "venv"
    _copy_source(source)
    _run([sys.executable, "-m", "pip", "wheel", str(source), "--no-deps", "--no-build-isolation",
          "--disable-pip-version-check", "-q", "-w", str(dist)])
    (wheel,) = dist.glob("arrowmoot-*.whl")
    _run([sys.executable, "-m", "venv", "--system-site-packages", str(venv)])
    _run([str(venv / "bin" / "python"), "-m", "pip", "install", "--no-deps", "--no-index",
          "--ignore-installed", "--disable-pip-version-check", "-q", str(wheel)])
    return venv, wheel


def test_wheel_carries_every_shipped_file(installed):
    _, wheel = installed
    names = set(zipfile.ZipFile(wheel).namelist())
    prefix = "arrowmoot-0.1.0.data/data/share/arrowmoot/"
    missing = []
    for folder in SHIPPED:
        for path in (ROOT / folder).rglob("*"):
            if path.is_file() and "__pycache__" not in path.parts:
                shipped = prefix + path.relative_to(ROOT).as_posix()
                if shipped not in names:
                    missing.append(shipped)
    assert missing == []


def _clean_env(tmp: Path) -> dict:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ARROWMOOT_") and k != "PYTHONPATH"}
    env["HOME"] = str(tmp / "home")
    env["XDG_DATA_HOME"] = str(tmp / "home" / "data")
    return env


class _Server:
    def __init__(self, venv: Path, cwd: Path, env: dict, *extra: str):
        self.port = free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        self.log = cwd.parent / f"serve-{self.port}.log"
        with open(self.log, "wb") as log:
            self.proc = subprocess.Popen([str(venv / "bin" / "arrowmoot"), "serve", "--port", str(self.port), *extra],
                                         cwd=cwd, env=env, stdout=log, stderr=log, start_new_session=True)

    def wait(self) -> None:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                break
            try:
                httpx.get(self.base + "/", timeout=1)
                return
            except httpx.HTTPError:
                time.sleep(0.2)
        raise AssertionError("the installed server did not start:\n" + self.text())

    def text(self) -> str:
        return self.log.read_text(errors="replace")

    def stop(self) -> None:
        if self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            try:
                self.proc.wait(15)
            except subprocess.TimeoutExpired:
                os.killpg(self.proc.pid, signal.SIGKILL)
                self.proc.wait(5)


def test_installed_server_runs_from_another_folder(installed, tmp_path):
    venv, _ = installed
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    env = _clean_env(tmp_path)
    # The installed copy is the one imported, not this checkout.
    where = _run([str(venv / "bin" / "python"), "-c", "import app; print(app.__file__)"], cwd=elsewhere, env=env)
    assert Path(where.stdout.strip()).resolve().is_relative_to(venv.resolve())

    db = tmp_path / "db" / "workshops.sqlite3"
    server = _Server(venv, elsewhere, env, "--db", str(db))
    try:
        server.wait()
        home = httpx.get(server.base + "/")
        assert home.status_code == 200 and "Open a workshop session" in home.text
        for asset in ("/static/js/session.js", "/static/style.css", "/static/visual-spec.json"):
            assert httpx.get(server.base + asset).status_code == 200, asset
        deadline = time.monotonic() + 30
        while "demo session ready" not in server.text() and time.monotonic() < deadline:
            time.sleep(0.2)
        log = server.text()
        assert "demo session ready" in log, log
        session_path = log.split(f"127.0.0.1:{server.port}/s/", 1)[1].split("#", 1)[0]
        page = httpx.get(f"{server.base}/s/{session_path}")
        assert page.status_code == 200 and "/static/js/session.js" in page.text
    finally:
        server.stop()
    assert db.is_file()
    attached = [p for p in (db.parent / "sessions").rglob("*") if p.is_file()]
    assert attached, "the demo data should be attached next to --db"
    assert list(elsewhere.iterdir()) == []  # nothing written in the current folder


def test_installed_server_defaults_to_the_user_data_folder(installed, tmp_path):
    venv, _ = installed
    elsewhere = tmp_path / "elsewhere"
    elsewhere.mkdir()
    env = _clean_env(tmp_path)
    server = _Server(venv, elsewhere, env)
    try:
        server.wait()
        assert httpx.get(server.base + "/").status_code == 200
    finally:
        server.stop()
    assert (tmp_path / "home" / "data" / "arrowmoot" / "arrowmoot.sqlite3").is_file()
    assert list(elsewhere.iterdir()) == []


def test_attached_files_follow_the_database_folder(tmp_path, monkeypatch):
    """create_app(db_path=...) without a data folder keeps uploads beside the database."""
    from app.main import create_app

    monkeypatch.delenv("ARROWMOOT_DATA_DIR", raising=False)
    monkeypatch.setenv("ARROWMOOT_DEMO_SESSION", "0")
    app = create_app(db_path=tmp_path / "here" / "w.sqlite3")
    assert app.state.store.data_dir == tmp_path / "here"
    monkeypatch.setenv("ARROWMOOT_DATA_DIR", str(tmp_path / "files"))
    assert create_app(db_path=tmp_path / "here" / "w.sqlite3").state.store.data_dir == tmp_path / "files"
