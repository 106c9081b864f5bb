"""Every page checked with axe-core (the npm package, injected into chromium).

Serious and critical findings fail the test; every page's counts by impact are
printed in the test output. scripts/test.sh installs axe-core into tests/.axe.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS
from tests.helpers.room import DOCUMENT, TOKEN_HEADER, wait

AXE = Path(__file__).resolve().parent / ".axe" / "node_modules" / "axe-core" / "axe.min.js"

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
    pytest.mark.skipif(not AXE.exists(), reason="axe-core is not installed (scripts/test.sh installs it)"),
]

IMPACTS = ("critical", "serious", "moderate", "minor")


def _audit(page, where, results, capsys):
    """Inject axe-core, run it on the page as it is, and keep the counts."""
    page.add_script_tag(path=str(AXE))
    found = page.evaluate("axe.run(document, { resultTypes: ['violations'] })"
                          ".then((r) => r.violations.map((v) => ({ id: v.id, impact: v.impact, help: v.help,"
                          " nodes: v.nodes.slice(0, 3).map((n) => n.target.join(' ')) })))")
    counts = {impact: sum(1 for v in found if v["impact"] == impact) for impact in IMPACTS}
    results[where] = {"counts": counts, "violations": found}
    with capsys.disabled():
        print(f"\naxe-core {where}: " + ", ".join(f"{counts[i]} {i}" for i in IMPACTS), end="")
    return [v for v in found if v["impact"] in ("critical", "serious")]


def test_every_page_has_no_serious_or_critical_axe_finding(tmp_path, capsys):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(exist_ok=True)
    results: dict = {}
    bad: dict = {}
    with running_server(tmp_path) as base, httpx.Client(base_url=base, timeout=30) as http, \
            sync_playwright() as p:
        created = http.post("/api/sessions", json={"title": "Axe check", "name": "Fay", "document": DOCUMENT}).json()
        sid, fac, code = created["session_id"], created["token"], created["join_code"]
        ann = http.post("/api/join", json={"code": code, "name": "Ann"}).json()["token"]

        def send(token, command):
            r = http.post(f"/api/sessions/{sid}/commands", json=command, headers={TOKEN_HEADER: token})
            assert r.status_code == 200, r.text

        send(fac, {"type": "set_stage", "stage": "debating"})
        send(ann, {"type": "propose", "kind": "add", "from": "commute", "to": "fitness", "reason": "hills"})
        send(ann, {"type": "vote", "from": "age", "to": "sick_days", "choice": "disagree", "reason": "no"})
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            for width, height in ((1440, 900), (390, 844)):
                # the pages forbid inline scripts; axe is injected as one
                context = browser.new_context(viewport={"width": width, "height": height}, bypass_csp=True)
                page = context.new_page()
                size = f"{width}x{height}"

                def check(where, page=page, size=size):
                    issues = _audit(page, f"{where} {size}", results, capsys)
                    if issues:
                        bad[f"{where} {size}"] = issues

                page.goto(base + "/")
                check("home")
                page.goto(base + "/join")
                check("join form")
                page.goto(base + f"/join/{code}")
                check("join with code")
                page.goto(base + "/records")
                check("records")
                page.goto(base + "/no-such-page")
                check("error page")
                page.goto(f"{base}/s/{sid}#key={fac}")
                wait(page, "!!(window.arrowmoot?.analysis && document.querySelector('.live-status.live-live'))",
                     "live with its analysis")
                for tab in ("analysis", "debate", "selection", "history", "people"):
                    page.locator(f'.tabs [data-tab="{tab}"]').click()
                    page.wait_for_timeout(150)
                    check(f"session {tab} tab")
                page.locator('.node[data-name="fitness"] .shape').first.click()
                page.wait_for_timeout(150)
                check("session variable selected")
                page.locator(".join-code").click()
                check("session join screen")
                page.locator("dialog.join-screen button", has_text="Close").click()
                page.locator(".stages button", has_text="3. Agreed").click()
                check("session stage confirmation")
                page.locator("dialog.confirm-step button").last.click()
                page.locator(".toolbar button", has_text="Keys").click()
                check("session shortcuts")
                page.keyboard.press("Escape")
                link = http.post(f"/api/sessions/{sid}/report/link", headers={TOKEN_HEADER: fac}).json()["url"]
                page.goto(base + link)
                check("report")
                context.close()
            context = browser.new_context(bypass_csp=True)
            page = context.new_page()
            page.goto(base + "/")
            page.evaluate("document.body.append(Object.assign(document.createElement('img'), { src: 'x.png' }))")
            _audit(page, "planted fault", results, capsys)
        finally:
            browser.close()
    (ARTIFACTS / "axe-results.json").write_text(json.dumps(results, indent=2))
    # the audit itself can fail: an image without a text alternative is critical to axe
    assert results["planted fault"]["counts"]["critical"] >= 1
    assert not bad, json.dumps(bad, indent=2)
