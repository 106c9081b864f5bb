"""The record bundle: what it holds, export → import → export, and refused bundles.

References outside the project: the data fingerprint is checked against
hashlib.sha256 of sample_data/cycle_to_work.csv read here; the identification
part against a fresh app.graph.identification.analyze of the agreed graph
(itself held to networkx d-separation in tests/test_identification_reference.py).
"""

from __future__ import annotations

import copy
import hashlib
import json

import pytest
from fastapi.testclient import TestClient

import app
from app.graph.document import parse_document
from app.graph.identification import analyze
from app.reporting.bundle import BundleError, validate_bundle
from tests.helpers.app import make_app
from tests.helpers.workshop import SAMPLE, TOKEN_HEADER, build_workshop


@pytest.fixture(name="recorded", scope="module")
def fixture_recorded(tmp_path_factory):
    application = make_app(tmp_path_factory.mktemp("bundle"))
    with TestClient(application) as client:
        workshop = build_workshop(client)
        r = workshop.get("/export/bundle", workshop.analyst)
        assert r.status_code == 200, r.text
        yield workshop, r.json(), application


def test_bundle_names_its_format_version_and_software(recorded):
    _, bundle, _ = recorded
    assert bundle["format"] == "arrowmoot-record" and bundle["version"] == 1
    assert bundle["software"] == {"name": "arrowmoot", "version": app.__version__}


def test_bundle_fingerprints_the_data_file(recorded):
    _, bundle, _ = recorded
    expected = hashlib.sha256((SAMPLE / "cycle_to_work.csv").read_bytes()).hexdigest()
    assert bundle["data"]["sha256"] == expected
    assert bundle["data"]["rows"] == 4000 and bundle["data"]["name"] == "cycle_to_work.csv"


def test_bundle_variables_carry_description_and_measuring_column(recorded):
    _, bundle, _ = recorded
    by_name = {v["name"]: v for v in bundle["variables"]}
    source = {v["name"]: v for v in json.loads((SAMPLE / "cycle_to_work.json").read_text())["variables"]}
    assert set(by_name) == set(source)
    for name, v in by_name.items():
        assert v["description"] == source[name].get("description")
    assert by_name["fitness"]["column"] == "fitness"
    assert by_name["health_consciousness"]["column"] is None and by_name["health_consciousness"]["latent"]


def test_bundle_keeps_every_proposal_and_vote_with_name_time_and_reason(recorded):
    _, bundle, _ = recorded
    first, second = bundle["proposals"]
    assert (first["kind"], first["from"], first["to"], first["status"]) == ("add", "commute_km", "fitness", "disputed")
    assert first["by_name"] == "Pat (occupational health)"
    assert first["reason"] == "People with long commutes have less time to exercise"
    votes = {(v["name"], v["choice"], v["reason"]) for v in first["votes"]}
    assert votes == {("Ana (HR analyst)", "agree", "matches the survey"),
                     ("Fran (facilitator)", "disagree", "fitness was measured first")}
    assert all(isinstance(v["at"], float) and v["at"] > 0 for v in first["votes"])
    assert second["status"] == "rejected" and second["settled_by_name"] == "Fran (facilitator)"
    (arrow,) = bundle["arrow_votes"]
    assert (arrow["from"], arrow["to"]) == ("voucher_draw", "bike_lease")
    assert arrow["votes"][0]["reason"] == "not everyone reads the e-mails"


def test_bundle_records_decisions_and_stage_history(recorded):
    _, bundle, _ = recorded
    summaries = [d["summary"] for d in bundle["decisions"]]
    assert "left disputed proposal #1: add commute_km → fitness" in summaries
    assert "rejected proposal #2: remove department → bike_lease" in summaries
    assert all(d["by"] == "Fran (facilitator)" for d in bundle["decisions"])
    assert [(s["from"], s["to"]) for s in bundle["stages"]] == [
        ("drafting", "debating"), ("debating", "agreed"), ("agreed", "estimation")]
    assert [e["revision"] for e in bundle["history"]] == sorted(e["revision"] for e in bundle["history"])
    assert not any("before" in e for e in bundle["history"])


def test_bundle_identification_matches_a_fresh_analysis(recorded):
    _, bundle, _ = recorded
    fresh = analyze(parse_document(bundle["graph"]))
    ident = bundle["identification"]
    for key in ("identifiable", "strategy", "minimal_adjustment_sets", "roles", "implications_total"):
        assert ident[key] == fresh[key], key
    assert bundle["disputes"]["count"] == 1
    assert bundle["absent_arrows"]["total"] >= 1


def test_bundle_holds_estimates_tests_verdict_and_sensitivity_without_markup(recorded):
    _, bundle, _ = recorded
    est = bundle["estimation"]["estimate"]
    assert est["method"] == "regression" and est["n_used"] == 4000
    assert est["adjustment_set"] == ["age", "commute_km", "department", "fitness"]
    assert bundle["implication_tests"]["tested"] == est["checks"]["tested"] > 0
    verdict = bundle["estimation"]["validation"]
    assert verdict["verdict"] == "no contradiction found" and verdict["run"] >= 2
    assert {i["check"] for i in verdict["items"]} >= {"set-agreement", "control-outcomes", "implications-together"}
    assert bundle["estimation"]["sensitivity"]["regression"]["robustness_value"] > 0
    assert len(bundle["estimation"]["disputes"]["rows"]) == 2
    assert "<svg" not in json.dumps(bundle)  # charts are drawn again, never carried


