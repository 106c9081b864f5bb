"""The demo session a fresh server opens: in the debating stage, with invented
members, votes with reasons, open and settled disputes, and the invented data
attached and mapped, so that once the room agrees the diagram the estimate
recovers the generator's known effect (sample_data/make_cycle_to_work.py; a
simulated truth)."""

from __future__ import annotations

import json
import re
import shutil
from pathlib import Path

import pytest
from fastapi.testclient import TestClient

from app.settings import Settings
from tests.helpers.app import TOKEN_HEADER, make_app

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
TRUTH = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())["true_effect"]


class Demo:
    def __init__(self, client: TestClient, printed: str):
        found = re.search(r"/s/([^#\s]+)#key=(\S+)", printed)
        assert found, printed
        self.client, (self.id, self.key) = client, found.groups()

    def get(self, path: str = "") -> dict:
        r = self.client.get(f"/api/sessions/{self.id}{path}", headers={TOKEN_HEADER: self.key})
        assert r.status_code == 200, r.text
        return r.json()

    def post(self, path: str, body: dict):
        return self.client.post(f"/api/sessions/{self.id}{path}", json=body, headers={TOKEN_HEADER: self.key})


@pytest.fixture(name="demo")
def fixture_demo(tmp_path, capsys):
    with TestClient(make_app(tmp_path, demo=True)) as client:
        yield Demo(client, capsys.readouterr().err)


def test_demo_opens_in_debate_with_invented_members(demo):
    state = demo.get()["state"]
    assert state["session"]["stage"] == "debating"
    assert "invented" in state["session"]["title"]
    names = {m["name"]: m for m in state["members"]}
    assert len(names) == 5 and names["Morag (facilitator)"]["role"] == "facilitator"
    assert [n for n, m in names.items() if m["analyst"]] == ["Ingrid (people analytics)"]


def test_demo_has_votes_with_reasons_an_open_dispute_and_a_decided_one(demo):
    state = demo.get()["state"]
    by_status = {p["status"]: p for p in state["proposals"]}
    assert set(by_status) == {"disputed", "rejected", "open"}
    assert (by_status["disputed"]["from"], by_status["disputed"]["to"]) == ("commute_km", "fitness")
    assert by_status["rejected"]["settled_by_name"] == "Morag (facilitator)"
    assert by_status["open"]["tally"]["total"] == 2  # still open: a new user can vote on it
    votes = [v for p in state["proposals"] for v in p["votes"]]
    assert len(votes) == 7 and all(v["reason"] for v in votes)
    arrow = next(a for a in state["arrows"] if (a["from"], a["to"]) == ("fitness", "bike_lease"))
    assert arrow["flag"] == "disputed" and arrow["tally"] == {"agree": 2, "disagree": 1, "unsure": 0, "total": 3}
    assert {tuple(d["pair"]) for d in state["disputed"]} == {
        ("bike_lease", "fitness"), ("commute_km", "fitness"), ("sick_days", "voucher_draw")}


def test_demo_data_is_attached_and_mapped_but_waits_for_agreement(demo):
    data = demo.get("/estimation")["data"]
    assert data["name"] == "cycle_to_work.csv" and data["rows"] == 4000
    document = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    measured = {v["name"] for v in document["variables"] if not v["latent"]}
    assert data["mapping"] == {name: name for name in measured}
    assert "health_consciousness" not in data["mapping"]
    history = [e["summary"] for e in demo.get()["state"]["recent"]]
    assert any("invented data cycle_to_work.csv" in s and "wait until the diagram is agreed" in s for s in history)
    refused = demo.post("/estimation/estimate", {})
    assert refused.status_code == 409, refused.text


