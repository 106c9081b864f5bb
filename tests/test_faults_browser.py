"""The real page survives a hard kill: SIGKILL the server under an open session page,
start it again on the same database and port, and the page reconnects by itself, with
every acknowledged edit and the ones made after the restart. Screenshots go to
tests/artifacts/."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import httpx
import pytest

CHROMIUM = "/usr/bin/chromium"
ARGS = ["--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
ARTIFACTS = Path(__file__).resolve().parent / "artifacts"
ROOT = Path(__file__).resolve().parent.parent
TOKEN_HEADER = "X-Arrowmoot-Token"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]


class Server:
    def __init__(self, folder: Path):
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            self.port = s.getsockname()[1]
        self.folder = folder
        self.base = f"http://127.0.0.1:{self.port}"
        self.proc = None

    def start(self) -> None:
        env = dict(os.environ, ARROWMOOT_DB_PATH=str(self.folder / "k.sqlite3"),
                   ARROWMOOT_DATA_DIR=str(self.folder), ARROWMOOT_DEMO_SESSION="0")
        code = ("import uvicorn; from app.main import create_app; "
                f"uvicorn.run(create_app(), host='127.0.0.1', port={self.port}, log_level='warning')")
        self.proc = subprocess.Popen([sys.executable, "-c", code], cwd=ROOT, env=env, start_new_session=True,
                                     stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
        for _ in range(600):
            try:
                httpx.get(self.base + "/", timeout=0.5)
                return
            except httpx.HTTPError:
                time.sleep(0.1)
        raise RuntimeError("the server did not start")

    def kill(self) -> None:
        os.killpg(self.proc.pid, signal.SIGKILL)
        self.proc.wait(10)

    def stop(self) -> None:
        if self.proc is not None and self.proc.poll() is None:
            os.killpg(self.proc.pid, signal.SIGTERM)
            self.proc.wait(15)


def test_page_reconnects_after_sigkill_and_keeps_every_acknowledged_edit(tmp_path):
    from playwright.sync_api import expect, sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    server = Server(tmp_path)
    server.start()
    try:
        made = httpx.post(server.base + "/api/sessions", json={
            "title": "Cycle-to-work scheme", "treatment": "scheme", "outcome": "sick_days"}).json()
        sid, key = made["session_id"], made["token"]
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
            page = browser.new_page(viewport={"width": 1280, "height": 800})
            page.goto(f"{server.base}/s/{sid}#key={key}")
            expect(page.locator(".live-status")).to_have_text("Live")
            # An edit from the page itself, acknowledged before the kill.
            page.evaluate("window.arrowmoot.send({type: 'add_variable', name: 'fitness', x: 420, y: 140})")
            expect(page.locator('.node[data-name="fitness"]')).to_have_count(1)

            server.kill()
            expect(page.locator(".live-status")).not_to_have_text("Live", timeout=10_000)
            page.screenshot(path=str(ARTIFACTS / "fault_kill_offline.png"))
            server.start()
            # Someone else edits on the restarted server; the page catches up on its own.
            r = httpx.post(f"{server.base}/api/sessions/{sid}/commands", headers={TOKEN_HEADER: key},
                           json={"type": "add_arrow", "from": "fitness", "to": "sick_days"})
            assert r.status_code == 200, r.text
            expect(page.locator(".live-status")).to_have_text("Live", timeout=30_000)
            expect(page.locator('.node[data-name="fitness"]')).to_have_count(1)
            expect(page.locator('.edge[data-key=\'["fitness","sick_days"]\']')).to_have_count(1, timeout=10_000)
            page.screenshot(path=str(ARTIFACTS / "fault_kill_back.png"))
            browser.close()
        state = httpx.get(f"{server.base}/api/sessions/{sid}", headers={TOKEN_HEADER: key}).json()["state"]
        assert "fitness" in [v["name"] for v in state["document"]["variables"]]
    finally:
        server.stop()
