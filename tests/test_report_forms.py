"""The no-script pages at /records: show a bundle's report, reopen a bundle as a session."""

from __future__ import annotations

import json

import pytest
from fastapi.testclient import TestClient

from tests.helpers.app import make_app
from tests.helpers.workshop import build_workshop


@pytest.fixture(name="setup", scope="module")
def fixture_setup(tmp_path_factory):
    application = make_app(tmp_path_factory.mktemp("forms"))
    with TestClient(application) as client:
        workshop = build_workshop(client, estimate=False)
        yield client, workshop.get("/export/bundle").content


def test_records_page_offers_both_forms(setup):
    client, _ = setup
    r = client.get("/records")
    assert r.status_code == 200
    assert 'action="/records/report"' in r.text and 'action="/records/import"' in r.text


def test_form_shows_the_report(setup):
    client, raw = setup
    r = client.post("/records/report", files={"bundle": ("s.record.json", raw, "application/json")})
    assert r.status_code == 200 and 'id="decisions"' in r.text
    assert "default-src 'none'" in r.headers["content-security-policy"]


def test_form_reopens_a_session_and_gives_its_link(setup):
    client, raw = setup
    r = client.post("/records/import", files={"bundle": ("s.record.json", raw, "application/json")},
                    data={"mode": "new", "name": "Quinn"})
    assert r.status_code == 201 and "Session reopened" in r.text
    link = r.text.split('class="key-link" href="')[1].split('"')[0]
    session_id, token = link[len("/s/"):].split("#key=")
    state = client.get(f"/api/sessions/{session_id}", headers={"X-Arrowmoot-Token": token})
    assert state.status_code == 200 and state.json()["member"]["name"] == "Quinn"


def test_form_refusal_is_shown_on_the_page(setup):
    client, raw = setup
    bad = json.dumps({**json.loads(raw), "version": 9}).encode()
    r = client.post("/records/import", files={"bundle": ("s.record.json", bad, "application/json")},
                    data={"mode": "new"})
    assert r.status_code == 422 and "bundle version 9 is not the version this software reads" in r.text
    r = client.post("/records/report", files={"bundle": ("x.json", b"not json", "application/json")})
    assert r.status_code == 400 and "the bundle is not valid JSON" in r.text


def test_report_link_opens_the_report_without_the_key_until_it_expires(tmp_path, monkeypatch):
    from app.web.routes import records

    application = make_app(tmp_path)
    with TestClient(application) as client:
        workshop = build_workshop(client, estimate=False)
        url = f"/api/sessions/{workshop.session_id}/report/link"
        assert client.post(url, headers=workshop.headers(workshop.participant)).status_code == 403
        made = client.post(url, headers=workshop.headers(workshop.analyst)).json()
        assert made["expires_in"] == 120 and made["url"].startswith("/records/view/")
        r = client.get(made["url"])
        assert r.status_code == 200 and 'id="decisions"' in r.text
        assert "default-src 'none'" in r.headers["content-security-policy"]
        assert client.get("/records/view/not-a-ticket").status_code == 404
        later = records.time.time() + 121
        monkeypatch.setattr(records.time, "time", lambda: later)
        r = client.get(made["url"])
        assert r.status_code == 404 and "expired" in r.text
