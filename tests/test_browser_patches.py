"""A page kept current by patches shows what a freshly loaded page shows.

Bob's page stays open in chromium while Ann and the facilitator propose, vote and
settle from their own clients. After each change the open page (which received
it as a patch) is compared with a page loaded afresh: the tallies, the proposal
list, the tabs and the drawing must be the same, and so must the page's state.
"""

from __future__ import annotations

import json
import os
import time

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]

TOKEN_HEADER = "X-Arrowmoot-Token"
DOCUMENT = {
    "format": "arrowmoot-graph", "version": 1,
    "variables": [{"name": n, "x": x, "y": y} for n, x, y in (
        ("age", 120, 80), ("bike_lease", 120, 320), ("fitness", 420, 200), ("sick_days", 720, 320),
        ("commute", 420, 460))],
    "arrows": [{"from": a, "to": b} for a, b in (
        ("age", "bike_lease"), ("age", "sick_days"), ("bike_lease", "fitness"), ("fitness", "sick_days"))],
    "treatment": ["bike_lease"], "outcome": ["sick_days"],
}

# Records every message the page's WebSocket receives and, right after the page has
# handled it (before any analysis that follows), the proposal cards on the screen.
RECORD_PUSHES = """
(() => {
  const Native = window.WebSocket;
  window.pushes = [];
  const cards = () => [...document.querySelectorAll('.panel .proposal')].map((card) =>
    [card.dataset.proposal, card.querySelector('.status').textContent, card.querySelector('.tally').textContent]);
  window.WebSocket = class extends Native {
    addEventListener(type, listener, ...rest) {
      if (type !== 'message') return super.addEventListener(type, listener, ...rest);
      return super.addEventListener(type, (event) => {
        listener(event);
        const message = JSON.parse(event.data);
        window.pushes.push({ type: message.type, revision: message.revision, cards: cards() });
      }, ...rest);
    }
  };
})();
"""

# What a person sees, plus the page's own state (the recent log is only on a loaded page).
SNAPSHOT = """
() => {
  const app = window.arrowmoot;
  const state = { ...app.state };
  delete state.recent; delete state.arrows_compact;
  return {
    state: JSON.stringify(state),
    tabs: document.querySelector('.tabs').innerText,
    panel: document.querySelector('.panel').innerText,
    cards: [...document.querySelectorAll('.panel .proposal')].map((card) =>
      [card.dataset.proposal, card.querySelector('.status').textContent, card.querySelector('.tally').textContent]),
    edges: document.querySelector('.layer-edges').innerHTML,
    nodes: document.querySelector('.layer-nodes').innerHTML,
    bar: document.querySelector('.session-bar').innerText,
  };
}
"""


def _watch(page, errors):
    page.on("console", lambda m: errors.append(f"console {m.type}: {m.text}") if m.type == "error" else None)
    page.on("pageerror", lambda e: errors.append(f"page error: {e}"))


def _wait(page, expression, what, seconds=20.0):
    """Poll ``expression`` (the page's policy forbids the eval that wait_for_function uses)."""
    deadline = time.monotonic() + seconds
    while not page.evaluate(expression):
        if time.monotonic() > deadline:
            raise AssertionError(f"the page never got {what}")
        page.wait_for_timeout(25)


def _open(context, base, session_id, token, errors):
    page = context.new_page()
    _watch(page, errors)
    page.goto(f"{base}/s/{session_id}#key={token}")
    _wait(page, "!!(window.arrowmoot?.state && document.querySelector('.live-status.live-live'))", "live")
    page.locator('.tabs [data-tab="debate"]').click()
    return page


def _settled(page, revision):
    """Wait until the page holds ``revision`` and its analysis."""
    _wait(page, f"window.arrowmoot.state.revision === {revision} "
          f"&& window.arrowmoot.analysis?.revision === {revision}", f"revision {revision}")


