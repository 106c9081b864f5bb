"""The estimation stage over HTTP within a session (tests/helpers/app.py builds the app)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from tests.helpers.app import make_app

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
TRUTH = json.loads((SAMPLE / "cycle_to_work.truth.json").read_text())["true_effect"]
CSV = (SAMPLE / "cycle_to_work.csv").read_bytes()


@pytest.fixture(name="room")
def fixture_room(tmp_path):
    from fastapi.testclient import TestClient

    app = make_app(tmp_path)
    app.state.settings.upload_limit_bytes = 300_000
    with TestClient(app) as client:
        doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
        made = client.post("/api/sessions", json={"title": "demo", "name": "Fac", "document": doc}).json()
        sid, headers = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
        assert client.post(f"/api/sessions/{sid}/commands", json={"type": "set_stage", "stage": "agreed"},
                           headers=headers).status_code == 200
        yield client, f"/api/sessions/{sid}/estimation", headers, made


def test_upload_profile_estimate_and_results_are_kept(room):
    client, base, headers, _ = room
    r = client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    assert r.status_code == 200, r.text
    data = r.json()["data"]
    assert data["rows"] == 4000 and data["mapping"]["bike_lease"] == "bike_lease"
    assert "health_consciousness" not in data["mapping"]
    r = client.post(f"{base}/estimate", json={}, headers=headers)
    assert r.status_code == 200, r.text
    result = r.json()["result"]
    assert result["ci"][0] <= TRUTH <= result["ci"][1]
    assert result["checks"]["tested"] > 0
    state = client.get(base, headers=headers).json()
    assert state["estimate"]["estimate"] == pytest.approx(result["estimate"])


def test_weighting_estimate_carries_overlap_svg(room):
    client, base, headers, _ = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    r = client.post(f"{base}/estimate", json={"method": "weighting"}, headers=headers)
    assert r.status_code == 200, r.text
    assert r.json()["result"]["charts"]["overlap"].startswith("<svg")


def test_sensitivity_and_disputes_return_svg_charts(room):
    client, base, headers, _ = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    sens = client.post(f"{base}/sensitivity", json={}, headers=headers).json()["result"]
    assert "am-shift" in sens["charts"]["hidden_cause"]
    disputes = client.post(f"{base}/disputes", json={"disputed": [{"from": "fitness", "to": "bike_lease"}]},
                           headers=headers).json()["result"]
    assert len(disputes["rows"]) == 2 and "am-forest" in disputes["charts"]["forest"]


def test_bad_upload_keeps_previous_data(room):
    client, base, headers, _ = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    r = client.put(f"{base}/data?name=broken.csv", content=b"a,b\n1,2\n", headers=headers)
    assert r.status_code == 422
    assert r.json() == {"ok": False, "error": "broken.csv has only one data row; estimation needs many rows",
                        "status": 422, "code": "too_few_rows"}
    assert client.get(base, headers=headers).json()["data"]["name"] == "cycle.csv"
    assert client.post(f"{base}/estimate", json={}, headers=headers).status_code == 200


def test_upload_over_limit_is_refused_with_413(room):
    client, base, headers, _ = room
    r = client.put(f"{base}/data?name=big.csv", content=CSV + CSV, headers=headers)
    assert r.status_code == 413 and "limit" in r.json()["error"]
    assert client.get(base, headers=headers).json()["data"] is None


def test_mapping_refusal_and_unmeasured_fallback(room):
    client, base, headers, _ = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    bad = client.put(f"{base}/mapping", json={"mapping": {"bike_lease": "nope"}}, headers=headers)
    assert bad.status_code == 422 and "'nope', which is not in the data" in bad.json()["error"]
    mapping = client.get(base, headers=headers).json()["data"]["mapping"]
    mapping.pop("fitness")
    assert client.put(f"{base}/mapping", json={"mapping": mapping}, headers=headers).status_code == 200
    result = client.post(f"{base}/estimate", json={}, headers=headers).json()["result"]
    assert result["strategy"] == "instrument" and result["fixes"] == [["fitness"]]


def test_estimate_without_data_and_wrong_method(room):
    client, base, headers, _ = room
    r = client.post(f"{base}/estimate", json={}, headers=headers)
    assert r.status_code == 400 and r.json()["code"] == "no_data"
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    r = client.post(f"{base}/estimate", json={"method": "magic"}, headers=headers)
    assert r.status_code == 422 and "unknown method 'magic'" in r.json()["error"]


def test_participant_cannot_estimate(room):
    client, base, headers, made = room
    joined = client.post("/api/join", json={"code": made["join_code"], "name": "Pat"}).json()
    r = client.post(f"{base}/estimate", json={}, headers={"X-Arrowmoot-Token": joined["token"]})
    assert r.status_code == 403


def test_attach_file_outside_a_request_then_estimate(room):
    """The helper for seeding a session (e.g. the demo) attaches data as an upload would."""
    client, base, headers, made = room
    info = client.app.state.sessions.attach_data(made["session_id"], SAMPLE / "cycle_to_work.csv")
    assert info["rows"] == 4000
    state = client.get(base, headers=headers).json()
    assert state["data"]["mapping"]["fitness"] == "fitness"
    result = client.post(f"{base}/estimate", json={}, headers=headers).json()["result"]
    assert result["ci"][0] <= TRUTH <= result["ci"][1]


def test_results_are_marked_stale_after_the_diagram_changes(room):
    client, base, headers, made = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    client.post(f"{base}/sensitivity", json={}, headers=headers)
    assert client.get(base, headers=headers).json()["sensitivity"]["stale"] is False
    commands = f"/api/sessions/{made['session_id']}/commands"
    for command in ({"type": "set_stage", "stage": "drafting", "reason": "age affects fitness after all?"},
                    {"type": "delete_arrow", "from": "age", "to": "fitness"},
                    {"type": "set_stage", "stage": "agreed"}):
        assert client.post(commands, json=command, headers=headers).status_code == 200
    assert client.get(base, headers=headers).json()["sensitivity"]["stale"] is True
    client.put(f"{base}/data?name=again.csv", content=CSV, headers=headers)
    assert client.get(base, headers=headers).json()["sensitivity"] is None  # new data clears old results


def test_disputes_default_to_the_rooms_disputed_arrows(tmp_path):
    """With no list in the request, the arrows the room left disputed are combined."""
    from fastapi.testclient import TestClient

    app = make_app(tmp_path)
    with TestClient(app) as client:
        doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
        made = client.post("/api/sessions", json={"title": "demo", "name": "Fac", "document": doc}).json()
        sid, headers = made["session_id"], {"X-Arrowmoot-Token": made["token"]}
        for command in ({"type": "flag_arrow", "from": "fitness", "to": "bike_lease", "flag": "disputed"},
                        {"type": "set_stage", "stage": "agreed"}):
            assert client.post(f"/api/sessions/{sid}/commands", json=command, headers=headers).status_code == 200
        base = f"/api/sessions/{sid}/estimation"
        client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
        result = client.post(f"{base}/disputes", json={}, headers=headers).json()["result"]
        assert result["disputed"][0]["pair"] == ["bike_lease", "fitness"]  # the pair, in name order
        estimates = {r["label"]: r["estimate"] for r in result["rows"]}
        assert set(estimates) == {"fitness→bike_lease", "no bike_lease–fitness arrow"}
        # fitness causes sick_days either way, so the most efficient set keeps it in both rows
        assert len({tuple(r["adjustment_set"]) for r in result["rows"]}) == 1


@pytest.mark.parametrize("method, path, body", [
    ("post", "/estimate", [1, 2]),
    ("post", "/estimate", {"method": "nope"}),
    ("post", "/estimate", {"adjust": "age"}),
    ("post", "/estimate", {"correction": "sidak"}),
    ("post", "/estimate", {"checks": "yes"}),
    ("post", "/estimate", {"adjust": ["age", "active_minutes"]}),
    ("post", "/validation", {"resamples": 5}),
    ("post", "/validation", {"resamples": "many"}),
    ("post", "/validation", {"set_cap": 0}),
    ("post", "/validation", {"wait": "yes"}),
    ("post", "/validation", {"method": "front-door"}),
    ("post", "/validation/stop", {}),
    ("post", "/sensitivity", "text"),
    ("post", "/disputes", {"disputed": "fitness->bike_lease"}),
    ("post", "/disputes", {"disputed": [{"from": "ghost", "to": "bike_lease"}]}),
    ("put", "/mapping", {"mapping": ["bike_lease"]}),
    ("put", "/mapping", {"mapping": {"bike_lease": 3}}),
])
def test_bad_requests_get_one_error_shape_and_keep_the_session(room, method, path, body):
    client, base, headers, _ = room
    client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers)
    before = client.get(base, headers=headers).json()
    r = getattr(client, method)(f"{base}{path}", json=body, headers=headers)
    assert 400 <= r.status_code < 500, r.text
    payload = r.json()
    assert payload["ok"] is False and isinstance(payload["error"], str) and payload["error"]
    assert payload["status"] == r.status_code and payload["code"]
    after = client.get(base, headers=headers).json()
    assert after["data"] == before["data"]


def test_parquet_upload_with_a_path_in_its_name(room, tmp_path):
    import pandas as pd

    client, base, headers, made = room
    path = tmp_path / "demo.parquet"
    pd.read_csv(SAMPLE / "cycle_to_work.csv").to_parquet(path)
    r = client.put(f"{base}/data?name=../../etc/demo.parquet", content=path.read_bytes(), headers=headers)
    assert r.status_code == 200, r.text
    data = r.json()["data"]
    assert data["name"] == "demo.parquet" and data["stored"] == "data.parquet" and data["rows"] == 4000
    stored = client.app.state.store.session_data_dir(made["session_id"]) / "data.parquet"
    assert stored.is_file()
    assert client.post(f"{base}/estimate", json={"checks": False}, headers=headers).status_code == 200


def test_panel_is_offered_the_registry_methods(room):
    """The page's method menu comes from the server's registry, "auto" first."""
    from app.estimation.methods import METHODS

    client, base, headers, _ = room
    offered = client.get("/api/vocabulary").json()["methods"]
    assert [m["name"] for m in offered] == ["auto", *(m.name for m in METHODS)]
    assert {m["name"]: m["label"] for m in offered[1:]} == {m.name: m.label for m in METHODS}
    assert next(m for m in offered if m["name"] == "weighting")["treatment"] == "binary"
