"""The estimation panel in a real browser: upload, estimate, charts, and a
failing implication shown on the diagram. Screenshots in tests/artifacts/."""

from __future__ import annotations

import json
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server

ROOT = Path(__file__).resolve().parents[1]
SAMPLE = ROOT / "sample_data"

pytestmark = pytest.mark.browser


@pytest.fixture(name="server")
def fixture_server(tmp_path):
    with running_server(tmp_path) as base:
        yield base


def _prepare_session(base: str) -> tuple[str, str]:
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    made = httpx.post(base + "/api/sessions", json={"title": "Bike leases and sick days", "name": "Fac", "document": doc}).json()
    sid, headers = made["session_id"], {"X-Arrowmoot-Token": made["token"]}

    def send(command):
        r = httpx.post(f"{base}/api/sessions/{sid}/commands", json=command, headers=headers)
        assert r.status_code == 200, r.text

    # the room forgot that age shapes fitness: the data will contradict that
    send({"type": "delete_arrow", "from": "age", "to": "fitness"})
    send({"type": "flag_arrow", "from": "fitness", "to": "bike_lease", "flag": "disputed"})
    send({"type": "set_stage", "stage": "agreed"})
    return sid, made["token"]


def test_estimation_panel_shows_results_and_charts(server):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    sid, token = _prepare_session(server)
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1500, "height": 1000})
        errors = []
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto(f"{server}/s/{sid}#key={token}")
        page.click("button[data-tab='estimation']")
        page.set_input_files("input[name='data-file']", str(SAMPLE / "cycle_to_work.csv"))
        page.click("button[data-action='upload']")
        page.wait_for_selector("text=Attached cycle_to_work.csv")
        assert page.locator("select[data-variable='bike_lease']").input_value() == "bike_lease"
        assert page.locator("select[data-variable='health_consciousness']").input_value() == ""

        page.select_option("select[name='method']", "weighting")
        page.click("button[data-action='estimate']")
        page.wait_for_selector(".am-result")
        page.wait_for_selector("figure svg.am-overlap")
        headline = page.locator(".am-headline strong").inner_text()
        assert float(headline) == pytest.approx(-1.6, abs=0.2)
        assert "not a substitute" in page.locator(".am-caution").inner_text()

        failing = page.locator("tr.am-fail .am-claim")
        assert failing.count() >= 1
        assert failing.first.inner_text().startswith(("age and fitness independent", "fitness and age independent"))
        page.evaluate("window.__flags = []; window.addEventListener('arrowmoot:highlight', (e) => window.__flags.push(e.detail));")
        page.locator("button.am-flag").first.click()
        flags = page.evaluate("window.__flags")
        assert flags and set(flags[0]["nodes"]) == {"age", "fitness"}
        marked = page.evaluate("[...document.querySelectorAll('.node.am-flag-pair')].map(n => n.dataset.name).sort()")
        assert marked == ["age", "fitness"]
        given = page.evaluate("[...document.querySelectorAll('.node.am-flag-given')].map(n => n.dataset.name)")
        assert given == ["department"]
        page.locator(".canvas-wrap").screenshot(path=str(ARTIFACTS / "estimation_canvas_flag.png"))

        # the checks against the data started by themselves; the page answers meanwhile
        page.click("button[data-action='sensitivity']")
        page.wait_for_selector("figure svg.am-shift")
        page.click("button[data-action='disputes']")
        page.wait_for_selector("figure svg.am-forest")

        page.screenshot(path=str(ARTIFACTS / "estimation_panel.png"))
        page.locator("figure:has(svg.am-overlap)").screenshot(path=str(ARTIFACTS / "estimation_overlap.png"))
        page.locator("figure:has(svg.am-shift)").screenshot(path=str(ARTIFACTS / "estimation_hidden_cause.png"))
        page.locator("figure:has(svg.am-forest)").screenshot(path=str(ARTIFACTS / "estimation_forest.png"))
        page.locator(".am-result").screenshot(path=str(ARTIFACTS / "estimation_result.png"))
        page.wait_for_selector(".am-verdict[data-verdict]", timeout=180_000)
        assert page.locator(".am-verdict").inner_text().startswith("Checks against the data: contradicted")
        page.wait_for_selector("table.am-validation")
        page.locator("section[aria-label='Checks against the data']").screenshot(path=str(ARTIFACTS / "estimation_checks_verdict.png"))
        # the facilitator sends one arrow the data point to back to the debate, evidence attached
        repair = page.locator("details[data-repairs='implications-each'] button[data-action='propose-repair']")
        assert repair.count() >= 1
        kind, source, target = repair.first.get_attribute("data-repair").split(":")
        repair.first.click()
        page.wait_for_selector("text=Proposed in the debate")
        state = httpx.get(f"{server}/api/sessions/{sid}", headers={"X-Arrowmoot-Token": token}).json()
        assert state["state"]["session"]["stage"] == "debating"
        sent = [q for q in state["state"]["proposals"] if (q["from"], q["to"]) == (source, target)]
        assert sent and "contradict" in sent[0]["reason"]
        page.locator("section[aria-label='Sensitivity']").screenshot(path=str(ARTIFACTS / "estimation_sensitivity.png"))
        page.locator("section[aria-label='Diagram against the data']").screenshot(path=str(ARTIFACTS / "estimation_checks.png"))
        forest_rows = page.locator("svg.am-forest .am-point").count()
        assert forest_rows == 2
        assert not errors, errors
        browser.close()