def test_patched_page_equals_a_freshly_loaded_one(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    errors: list[str] = []
    with running_server(tmp_path) as base, httpx.Client(base_url=base, timeout=30) as http, \
            sync_playwright() as p:
        created = http.post("/api/sessions", json={"title": "Patch check", "name": "Fay",
                                                   "document": DOCUMENT}).json()
        sid, fac = created["session_id"], created["token"]
        ann = http.post("/api/join", json={"code": created["join_code"], "name": "Ann"}).json()["token"]
        bob = http.post("/api/join", json={"code": created["join_code"], "name": "Bob"}).json()["token"]

        def send(token, command):
            r = http.post(f"/api/sessions/{sid}/commands", json=command, headers={TOKEN_HEADER: token})
            assert r.status_code == 200, r.text
            return r.json()["revision"]

        send(fac, {"type": "set_stage", "stage": "debating"})
        send(bob, {"type": "propose", "kind": "add", "from": "commute", "to": "fitness"})
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        context = browser.new_context(viewport={"width": 1440, "height": 900})
        context.add_init_script(RECORD_PUSHES)
        page = _open(context, base, sid, bob, errors)
        steps = [
            ("proposal", ann, {"type": "propose", "kind": "add", "from": "commute", "to": "sick_days",
                               "reason": "a long ride <b>tires</b> people"}),
            ("vote on a proposal", ann, {"type": "vote", "proposal": 2, "choice": "agree", "reason": "yes"}),
            ("vote on Bob's proposal", fac, {"type": "vote", "proposal": 1, "choice": "unsure"}),
            ("vote against an arrow", ann, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "disagree"}),
            ("proposal to reverse", ann, {"type": "propose", "kind": "reverse", "from": "bike_lease", "to": "fitness"}),
            ("proposal to remove", fac, {"type": "propose", "kind": "remove", "from": "age", "to": "sick_days"}),
            ("accepted addition", fac, {"type": "settle", "proposal": 2, "decision": "accept"}),
            ("accepted reversal", fac, {"type": "settle", "proposal": 3, "decision": "accept"}),
            ("left disputed", fac, {"type": "settle", "proposal": 4, "decision": "dispute"}),
            ("rejected", fac, {"type": "settle", "proposal": 1, "decision": "reject"}),
            ("vote withdrawn", ann, {"type": "withdraw_vote", "from": "age", "to": "bike_lease"}),
            ("new variable", ann, {"type": "add_variable", "name": "weather", "latent": True, "x": 700, "y": 90}),
            ("accepted removal", fac, {"type": "settle", "proposal": 4, "decision": "accept"}),
        ]
        try:
            for what, token, command in steps:
                revision = send(token, command)
                _settled(page, revision)
                pushes = [m for m in page.evaluate("window.pushes")
                          if m.get("revision") == revision and m["type"] != "analysis"]
                assert [m["type"] for m in pushes] == ["patch"], f"{what}: the page got {pushes}"
                fresh = _open(context, base, sid, bob, errors)
                _settled(fresh, revision)
                live, loaded = page.evaluate(SNAPSHOT), fresh.evaluate(SNAPSHOT)
                for part in live:
                    assert live[part] == loaded[part], f"{what}: {part} differs from a fresh page"
                # and the cards were right as soon as the patch was in, not only once the
                # analysis that follows it redrew the panel
                assert pushes[0]["cards"] == loaded["cards"], f"{what}: cards lagged behind"
                fresh.close()
            page.screenshot(path=str(ARTIFACTS / "patched-debate.png"))
            state = json.loads(page.evaluate(SNAPSHOT)["state"])
            # the checks above compared something real: the changes are on the page
            assert [p["status"] for p in state["proposals"]] == ["rejected", "accepted", "accepted", "accepted"]
            assert {"from": "fitness", "to": "bike_lease"} in state["document"]["arrows"]
            assert "a long ride <b>tires</b> people" in page.locator(".panel[role=tabpanel]").text_content()
            assert page.locator(".panel[role=tabpanel] b").count() == 0  # user text is never markup
            # only the first state was a full one: everything after came as patches
            assert sum(m["type"] == "state" for m in page.evaluate("window.pushes")) == 1
        finally:
            browser.close()
    assert errors == []
