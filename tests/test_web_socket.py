"""The WebSocket: hello with a key, live state to everyone, acks, errors, resync."""

from __future__ import annotations

import threading

from tests.helpers.app import open_room
from tests.helpers.socket import hello, receive_until


def test_edit_reaches_every_client(room):
    ann = room.join("Ann")
    client = room.client
    with client.websocket_connect(f"/ws/sessions/{room.id}") as fac_ws, \
            client.websocket_connect(f"/ws/sessions/{room.id}") as ann_ws:
        _, start = hello(fac_ws, room.facilitator)
        hello(ann_ws, ann)
        ann_ws.send_json({"type": "command", "id": 7,
                          "command": {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"}})
        new_rev = start["revision"] + 1
        for ws in (fac_ws, ann_ws):
            # a drawn arrow travels as a patch against the previous revision
            patch = receive_until(ws, "patch", lambda m: m["revision"] == new_rev)
            assert patch["base"] == start["revision"]
            assert patch["arrows_added"] == [["bike_lease", "sick_days"]] and patch["arrows_removed"] == []
        ack = receive_until(ann_ws, "ack")
        assert ack["id"] == 7 and ack["revision"] == new_rev
        analysis = receive_until(fac_ws, "analysis", lambda m: m["revision"] == new_rev)
        assert analysis["analysis"]["identifiable"] is True


def test_refused_command_gets_error_with_its_id(room):
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        hello(ws, room.facilitator)
        ws.send_json({"type": "command", "id": "a1",
                      "command": {"type": "add_arrow", "from": "bike_lease", "to": "ghost"}})
        error = receive_until(ws, "error")
        assert error["id"] == "a1" and error["status"] == 404
        assert error["error"] == "there is no variable 'ghost'"
        ws.send_text("not json")
        assert receive_until(ws, "error")["code"] == "bad_json"


def test_bad_key_is_refused_and_closed(room):
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        ws.send_json({"type": "hello", "token": "mnobody.xyz"})
        message = ws.receive_json()
        assert message["type"] == "error" and message["code"] == "bad_token"


def test_reconnect_resyncs_from_last_revision(room):
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, state = hello(ws, room.facilitator)
        seen = state["revision"]
    room.ok(room.facilitator, {"type": "add_variable", "name": "age"})
    room.ok(room.facilitator, {"type": "add_arrow", "from": "age", "to": "bike_lease"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, state = hello(ws, room.facilitator, revision=seen)
        assert state["revision"] == seen + 2
        assert [e["kind"] for e in state["missed"]] == ["add_variable", "add_arrow"]
        ws.send_json({"type": "resync", "revision": seen + 1})
        again = receive_until(ws, "state")
        assert [e["kind"] for e in again["missed"]] == ["add_arrow"]


def test_simultaneous_edits_all_land(room):
    tokens = [room.join(f"P{i}") for i in range(4)]
    for i in range(4):
        room.ok(room.facilitator, {"type": "add_variable", "name": f"v{i}"})
    errors = []

    def worker(i, token):
        for j in range(5):
            r = room.send(token, {"type": "add_variable", "name": f"w{i}_{j}"})
            if r.status_code != 200:
                errors.append(r.text)

    threads = [threading.Thread(target=worker, args=(i, t)) for i, t in enumerate(tokens)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert errors == []
    names = {v["name"] for v in room.state()["document"]["variables"]}
    assert {f"w{i}_{j}" for i in range(4) for j in range(5)} <= names


def test_analysis_endpoint_answers_for_the_current_revision(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    answer = room.analysis()
    assert answer["revision"] == room.state()["revision"]
    assert answer["analysis"]["identifiable"] is True
    assert answer["analysis"]["minimal_adjustment_sets"] == [[]]


def test_analysis_from_the_worker_process_matches_the_engine(tmp_path, demo_document):
    """With analysis_in_process on, the analysis comes from `python -m app.sessions.worker`;
    it must equal calling the engine's analyze() directly."""
    from fastapi.testclient import TestClient

    from app.graph.document import parse_document
    from app.graph.identification import analyze
    from app.main import create_app
    from app.settings import Settings

    settings = Settings(db_path=tmp_path / "w.sqlite3", data_dir=tmp_path, demo_session=False,
                        analysis_in_process=True)
    with TestClient(create_app(settings=settings)) as client:
        room = open_room(client, document=demo_document)
        with client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
            hello(ws, room.facilitator)
            message = receive_until(ws, "analysis")
        worker = client.app.state.sessions.analysis.worker
        assert worker is not None and worker.process is not None  # it really ran out of process
    expected = analyze(parse_document(demo_document))
    assert message["analysis"]["minimal_adjustment_sets"] == expected["minimal_adjustment_sets"]
    assert message["analysis"]["identifiable"] == expected["identifiable"]
    assert message["analysis"]["roles"] == expected["roles"]


def test_arrow_patches_and_full_states(room):
    """Reversing and removing arrows travel as patches; rare changes as full states."""
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, start = hello(ws, room.facilitator)
        rev = start["revision"]
        room.ok(room.facilitator, {"type": "reverse_arrow", "from": "bike_lease", "to": "sick_days"})
        patch = receive_until(ws, "patch", lambda m: m["revision"] == rev + 1)
        assert patch["arrows_removed"] == [["bike_lease", "sick_days"]]
        assert patch["arrows_added"] == [["sick_days", "bike_lease"]]
        assert patch["can_undo"] is True
        room.ok(room.facilitator, {"type": "rename_session", "title": "Renamed"})
        state = receive_until(ws, "state", lambda m: m["revision"] == rev + 2)
        assert state["state"]["document"]["arrows"] == [{"from": "sick_days", "to": "bike_lease"}]
        assert "members" not in state["state"]  # unchanged, so not resent
