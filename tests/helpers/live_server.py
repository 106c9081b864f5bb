"""A real Arrowmoot server on loopback and the chromium settings, for the browser tests.

The server runs ``create_app()`` under uvicorn in its own process group (so the
analysis worker it starts stops with it), on a fresh SQLite file in a test's
temporary folder, without the demo session unless asked for (``demo=True``).
"""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from contextlib import contextmanager
from pathlib import Path

import httpx

ROOT = Path(__file__).resolve().parents[2]
ARTIFACTS = ROOT / "tests" / "artifacts"
CHROMIUM = "/usr/bin/chromium"
# Debian's chromium, headless, with nothing that reaches out to the network.
CHROMIUM_ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                 "--disable-background-networking", "--disable-component-update", "--disable-sync"]


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


class LiveServer:
    """One server process on a fixed port; it can be killed and started again on the same file."""

    def __init__(self, folder: Path, *, demo: bool = False, db: str | None = None):
        self.folder = Path(folder)
        self.demo = demo
        self.db = db or str(self.folder / "live.sqlite3")  # a file, or a PostgreSQL URL several servers share
        self.port = free_port()
        self.base = f"http://127.0.0.1:{self.port}"
        self.proc: subprocess.Popen | None = None

    def start(self) -> None:
        env = dict(os.environ, ARROWMOOT_DB_PATH=self.db,
                   ARROWMOOT_DATA_DIR=str(self.folder), ARROWMOOT_DEMO_SESSION="1" if self.demo else "0")
        code = ("import uvicorn; from app.main import create_app; "
                f"uvicorn.run(create_app(), host='127.0.0.1', port={self.port}, log_level='warning')")
        self.log = self.folder / "server.log"
        with open(self.log, "ab") as log:  # a file, not a pipe: a full pipe would stall the server
            self.proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=env,
                                         start_new_session=True, stdout=log, stderr=log)
        for _ in range(600):
            if self.proc.poll() is not None:
                break
            try:
                httpx.get(self.base + "/", timeout=0.5)
                return
            except httpx.HTTPError:
                time.sleep(0.1)
        self.stop()
        raise RuntimeError("the server did not start: " + self.log.read_text(errors="replace")[-2000:])

    def kill(self) -> None:
        """SIGKILL the server and everything it started."""
        os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(10)

    def stop(self) -> None:
        if self.proc is None or self.proc.poll() is not None:
            return
        try:
            os.killpg(self.proc.pid, signal.SIGTERM)
            self.proc.wait(15)
        except (ProcessLookupError, subprocess.TimeoutExpired):
            try:
                os.killpg(self.proc.pid, signal.SIGKILL)
            except ProcessLookupError:
                pass


@contextmanager
def running_server(folder: Path, *, demo: bool = False):
    """Start a server for the duration of the block; yields its base URL."""
    server = LiveServer(folder, demo=demo)
    server.start()
    try:
        yield server.base
    finally:
        server.stop()