def _comparable(b: dict) -> dict:
    """What must survive an import unchanged (ids, revisions and the importer differ)."""
    out = copy.deepcopy(b)
    for key in ("exported_at", "session", "members", "history", "workshop", "decisions", "stages"):
        out.pop(key)
    return out


def _import(client, bundle, mode="new", name="Quinn"):
    return client.post(f"/api/records/import?mode={mode}&name={name}", content=json.dumps(bundle))


def test_import_as_new_session_reopens_it_as_it_was(recorded):
    workshop, bundle, application = recorded
    client = workshop.client
    r = _import(client, bundle)
    assert r.status_code == 201, r.text
    made = r.json()
    assert made["session_id"] != workshop.session_id and made["member"]["role"] == "facilitator"
    head = {TOKEN_HEADER: made["token"]}
    again = client.get(f"/api/sessions/{made['session_id']}/export/bundle", headers=head).json()
    assert _comparable(again) == _comparable(bundle)
    assert again["decisions"] == bundle["decisions"] and again["stages"] == bundle["stages"]
    assert again["history"][:-1] == bundle["history"]
    assert again["history"][-1]["kind"] == "import_record"
    assert {m["name"] for m in again["members"]} == {m["name"] for m in bundle["members"]} | {"Quinn"}
    state = client.get(f"/api/sessions/{made['session_id']}", headers=head).json()["state"]
    assert state["session"]["stage"] == "estimation"
    # the results are back, with their charts drawn again from the numbers
    est = client.get(f"/api/sessions/{made['session_id']}/estimation", headers=head).json()
    assert est["estimate"]["estimate"] == bundle["estimation"]["estimate"]["estimate"]
    assert est["disputes"]["charts"]["forest"].startswith("<svg")
    assert est["sensitivity"]["charts"]["hidden_cause"].startswith("<svg")
    # the data file is not in the bundle: estimating again asks for it
    r = client.post(f"/api/sessions/{made['session_id']}/estimation/estimate", json={}, headers=head)
    assert r.status_code == 404 and r.json()["code"] == "data_missing"


def test_imported_session_can_continue_with_the_same_data(recorded):
    workshop, bundle, _ = recorded
    client = workshop.client
    made = _import(client, bundle).json()
    head = {TOKEN_HEADER: made["token"]}
    base = f"/api/sessions/{made['session_id']}/estimation"
    assert client.put(f"{base}/data?name=cycle_to_work.csv", content=(SAMPLE / "cycle_to_work.csv").read_bytes(),
                      headers=head).status_code == 200
    r = client.post(f"{base}/estimate", json={}, headers=head)
    assert r.status_code == 200
    assert r.json()["result"]["estimate"] == pytest.approx(bundle["estimation"]["estimate"]["estimate"], rel=1e-9)
    again = client.get(f"/api/sessions/{made['session_id']}/export/bundle", headers=head).json()
    assert again["data"]["sha256"] == bundle["data"]["sha256"]


def test_import_read_only_gives_a_reader_key(recorded):
    workshop, bundle, application = recorded
    r = _import(workshop.client, bundle, mode="read-only", name="Auditor")
    assert r.status_code == 201, r.text
    made = r.json()
    assert made["read_only"] is True and made["member"]["role"] == "reader"
    assert not made["member"]["analyst"]
    head = {TOKEN_HEADER: made["token"]}
    assert workshop.client.get(f"/api/sessions/{made['session_id']}", headers=head).status_code == 200
    # a reader cannot export, re-estimate or move the session on
    assert workshop.client.get(f"/api/sessions/{made['session_id']}/export/bundle", headers=head).status_code == 403
    r = workshop.client.post(f"/api/sessions/{made['session_id']}/commands",
                             json={"type": "set_stage", "stage": "drafting", "reason": "x"}, headers=head)
    assert r.status_code == 409 and r.json()["code"] == "read_only"
    # whoever joins it is a reader too
    state = workshop.client.get(f"/api/sessions/{made['session_id']}", headers=head).json()["state"]
    joined = workshop.client.post("/api/join", json={"code": state["session"]["join_code"], "name": "Kim"}).json()
    assert joined["member"]["role"] == "reader"
    r = workshop.client.post(f"/api/sessions/{made['session_id']}/commands", json={"type": "tidy"},
                             headers={TOKEN_HEADER: joined["token"]})
    assert r.status_code == 409 and r.json()["code"] == "read_only"


def _valid(bundle):
    return copy.deepcopy(bundle)


def _break(bundle, how):
    b = _valid(bundle)
    how(b)
    return b


