"""One member cannot swamp the room: commands are paced per member, bursts of moves
fold into one history entry, a connection closed for falling behind closes without a
traceback, and a body that is not JSON is answered in words."""

from __future__ import annotations

import json
import time

import pytest

from app.sessions.pacing import CommandPacer, TooManyCommands, folds_into
from app.web.errors import status_of
from tests.helpers.live_server import running_server


def test_pacer_allows_a_burst_then_the_rate_and_is_per_member():
    now = [0.0]
    pacer = CommandPacer(rate=10, burst=5, clock=lambda: now[0])
    for _ in range(5):
        pacer.take("s", "ann", {"type": "add_variable"})
    with pytest.raises(TooManyCommands) as err:
        pacer.take("s", "ann", {"type": "add_variable"})
    assert status_of(err.value) == 429 and err.value.retry_after == 0.1
    assert "faster than the room can follow (more than 10 a second)" in err.value.message
    pacer.take("s", "bob", {"type": "add_variable"})  # another member is not held back
    now[0] += 0.1
    pacer.take("s", "ann", {"type": "add_variable"})  # one more token after 1/rate s


def test_moves_of_the_same_variable_cost_a_tenth():
    now = [0.0]
    pacer = CommandPacer(rate=10, burst=2, clock=lambda: now[0])
    pacer.take("s", "ann", {"type": "move_variable", "name": "age"})  # first move: a whole token
    for _ in range(10):
        pacer.take("s", "ann", {"type": "move_variable", "name": "age"})
    with pytest.raises(TooManyCommands):
        pacer.take("s", "ann", {"type": "move_variable", "name": "fitness"})


def test_folding_needs_same_member_same_variable_and_a_short_gap():
    previous = {"kind": "move_variable", "actor": "ann", "at": 100.0, "command": {"name": "age"}}
    move = {"type": "move_variable", "name": "age", "x": 1, "y": 2}
    assert folds_into(previous, "ann", move, 101.0)
    assert not folds_into(previous, "bob", move, 101.0)
    assert not folds_into(previous, "ann", dict(move, name="fitness"), 101.0)
    assert not folds_into(previous, "ann", move, 103.0)
    assert not folds_into(dict(previous, kind="add_arrow"), "ann", move, 101.0)


def test_http_commands_past_the_rate_get_a_clear_429(client, room):
    client.app.state.sessions.pacer = CommandPacer(rate=0.5, burst=30, clock=lambda: 0.0)  # no refill, however slow the machine
    ann = room.join("Ann")
    answers = [client.post(f"/api/sessions/{room.id}/commands", json={"type": "add_variable", "name": f"v{i}"},
                           headers={"X-Arrowmoot-Token": ann}) for i in range(40)]
    codes = [r.status_code for r in answers]
    assert codes.count(200) == 30 and codes[30:] == [429] * 10
    refused = next(r for r in answers if r.status_code == 429).json()
    assert refused["code"] == "too_many_commands" and refused["retry_after"] > 0
    assert "this one was not applied" in refused["error"]
    # the facilitator is still heard
    assert client.post(f"/api/sessions/{room.id}/commands", json={"type": "add_variable", "name": "weather"},
                       headers={"X-Arrowmoot-Token": room.facilitator}).status_code == 200


def test_a_burst_of_moves_leaves_one_history_entry(client, room):
    ann = room.join("Ann")
    room.ok(room.facilitator, {"type": "add_variable", "name": "age", "x": 0, "y": 0})
    for i in range(50):
        r = client.post(f"/api/sessions/{room.id}/commands",
                        json={"type": "move_variable", "name": "age", "x": i, "y": 0},
                        headers={"X-Arrowmoot-Token": ann})
        assert r.status_code == 200, r.text
    history = client.get(f"/api/sessions/{room.id}/history", headers={"X-Arrowmoot-Token": ann}).json()["events"]
    moves = [e for e in history if e["kind"] == "move_variable"]
    assert len(moves) == 1 and moves[0]["command"]["x"] == 49
    state = client.get(f"/api/sessions/{room.id}", headers={"X-Arrowmoot-Token": ann}).json()["state"]
    assert next(v for v in state["document"]["variables"] if v["name"] == "age")["x"] == 49


@pytest.mark.parametrize("body, where", [
    ('{"title": "x", name: 1}', "at line 1, column 16: expecting property name enclosed in double quotes"),
    ('{"title": "x",\n "name": }', "at line 2, column 10: expecting value"),
    ("not json at all", "at line 1, column 1: expecting value"),
])
def test_a_body_that_is_not_json_is_answered_in_words(client, body, where):
    r = client.post("/api/sessions", content=body, headers={"Content-Type": "application/json"})
    assert r.status_code == 422
    assert r.json()["error"] == (f"the request body is not valid JSON {where}. "
                                 "Send one JSON object, with double quotes around every name and text value")


def test_a_flooding_socket_is_closed_without_a_traceback(tmp_path):
    """2,000 moves sent without reading a reply: the server drops the connection on
    purpose (its send queue overflows) and logs no traceback."""
    import httpx
    import websockets.sync.client as ws_client

    with running_server(tmp_path) as base:
        created = httpx.post(base + "/api/sessions", json={"title": "Flood", "name": "Fay"}).json()
        sid = created["session_id"]
        token = httpx.post(base + "/api/join", json={"code": created["join_code"], "name": "Eve"}).json()["token"]
        httpx.post(f"{base}/api/sessions/{sid}/commands", json={"type": "add_variable", "name": "age"},
                   headers={"X-Arrowmoot-Token": created["token"]})
        url = base.replace("http", "ws") + f"/ws/sessions/{sid}"
        with ws_client.connect(url, max_size=None) as ws:
            ws.send(json.dumps({"type": "hello", "token": token}))
            assert json.loads(ws.recv())["type"] == "welcome"
            try:
                for i in range(2000):
                    ws.send(json.dumps({"type": "command", "id": i, "command":
                                        {"type": "move_variable", "name": "age", "x": i, "y": 0}}))
            except Exception:
                pass  # closed by the server mid-burst: that is the point
            deadline = time.monotonic() + 20
            try:
                while time.monotonic() < deadline:
                    ws.recv(timeout=5)
            except Exception:
                pass
            closed = ws.close_code
        assert closed == 1013  # "try again later": the page reconnects and resyncs
        time.sleep(0.5)
        log = (tmp_path / "server.log").read_text(errors="replace")
        assert "Traceback" not in log and "Exception in ASGI application" not in log, log[-3000:]
