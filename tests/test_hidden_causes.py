"""The room's stated hidden causes: the command, what members see, and where the
statements go (the sensitivity result over HTTP and the command line, the record bundle)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from app.cli import main
from tests.helpers.app import TOKEN_HEADER, open_room

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
CSV = (SAMPLE / "cycle_to_work.csv").read_bytes()


@pytest.fixture(name="debate")
def fixture_debate(client):
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    room = open_room(client, name="Fac", document=doc)
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    return room, room.join("Ana"), room.join("Ben")


def _statements(room):
    return room.state()["hidden_causes"]["statements"]


def test_members_state_replace_and_withdraw_their_hidden_cause(debate):
    room, ana, ben = debate
    room.ok(ana, {"type": "state_hidden_cause", "variable": "age", "times": 2})
    room.ok(ben, {"type": "state_hidden_cause", "variable": "fitness", "times": 1})
    room.ok(ana, {"type": "state_hidden_cause", "variable": "fitness", "times": 3})
    rows = _statements(room)
    assert [(r["by"], r["words"]) for r in rows] == [("Ben", "about as strong as fitness"),
                                                    ("Ana", "three times as strong as fitness")]
    assert room.state()["recent"][-1]["summary"] == \
        "stated that a hidden common cause could be three times as strong as fitness"
    room.ok(ben, {"type": "state_hidden_cause", "times": None})
    assert [r["by"] for r in _statements(room)] == ["Ana"]
    r = room.send(ben, {"type": "state_hidden_cause", "times": None})
    assert r.status_code == 404 and r.json()["code"] == "no_statement"


@pytest.mark.parametrize("command, words", [
    ({"variable": "bike_lease", "times": 1}, "is the treatment or the outcome"),
    ({"variable": "health_consciousness", "times": 1}, "is marked unmeasured"),
    ({"variable": "nobody", "times": 1}, "there is no variable 'nobody'"),
    ({"variable": "age", "times": 0}, "'times' must be a number above 0 and at most 10"),
    ({"variable": "age", "times": 11}, "'times' must be a number above 0 and at most 10"),
    ({"variable": "age", "times": "twice"}, "'times' must be a number"),
])
def test_a_bad_statement_is_refused_with_a_message_and_changes_nothing(debate, command, words):
    room, ana, _ = debate
    before = room.state()
    r = room.send(ana, {"type": "state_hidden_cause", **command})
    assert r.status_code == 400 and words in r.json()["error"], r.text
    assert room.state()["revision"] == before["revision"]


def test_statements_follow_a_renamed_variable_and_its_undo(debate):
    room, ana, _ = debate
    room.ok(ana, {"type": "state_hidden_cause", "variable": "age", "times": 2})
    room.ok(room.facilitator, {"type": "update_variable", "name": "age", "new_name": "years"})
    assert _statements(room)[0]["variable"] == "years"
    room.ok(room.facilitator, {"type": "undo"})
    assert _statements(room)[0]["words"] == "twice as strong as age"


def test_statements_are_closed_once_the_diagram_is_agreed(debate):
    room, ana, _ = debate
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    r = room.send(ana, {"type": "state_hidden_cause", "variable": "age", "times": 2})
    assert r.status_code == 409 and r.json()["code"] == "diagram_locked"


def test_sensitivity_over_http_reads_the_rooms_statements_and_the_bundle_keeps_them(debate):
    room, ana, ben = debate
    room.ok(ana, {"type": "state_hidden_cause", "variable": "age", "times": 2})
    room.ok(ben, {"type": "state_hidden_cause", "variable": "fitness", "times": 0.5})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    headers = {TOKEN_HEADER: room.facilitator}
    base = f"/api/sessions/{room.id}/estimation"
    assert room.client.put(f"{base}/data?name=cycle.csv", content=CSV, headers=headers).status_code == 200
    result = room.client.post(f"{base}/sensitivity", json={}, headers=headers).json()["result"]
    reg = result["regression"]
    assert {r["by"] for r in reg["room"]["statements"]} == {"Ana", "Ben"}
    assert reg["room"]["strongest"]["by"] == "Ana"
    assert "twice as strong as age, stated by Ana" in reg["room"]["reading"]
    assert 'class="am-stated-label"' in result["charts"]["hidden_cause"]
    bundle = room.client.get(f"/api/sessions/{room.id}/export/bundle", headers=headers).json()
    assert [s["words"] for s in bundle["hidden_causes"]] == ["half as strong as fitness", "twice as strong as age"]
    assert bundle["estimation"]["sensitivity"]["regression"]["room"] == reg["room"]
    assert "room_fingerprint" in bundle["estimation"]["sensitivity"]
    assert room.client.get(base, headers=headers).json()["sensitivity"]["stale"] is False
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating", "reason": "Ben has second thoughts"})
    room.ok(ben, {"type": "state_hidden_cause", "variable": "fitness", "times": 3})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    assert room.client.get(base, headers=headers).json()["sensitivity"]["stale"] is True
    room.client.post(f"{base}/sensitivity", json={}, headers=headers)
    report = room.client.get(f"/api/sessions/{room.id}/report", headers=headers).text
    assert "stated by Ana" in report and 'class="am-chart am-shift"' in report


def test_cli_estimate_prints_sensitivity_with_statements_from_a_file(tmp_path, capsys):
    room_file = tmp_path / "room.json"
    room_file.write_text(json.dumps([{"by": "Ana", "variable": "age", "times": 2},
                                     {"by": "Ben", "variable": "fitness", "times": 1}]))
    code = main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(SAMPLE / "cycle_to_work.csv"),
                 "--room", str(room_file)])
    assert code == 0
    out = json.loads(capsys.readouterr().out)
    reg = out["sensitivity"]["regression"]
    assert set(reg) >= {"partial_r2_treatment", "robustness_value", "robustness_value_alpha", "df",
                        "benchmarks", "room"}
    assert set(reg["benchmarks"][0]) >= {"variable", "k", "covariate_r2_treatment", "covariate_r2_outcome",
                                         "r2_with_treatment", "r2_with_outcome", "estimate_if_present",
                                         "std_error_if_present"}
    assert reg["room"]["counted"] == 2
    assert set(out["sensitivity"]["e_value"]) >= {"risk_ratio", "e_value", "e_value_ci"}
    bundle_like = tmp_path / "record.json"
    bundle_like.write_text(json.dumps({"format": "arrowmoot-record", "hidden_causes": [
        {"by": "Cy", "variable": "fitness", "times": 3.0, "words": "three times as strong as fitness"}]}))
    assert main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(SAMPLE / "cycle_to_work.csv"),
                 "--room", str(bundle_like)]) == 0
    room = json.loads(capsys.readouterr().out)["sensitivity"]["regression"]["room"]
    assert room["strongest"]["phrase"] == "three times as strong as fitness" and room["strongest"]["by"] == "Cy"


def test_cli_refuses_a_bad_room_file_with_a_message(tmp_path, capsys):
    bad = tmp_path / "room.json"
    bad.write_text(json.dumps([{"variable": "age", "times": 40}]))
    code = main(["estimate", str(SAMPLE / "cycle_to_work.json"), str(SAMPLE / "cycle_to_work.csv"),
                 "--room", str(bad)])
    assert code == 2
    assert "statement 1 needs a 'variable' name and 'times' above 0 and at most 10" in capsys.readouterr().err


def test_no_old_sensitivity_names_remain_in_results():
    """Our keys only: the result carries none of the names the formulas are often printed under."""
    import pandas as pd

    from app.estimation import service
    from app.graph.document import parse_document

    diagram = parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    text = json.dumps(service.json_ready(service.sensitivity(
        diagram, frame, statements=[{"by": "A", "variable": "age", "times": 1}])))
    for old in ('"r2dz"', '"r2yz"', '"kd"', '"ky"', '"adjusted_estimate"', '"adjusted_se"', '"bias"', '"contour"'):
        assert old not in text, old
