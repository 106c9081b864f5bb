"""The mapping in a real browser: each column's reading beside its selector, a warning for a
text column measuring a quantity, text cells in a numeric column counted with an offer to
treat them as missing, and the coding of text columns with the result.
Data: the shipped invented sample, altered. Screenshots in tests/artifacts/."""

from __future__ import annotations

import json
from pathlib import Path

import httpx
import numpy as np
import pandas as pd
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"

pytestmark = pytest.mark.browser


def _session(base: str) -> tuple[str, str]:
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    made = httpx.post(base + "/api/sessions", json={"title": "Reading data", "name": "Fac", "document": doc}).json()
    r = httpx.post(f"{base}/api/sessions/{made['session_id']}/commands", json={"type": "set_stage", "stage": "agreed"},
                   headers={"X-Arrowmoot-Token": made["token"]})
    assert r.status_code == 200, r.text
    return made["session_id"], made["token"]


def test_mapping_shows_kinds_warns_and_offers_missing(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    frame["site"] = np.array(["north", "east", "west"])[np.arange(len(frame)) % 3]
    frame["fitness"] = frame["fitness"].astype(object)
    frame.loc[np.arange(len(frame)) % 7 == 0, "fitness"] = "unknown"
    path = tmp_path / "altered.csv"
    frame.to_csv(path, index=False)
    cells = int((np.arange(len(frame)) % 7 == 0).sum())
    with running_server(tmp_path) as base, sync_playwright() as p:
        sid, token = _session(base)
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        errors: list[str] = []
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto(f"{base}/s/{sid}#key={token}")
        page.click("button[data-tab='estimation']")
        page.set_input_files("input[name='data-file']", str(path))
        page.click("button[data-action='upload']")
        page.wait_for_selector("text=Attached altered.csv")
        assert page.locator("[data-kind-of='bike_lease']").inner_text() == "two values (0/1)"
        assert page.locator("[data-kind-of='department']").inner_text() == "text: 3 categories"
        assert page.locator("[data-kind-of='fitness']").inner_text() == f"numbers, with text in {cells} rows"
        assert "unknown" in page.locator("[data-warning='fitness']").inner_text()
        # the kind follows the selector before saving; saving a text column for a quantity warns
        page.select_option("select[data-variable='age']", "site")
        assert page.locator("[data-kind-of='age']").inner_text() == "text: 3 categories"
        page.click("button[data-action='mapping']")
        page.wait_for_selector("[data-warning='age']")
        assert "warning" in page.locator(".am-message").inner_text()
        assert "'east' the reference level" in page.locator("[data-warning='age']").inner_text()
        page.screenshot(path=str(ARTIFACTS / "mapping_warnings.png"))
        page.select_option("select[data-variable='age']", "age")
        page.click("button[data-action='text-as-missing'][data-column='fitness']")
        page.wait_for_selector("[data-note='text-as-missing']")
        assert page.locator("[data-warning]").count() == 0
        assert page.locator("[data-kind-of='fitness']").inner_text() == "number"
        page.click("button[data-action='estimate']")
        page.wait_for_selector(".am-result")
        coding = page.locator("[data-result='coding']").inner_text()
        assert "department" in coding and "reference level" in coding
        page.screenshot(path=str(ARTIFACTS / "estimate_coding.png"))
        browser.close()
        assert errors == []


def test_only_applicable_methods_are_offered_and_labels_stay_true(tmp_path):
    from playwright.sync_api import sync_playwright

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with running_server(tmp_path) as base, sync_playwright() as p:
        sid, token = _session(base)
        up = httpx.put(f"{base}/api/sessions/{sid}/estimation/data?name=cycle_to_work.csv",
                       content=(SAMPLE / "cycle_to_work.csv").read_bytes(), headers={"X-Arrowmoot-Token": token})
        assert up.status_code == 200, up.text
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1280, "height": 720})
        errors: list[str] = []
        page.on("pageerror", lambda exc: errors.append(str(exc)))
        page.goto(f"{base}/s/{sid}#key={token}")
        page.click("button[data-tab='estimation']")
        page.wait_for_selector("select[name='method']")
        offered = page.eval_on_selector_all("select[name='method'] option", "os => os.map(o => o.value)")
        assert "standardization" not in offered and "front-door" not in offered and "weighting" in offered
        page.locator("[data-not-offered] summary").click()
        assert "binary (0/1) outcome" in page.locator("[data-not-offered] li[data-method='standardization']").inner_text()
        page.click("button[data-action='estimate']")
        page.wait_for_selector(".am-result")
        label = page.locator(".am-facts dd").first.inner_text()
        # choosing another method without estimating says the shown result is not by it
        page.select_option("select[name='method']", "weighting")
        assert label in page.locator("[data-note='method-differs']").inner_text()
        # a refused method: the selector returns to the method of the result shown
        page.route("**/estimation/estimate", lambda route: route.fulfill(
            status=422, content_type="application/json",
            body=json.dumps({"ok": False, "error": {"code": "bad_method", "message": "method 'weighting' needs more"}})))
        page.click("button[data-action='estimate']")
        page.wait_for_selector(".am-message.am-error")
        assert "earlier one" in page.locator(".am-message").inner_text()
        assert page.locator("select[name='method']").input_value() != "weighting"
        assert page.locator("[data-note='method-differs']").count() == 0
        page.screenshot(path=str(ARTIFACTS / "methods_offered.png"))
        browser.close()
        assert errors == []


def test_upload_checks_size_first_and_confirms_before_discarding(tmp_path, monkeypatch):
    from playwright.sync_api import sync_playwright

    monkeypatch.setenv("ARROWMOOT_UPLOAD_LIMIT_BYTES", "400000")
    big = tmp_path / "big.csv"
    big.write_text("a,b\n" + "1,2\n" * 120_000)  # 480 kB, over the limit
    with running_server(tmp_path) as base, sync_playwright() as p:
        sid, token = _session(base)
        browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
        page = browser.new_page(viewport={"width": 1440, "height": 900})
        sent: list[str] = []
        page.on("request", lambda r: sent.append(r.url) if r.method == "PUT" else None)
        page.goto(f"{base}/s/{sid}#key={token}")
        with page.expect_response(lambda r: r.url.endswith("/estimation") and r.request.method == "GET"):
            page.click("button[data-tab='estimation']")
        page.set_input_files("input[name='data-file']", str(big))
        page.wait_for_selector(".am-message.am-error")
        assert "Nothing was sent" in page.locator(".am-message").inner_text()
        assert page.locator("button[data-action='upload']").is_disabled() and sent == []
        page.set_input_files("input[name='data-file']", str(SAMPLE / "cycle_to_work.csv"))
        page.click("button[data-action='upload']")
        page.wait_for_selector("text=Attached cycle_to_work.csv")
        page.click("button[data-action='estimate']")
        page.wait_for_selector(".am-result")
        page.set_input_files("input[name='data-file']", str(SAMPLE / "cycle_to_work.csv"))
        page.click("button[data-action='upload']")
        page.wait_for_selector("dialog.confirm-step")
        assert "discards the results" in page.locator("dialog.confirm-step").inner_text()
        page.screenshot(path=str(ARTIFACTS / "upload_confirm.png"))
        page.locator("dialog.confirm-step button", has_text="Cancel").click()
        assert page.locator(".am-result").count() == 1 and len(sent) == 1
        browser.close()
