"""The checks against the data in a real browser: a long run shows its progress with a
Stop button, the page keeps working meanwhile, Stop ends it; a finished run puts its
verdict under the headline number and the demo data are named as such. Screenshots in
tests/artifacts/."""

from __future__ import annotations

import json
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"

pytestmark = pytest.mark.browser


def test_long_checks_show_progress_and_stop_from_the_page(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with running_server(tmp_path) as base:
        doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
        made = httpx.post(base + "/api/sessions", json={"title": "Checks", "name": "Fac", "document": doc}).json()
        sid, token = made["session_id"], made["token"]
        head = {"X-Arrowmoot-Token": token}
        for command in ({"type": "delete_arrow", "from": "commute_km", "to": "bike_lease"},  # two valid sets now
                        {"type": "set_stage", "stage": "agreed"}):
            r = httpx.post(f"{base}/api/sessions/{sid}/commands", json=command, headers=head)
            assert r.status_code == 200, r.text
        r = httpx.put(f"{base}/api/sessions/{sid}/estimation/data?name=cycle_to_work.csv",
                      content=(SAMPLE / "cycle_to_work.csv").read_bytes(), headers=head, timeout=60)
        assert r.status_code == 200, r.text
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": 1400, "height": 1000})
            errors = []
            page.on("pageerror", lambda exc: errors.append(str(exc)))
            page.goto(f"{base}/s/{sid}#key={token}")
            page.click("button[data-tab='estimation']")
            page.wait_for_selector("text=Demo data")  # the shipped sample, recognised by its digest
            page.click("button[data-action='estimate']")
            page.wait_for_selector(".am-headline")
            page.wait_for_selector(".am-verdict[data-verdict]", timeout=120_000)
            verdict = page.locator(".am-verdict").inner_text()
            assert verdict.startswith("Checks against the data: ")
            assert "contradict" in verdict
            page.locator(".am-result").screenshot(path=str(ARTIFACTS / "validation_verdict_headline.png"))

            # a long run (weighting refitted on 2,000 resamples per set) started again: progress, then Stop
            r = httpx.post(f"{base}/api/sessions/{sid}/estimation/validation", json={"resamples": 2000, "method": "weighting"},
                       headers=head)
            assert r.status_code == 202, r.text
            page.click("button[data-tab='analysis']")  # away and back: the panel reloads and finds the run
            page.click("button[data-tab='estimation']")
            page.wait_for_selector("[data-progress='running'] progress", timeout=30_000)
            page.locator("section[aria-label='Checks against the data']").screenshot(
                path=str(ARTIFACTS / "validation_progress.png"))
            # the server keeps answering meanwhile
            alive = httpx.get(f"{base}/api/sessions/{sid}", headers=head, timeout=5)
            assert alive.status_code == 200
            page.click("button[data-action='stop-checks']")
            page.wait_for_selector("text=were stopped", timeout=30_000)
            run = httpx.get(f"{base}/api/sessions/{sid}/estimation/validation/run", headers=head).json()["run"]
            assert run["state"] == "stopped"
            # what was stored before the stop stays
            assert httpx.get(f"{base}/api/sessions/{sid}/estimation", headers=head).json()["validation"]["verdict"]
            assert not errors, errors
            browser.close()