def test_bad_file_message_and_participant_view(server, tmp_path):
    """A refused upload shows the server's message and keeps the data; a participant
    sees the results but cannot run anything."""
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    sid, token = _prepare_session(server)
    headers = {"X-Arrowmoot-Token": token}
    base = f"{server}/api/sessions/{sid}/estimation"
    assert httpx.put(f"{base}/data?name=cycle_to_work.csv", content=(SAMPLE / "cycle_to_work.csv").read_bytes(),
                     headers=headers).status_code == 200
    assert httpx.post(f"{base}/estimate", json={}, headers=headers, timeout=60).status_code == 200
    code = httpx.get(f"{server}/api/sessions/{sid}", headers=headers).json()["state"]["session"]["join_code"]
    guest = httpx.post(f"{server}/api/join", json={"code": code, "name": "Pat"}).json()["token"]
    broken = tmp_path / "broken.csv"
    broken.write_bytes(b"a,b\n1,2\n")
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1400, "height": 900})
        page.goto(f"{server}/s/{sid}#key={token}")
        page.click("button[data-tab='estimation']")
        page.wait_for_selector(".am-result")
        page.set_input_files("input[name='data-file']", str(broken))
        page.click("button[data-action='upload']")
        page.locator("dialog.confirm-step button", has_text="Attach and discard them").click()
        alert = page.locator(".am-message.am-error")
        alert.wait_for()
        assert "broken.csv has only one data row" in alert.inner_text()
        assert page.locator("button[data-action='upload']").is_disabled()  # the refused file is not offered again
        assert "cycle_to_work.csv: 4,000 rows" in page.locator("section[aria-label='Data']").inner_text()
        page.screenshot(path=str(ARTIFACTS / "estimation_refused_upload.png"))

        other = browser.new_page(viewport={"width": 1400, "height": 900})
        other.goto(f"{server}/s/{sid}#key={guest}")
        other.click("button[data-tab='estimation']")
        other.wait_for_selector(".am-result")
        assert other.locator("button[data-action='estimate']").is_disabled()
        assert other.locator("input[name='data-file']").count() == 0
        other.screenshot(path=str(ARTIFACTS / "estimation_participant.png"))
        browser.close()


def test_open_panel_shows_data_attached_by_someone_else_without_polling(server):
    """An upload by the facilitator appears on a participant's open panel without a reload
    (the panel listens to the live session), and a quiet session asks the server for nothing."""
    from playwright.sync_api import expect, sync_playwright

    sid, token = _prepare_session(server)
    code = httpx.get(f"{server}/api/sessions/{sid}", headers={"X-Arrowmoot-Token": token}).json()["state"]["session"]["join_code"]
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        requests: list[str] = []
        page.on("request", lambda r: requests.append(r.url) if r.url.endswith("/estimation") else None)
        page.goto(f"{server}/join/{code}")
        page.fill("input[name=name]", "Sam")
        page.click("#join-form button[type=submit]")
        page.click(".tab[data-tab=estimation]")
        expect(page.locator("#estimation-panel")).to_contain_text("No data attached yet")
        page.wait_for_timeout(4000)  # quiet: no edit, so no further request
        quiet = len(requests)
        assert quiet <= 1, requests
        r = httpx.put(f"{server}/api/sessions/{sid}/estimation/data?name=cycle_to_work.csv",
                      content=(SAMPLE / "cycle_to_work.csv").read_bytes(), headers={"X-Arrowmoot-Token": token})
        assert r.status_code == 200, r.text
        expect(page.locator("#estimation-panel")).to_contain_text("cycle_to_work.csv", timeout=10_000)
        assert len(requests) > quiet
        browser.close()