BROKEN = [
    ("not an object", lambda b: [1, 2], "a record bundle is a JSON object", "bundle_not_object"),
    ("graph document", lambda b: b["graph"], "this is a graph document, not a record bundle", "bundle_wrong_format"),
    ("wrong format", lambda b: {**b, "format": "something-else"}, "'format' is 'something-else'", "bundle_wrong_format"),
    ("newer version", lambda b: {**b, "version": 2}, "bundle version 2 is not the version this software reads", "bundle_wrong_version"),
    ("no version", lambda b: {k: v for k, v in b.items() if k != "version"}, "no whole-number 'version'", "bundle_wrong_version"),
    ("no graph", lambda b: {k: v for k, v in b.items() if k != "graph"}, "the bundle is missing 'graph'", "bundle_missing_part"),
    ("no workshop", lambda b: {k: v for k, v in b.items() if k != "workshop"}, "the bundle is missing 'workshop'", "bundle_missing_part"),
    ("no events", lambda b: {**b, "workshop": {"state": b["workshop"]["state"]}}, "missing workshop.'events'", "bundle_missing_part"),
    ("cyclic graph", lambda b: {**b, "graph": {**b["graph"], "arrows": b["graph"]["arrows"] + [{"from": "sick_days", "to": "bike_lease"}]}},
     "the bundle's graph is not valid", "bundle_bad_graph"),
    ("edited graph", lambda b: {**b, "graph": {**b["graph"], "arrows": b["graph"]["arrows"][1:]}},
     "the bundle's graph and its workshop state disagree", "bundle_inconsistent"),
    ("bad event", lambda b: {**b, "workshop": {**b["workshop"], "events": [{"revision": "x"}]}}, "event 1: 'revision'", "bundle_bad_part"),
    ("no facilitator", lambda b: {**b, "workshop": {**b["workshop"], "state": {**b["workshop"]["state"], "members": [
        {**m, "role": "participant"} for m in b["workshop"]["state"]["members"]]}}}, "has no facilitator", "bundle_bad_state"),
    ("unknown vote", lambda b: {**b, "workshop": {**b["workshop"], "state": {**b["workshop"]["state"], "votes": {
        "proposal:1": {"m1": {"choice": "maybe", "reason": "", "at": 1.0}}}}}}, "is not one of agree, disagree, unsure",
     "bundle_bad_state"),
    ("damaged member", lambda b: {**b, "workshop": {**b["workshop"], "state": {**b["workshop"]["state"], "members": [
        {"id": "m1", "nick": "x"}]}}}, "the bundle's workshop state is damaged", "bundle_bad_state"),
    ("estimate not a number", lambda b: {**b, "estimation": {**b["estimation"], "estimate": {**b["estimation"]["estimate"], "estimate": "big"}}},
     "estimation.estimate.estimate in the bundle must be a number", "bundle_bad_part"),
]


@pytest.mark.parametrize("label,mutate,message,code", BROKEN, ids=[b[0] for b in BROKEN])
def test_broken_bundles_are_refused_with_a_clear_message(recorded, label, mutate, message, code):
    workshop, bundle, application = recorded
    broken = mutate(_valid(bundle))
    with pytest.raises(BundleError) as err:
        validate_bundle(broken)
    assert message in err.value.message and err.value.code == code
    before = application.state.store.count_sessions()
    r = workshop.client.post("/api/records/import", content=json.dumps(broken))
    assert r.status_code == 422
    body = r.json()
    assert body["ok"] is False and body["code"] == code and message in body["error"]
    assert application.state.store.count_sessions() == before  # nothing was opened


def test_import_refuses_non_json_and_empty_bodies(recorded):
    workshop, _, _ = recorded
    r = workshop.client.post("/api/records/import", content=b"\xff\xfe")
    assert r.status_code == 400 and r.json()["code"] == "bundle_not_json"
    r = workshop.client.post("/api/records/import", content=b"{nope")
    assert r.status_code == 400 and "line 1, column 2" in r.json()["error"]
    r = workshop.client.post("/api/records/import", content=b"")
    assert r.status_code == 400 and r.json()["code"] == "no_bundle"
    r = workshop.client.post("/api/records/import?mode=edit", content=b"{}")
    assert r.status_code == 400 and "'mode' must be new or read-only" in r.json()["error"]


def test_read_only_session_refuses_every_change(recorded):
    workshop, bundle, _ = recorded
    made = _import(workshop.client, bundle, mode="read-only", name="Auditor").json()
    head = {TOKEN_HEADER: made["token"]}
    url = f"/api/sessions/{made['session_id']}/commands"
    before = workshop.client.get(f"/api/sessions/{made['session_id']}", headers=head).json()["state"]
    for command in ({"type": "move_variable", "name": "age", "x": 1, "y": 2}, {"type": "tidy"}):
        r = workshop.client.post(url, json=command, headers=head)
        assert r.status_code == 409 and r.json()["code"] == "read_only"
    after = workshop.client.get(f"/api/sessions/{made['session_id']}", headers=head).json()["state"]
    assert after["document"] == before["document"] and after["revision"] == before["revision"]
