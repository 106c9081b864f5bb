"""The real page survives a hard kill: SIGKILL the server under an open session page,
start it again on the same database and port, and the page reconnects by itself, with
every acknowledged edit and the ones made after the restart. Screenshots go to
tests/artifacts/."""

from __future__ import annotations

import os

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, LiveServer as Server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS

TOKEN_HEADER = "X-Arrowmoot-Token"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]


def test_page_reconnects_after_sigkill_and_keeps_every_acknowledged_edit(tmp_path):
    from playwright.sync_api import expect, sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    server = Server(tmp_path)
    server.start()
    try:
        made = httpx.post(server.base + "/api/sessions", json={
            "title": "Bike leases and sick days", "treatment": "bike_lease", "outcome": "sick_days"}).json()
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
