"""Markup typed by anyone stays text: in the canvas, every side panel, the history and
the report, in a real chromium. Each payload would set ``window.__pwned`` (or add an
element) if the page ever treated it as HTML. Screenshots go to tests/artifacts/.
"""

from __future__ import annotations

import json
import os

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS

TOKEN_HEADER = "X-Arrowmoot-Token"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]

TITLE = '<img src=x onerror="window.__pwned=1">Bike leases'
VAR = '<svg onload="window.__pwned=2">'          # a variable name (64 characters at most)
LABEL = '<script>window.__pwned=3</script>Commute'
PERSON = '<b onmouseover=alert(4)>Eve</b>'        # a member name (40 at most)
REASON = '"><iframe src=javascript:window.__pwned=5>'
VOTE = "<a href=javascript:window.__pwned=6>why</a>"
FORMULA = "{{7*7}} ${7*7} &amp;"


@pytest.fixture(name="server")
def fixture_server(tmp_path):
    with running_server(tmp_path) as base:
        yield base


def _room(base: str) -> dict:
    """A debating session whose every text field carries markup."""
    http = httpx.Client(base_url=base, timeout=30)
    doc = {"format": "arrowmoot-graph", "version": 1,
           "variables": [{"name": "bike_lease", "x": 160, "y": 300}, {"name": "sick_days", "x": 700, "y": 300},
                         {"name": VAR, "label": LABEL, "description": FORMULA, "x": 430, "y": 140},
                         {"name": FORMULA, "x": 430, "y": 460}],
           "arrows": [{"from": VAR, "to": "bike_lease"}, {"from": VAR, "to": "sick_days"},
                      {"from": "bike_lease", "to": "sick_days"}, {"from": FORMULA, "to": "bike_lease"}],
           "treatment": "bike_lease", "outcome": "sick_days"}
    made = http.post("/api/sessions", json={"title": TITLE, "name": PERSON, "document": doc}).json()
    sid, fac = made["session_id"], made["token"]
    eve = http.post("/api/join", json={"code": made["join_code"], "name": PERSON[:40]}).json()["token"]

    def ok(token, command):
        r = http.post(f"/api/sessions/{sid}/commands", json=command, headers={TOKEN_HEADER: token})
        assert r.status_code == 200, r.text

    ok(fac, {"type": "set_stage", "stage": "debating"})
    ok(eve, {"type": "propose", "kind": "add", "from": FORMULA, "to": "sick_days", "reason": REASON})
    ok(eve, {"type": "vote", "proposal": 1, "choice": "agree", "reason": VOTE})
    ok(eve, {"type": "vote", "from": VAR, "to": "bike_lease", "choice": "disagree", "reason": VOTE})
    ok(fac, {"type": "flag_arrow", "from": VAR, "to": "bike_lease", "flag": "disputed"})
    return {"sid": sid, "fac": fac, "eve": eve, "http": http}


def _no_injection(page) -> None:
    assert page.evaluate("window.__pwned") is None
    injected = page.evaluate("""() => ({
        img: document.querySelectorAll('img[src="x"]').length,
        iframe: document.querySelectorAll('iframe').length,
        scripts: [...document.scripts].filter(s => !s.src && s.type !== 'application/json').length,
        bold: document.querySelectorAll('b[onmouseover]').length,
        links: document.querySelectorAll('a[href^="javascript"]').length,
        svgOnload: document.querySelectorAll('svg[onload]').length,
    })""")
    # The page's own data block holds the title; it must not be able to close its <script>.
    data = page.evaluate("document.getElementById('page-data') && document.getElementById('page-data').textContent")
    assert data is None or "</script" not in data.lower()
    assert injected == {"img": 0, "iframe": 0, "scripts": 0, "bold": 0, "links": 0, "svgOnload": 0}


def test_markup_is_inert_everywhere_people_read_it(server):
    from playwright.sync_api import expect, sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    room = _room(server)
    errors: list[str] = []
    dialogs: list[str] = []
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        page.goto(f"{server}/s/{room['sid']}#key={room['fac']}")
        expect(page.locator(".live-status")).to_have_text("Live")

        # The canvas: the variable's label and the formula-like name are drawn as text.
        nodes = page.locator(".node")
        expect(nodes.first).to_be_visible()
        drawn = " | ".join(nodes.all_text_contents())
        assert "<script>window.__p" in drawn, drawn  # the long label is cut with an ellipsis, as text
        assert VAR in drawn, drawn                     # the name, in the node's tooltip
        assert FORMULA in drawn, drawn
        expect(page.locator("h1")).to_have_text(TITLE)
        _no_injection(page)
        page.screenshot(path=str(ARTIFACTS / "markup_canvas.png"))

        for tab, expected in (("Implications", None), ("Debate", REASON), ("History", PERSON),
                              ("People", PERSON)):
            page.get_by_role("tab", name=tab, exact=False).click()
            if expected:
                expect(page.get_by_role("tabpanel").get_by_text(expected, exact=False).first).to_be_visible()
            _no_injection(page)
            page.screenshot(path=str(ARTIFACTS / f"markup_panel_{tab.lower()}.png"))

        # The disputed arrow's own panel lists Eve's vote and its reason, as text.
        edges = page.locator(".edge")
        index = next(i for i in range(edges.count())
                     if json.loads(edges.nth(i).get_attribute("data-key") or "[]") == [VAR, "bike_lease"])
        box = edges.nth(index).locator(".edge-hit").bounding_box()
        page.mouse.click(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
        panel = page.get_by_role("tabpanel")
        expect(panel.get_by_text(VOTE, exact=False).first).to_be_visible()
        expect(panel).to_contain_text(PERSON)
        page.mouse.move(430, 140)  # hovering over everything must not run any handler in the text
        _no_injection(page)
        page.screenshot(path=str(ARTIFACTS / "markup_panel_selection.png"))

        # The report, as the analyst's browser opens it.
        context = browser.new_context(extra_http_headers={TOKEN_HEADER: room["fac"]},
                                      viewport={"width": 1200, "height": 900})
        report = context.new_page()
        report.on("pageerror", lambda e: errors.append(str(e)))
        report.on("dialog", lambda d: (dialogs.append(d.message), d.dismiss()))
        r = report.goto(f"{server}/api/sessions/{room['sid']}/report")
        assert r.status == 200
        body = report.locator("body").inner_text()
        assert "Bike leases" in body and "<img" in body  # the title's markup is shown, not run
        assert VAR in body or "&lt;svg" in report.content()
        _no_injection(report)
        report.screenshot(path=str(ARTIFACTS / "markup_report.png"), full_page=False)
        browser.close()
    assert dialogs == [] and errors == []
