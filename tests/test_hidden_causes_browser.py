"""The room's stated hidden causes in a real browser: a participant states one in the
debate panel, the facilitator sees the spread, and the estimation panel reads the
estimate against them with its chart. Screenshots in tests/artifacts/."""

from __future__ import annotations

import json
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"

pytestmark = pytest.mark.browser


def test_stated_hidden_causes_reach_the_spread_and_the_sensitivity_chart(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with running_server(tmp_path) as base, sync_playwright() as p:
        doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
        made = httpx.post(base + "/api/sessions", json={"title": "Bike leases and sick days", "name": "Fac",
                                                         "document": doc}).json()
        sid, fac = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
        commands = f"{base}/api/sessions/{sid}/commands"
        assert httpx.post(commands, json={"type": "set_stage", "stage": "debating"}, headers=fac).status_code == 200
        ben = httpx.post(base + "/api/join", json={"code": made["join_code"], "name": "Ben"}).json()["token"]
        assert httpx.post(commands, json={"type": "state_hidden_cause", "variable": "commute_km", "times": 0.5},
                          headers={"X-Arrowmoot-Token": ben}).status_code == 200
        ana = httpx.post(base + "/api/join", json={"code": made["join_code"], "name": "Ana"}).json()["token"]

        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        errors = []
        member = browser.new_page(viewport={"width": 1400, "height": 950})
        member.on("pageerror", lambda exc: errors.append(str(exc)))
        member.goto(f"{base}/s/{sid}#key={ana}")
        member.click("button[data-tab='debate']")
        member.select_option("select[name='hidden-cause-times']", "2")
        member.select_option("select[name='hidden-cause-variable']", "age")
        member.click("button[data-action='state-hidden-cause']")
        member.wait_for_selector("text=the strongest I can imagine is twice as strong as age.")
        member.locator("section.hidden-causes").screenshot(path=str(ARTIFACTS / "hidden_cause_member.png"))

        facilitator = browser.new_page(viewport={"width": 1400, "height": 950})
        facilitator.on("pageerror", lambda exc: errors.append(str(exc)))
        facilitator.goto(f"{base}/s/{sid}#key={made['token']}")
        facilitator.click("button[data-tab='debate']")
        spread = facilitator.locator("table.hidden-cause-spread")
        spread.wait_for()
        rows = {r.locator("th").inner_text(): r.locator("td").all_inner_texts()
                for r in spread.locator("tbody tr").all()}
        assert rows["age"][2] == "●" and rows["commute_km"][0] == "●"
        facilitator.locator("section.hidden-causes").screenshot(path=str(ARTIFACTS / "hidden_cause_spread.png"))

        assert httpx.post(commands, json={"type": "set_stage", "stage": "agreed"}, headers=fac).status_code == 200
        facilitator.click("button[data-tab='estimation']")
        facilitator.set_input_files("input[name='data-file']", str(SAMPLE / "cycle_to_work.csv"))
        facilitator.click("button[data-action='upload']")
        facilitator.wait_for_selector("text=Attached cycle_to_work.csv")
        facilitator.click("button[data-action='sensitivity']")
        facilitator.wait_for_selector("figure svg.am-shift")
        section = facilitator.locator("section[aria-label='Sensitivity']")
        reading = section.locator(".am-room-reading").inner_text()
        assert "median statement (half as strong as commute_km, stated by Ben)" in reading
        assert "strongest (twice as strong as age, stated by Ana)" in reading
        assert "not that none exists" in section.locator(".am-caution").inner_text()
        labels = [t.text_content() for t in section.locator("svg.am-shift text.am-stated-label").all()]
        assert any(t.startswith("room's strongest: twice as strong as age") for t in labels)
        assert section.locator("svg.am-shift g.am-stated").count() == 2
        section.screenshot(path=str(ARTIFACTS / "hidden_cause_sensitivity.png"))
        section.locator("figure:has(svg.am-shift)").screenshot(path=str(ARTIFACTS / "hidden_cause_chart.png"))
        assert not errors, errors
        browser.close()