def test_estimating_from_the_demo_after_agreement_recovers_the_known_effect(demo):
    state = demo.get()["state"]
    still_open = next(p for p in state["proposals"] if p["status"] == "open")
    for command in ({"type": "settle", "proposal": still_open["id"], "decision": "reject"},
                    {"type": "set_stage", "stage": "agreed"}, {"type": "set_stage", "stage": "estimation"}):
        r = demo.post("/commands", command)
        assert r.status_code == 200, r.text
    r = demo.post("/estimation/estimate", {})
    assert r.status_code == 200, r.text
    result = r.json()["result"]
    assert result["adjustment_set"] == ["age", "commute_km", "department", "fitness"]
    assert result["ci"][0] <= TRUTH <= result["ci"][1]
    # the room's disputes are what the disagreement step combines (two disputed arrows left)
    r = demo.post("/estimation/disputes", {})
    assert r.status_code == 200, r.text
    rows = r.json()["result"]["rows"]
    assert len(rows) == 4  # two disputed arrows left, present or absent
    # fitness causes the outcome, so the most precise set keeps it whichever way the disputed
    # fitness -> bike_lease arrow goes, and every combination recovers the generator's effect
    for row in rows:
        assert "fitness" in (row.get("adjustment_set") or []), row
        assert row["ci"][0] <= TRUTH <= row["ci"][1], row


def test_refused_demo_step_keeps_the_session_and_names_the_step(tmp_path, capsys, caplog):
    for name in ("cycle_to_work.json", "cycle_to_work.csv"):
        shutil.copy(SAMPLE / name, tmp_path / name)
    debate = json.loads((SAMPLE / "cycle_to_work.session.json").read_text())
    debate["steps"].insert(1, {"by": "dev", "command": {"type": "settle", "proposal": 99, "decision": "accept"}})
    (tmp_path / "cycle_to_work.session.json").write_text(json.dumps(debate))
    settings = Settings(db_path=tmp_path / "a.sqlite3", data_dir=tmp_path / "d", demo_session=True,
                        demo_document=tmp_path / "cycle_to_work.json", analysis_in_process=False)
    from app.main import create_app

    with caplog.at_level("WARNING", logger="arrowmoot"), TestClient(create_app(settings=settings)) as client:
        demo = Demo(client, capsys.readouterr().err)
        assert demo.get()["state"]["session"]["stage"] == "debating"  # step 1 ran
    assert "step 2 of cycle_to_work.session.json was refused: only the facilitator can settle" in caplog.text


@pytest.mark.browser
def test_demo_estimation_tab_says_the_data_waits_for_agreement(tmp_path):
    """In a real chromium: the Estimation tab of the demo names the attached, mapped file,
    says it is used once the diagram is agreed, and offers no action that would be refused."""
    from playwright.sync_api import sync_playwright

    from tests.helpers.live_server import ARTIFACTS, CHROMIUM_ARGS, running_server

    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with running_server(tmp_path, demo=True) as base:
        found = re.search(r"/s/([^#\s]+#key=\S+)", (tmp_path / "server.log").read_text())
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path="/usr/bin/chromium", args=CHROMIUM_ARGS)
            page = browser.new_page(viewport={"width": 1440, "height": 900})
            page.goto(f"{base}/s/{found.group(1)}")
            page.click("button[data-tab='debate']")
            page.wait_for_selector("text=Leave disputed")
            page.screenshot(path=str(ARTIFACTS / "demo-debate.png"))
            page.click("button[data-tab='estimation']")
            note = page.locator("[data-note='stage']")
            note.wait_for()
            assert note.inner_text() == (
                "cycle_to_work.csv is attached, with 9 variables mapped to its columns; it is used once "
                "the room has agreed the diagram. The facilitator moves the session to “Agreed” or "
                "“Estimation” first.")
            assert page.locator("select[data-variable='fitness']").input_value() == "fitness"
            for action in ("upload", "mapping", "estimate"):
                assert page.locator(f"button[data-action='{action}']").is_disabled()
            page.screenshot(path=str(ARTIFACTS / "demo-estimation-debating.png"))
            browser.close()


def test_demo_room_has_stated_hidden_causes(demo):
    statements = demo.get()["state"]["hidden_causes"]["statements"]
    assert [(s["by"], s["words"]) for s in statements] == [
        ("Dev (warehouse manager)", "half as strong as age"),
        ("Tomasz (occupational health)", "about as strong as fitness"),
        ("Ruth (staff representative)", "twice as strong as commute_km")]
