"""Faults a live room produces: drops mid-vote, resent and replayed messages, revisions
out of order, two facilitator tabs at once, and failures inside the analysis or an
estimate. Each must leave the session whole: revisions 0..n without gaps, every
acknowledged change stored once, a refused request changing nothing.

The reference for "whole" is outside the web layer: the stored events are replayed
through the workshop's own command code and must give the stored state (the same
check bench/bench_load.py makes under load).
"""

from __future__ import annotations

import json
import sqlite3
import threading
from pathlib import Path

import pandas as pd
import pytest
from fastapi.testclient import TestClient

from tests.helpers.app import TOKEN_HEADER, make_app, open_room
from tests.helpers.socket import hello, receive_until
from app.workshop.commands import add_member, apply_command

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"


def stored(tmp_path: Path, session_id: str) -> tuple[dict, list[dict]]:
    db = sqlite3.connect(tmp_path / "arrowmoot.sqlite3")
    state, revision = db.execute("SELECT state, revision FROM sessions WHERE id = ?", (session_id,)).fetchone()
    events = [json.loads(r[0]) for r in db.execute(
        "SELECT data FROM events WHERE session_id = ? ORDER BY seq", (session_id,))]
    db.close()
    state = json.loads(state)
    state["revision"] = revision
    return state, events


def assert_whole(tmp_path: Path, session_id: str, start_state: dict) -> list[dict]:
    """Revisions 0..n, no command key twice, and replaying the events gives the stored state."""
    from app.workshop.models import Workshop

    state, events = stored(tmp_path, session_id)
    assert [e["revision"] for e in events] == list(range(len(events)))
    keys = [e["key"] for e in events if "key" in e]
    assert len(keys) == len(set(keys)), "a command was applied twice"
    w = Workshop.from_state(start_state, [events[0]])
    for e in events[1:]:
        if e["kind"] == "join":
            add_member(w, member_id=e["actor"], name=e["actor_name"], now=e["at"])
        else:
            apply_command(w, w.members[e["actor"]], e["command"], now=e["at"])
    assert w.to_state() == state
    return events


@pytest.fixture
def debate(client, tmp_path):
    """A debating room on the cycle-to-work diagram, with one participant and one open proposal."""
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    room = open_room(client, document=doc)
    start = stored(tmp_path, room.id)[0]
    ann = room.join("Ann")
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ok(ann, {"type": "propose", "kind": "add", "from": "voucher_draw", "to": "sick_days",
                  "reason": "the e-mail also mentions health"})
    return room, ann, start


def test_disconnect_mid_vote_keeps_the_vote_once_and_the_room_whole(debate, tmp_path):
    room, ann, start = debate
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, state = hello(ws, ann)
        seen = state["revision"]
        ws.send_json({"type": "command", "id": 1, "key": "vote-1",
                      "command": {"type": "vote", "proposal": 1, "choice": "agree"}})
    # The socket is gone before the ack could be read; the page reconnects and resends.
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, state = hello(ws, ann, revision=seen)
        ws.send_json({"type": "command", "id": 2, "key": "vote-1",
                      "command": {"type": "vote", "proposal": 1, "choice": "agree"}})
        ack = receive_until(ws, "ack")
    final = room.state()
    proposal = next(p for p in final["proposals"] if p["id"] == 1)
    assert proposal["tally"]["agree"] == 1
    events = assert_whole(tmp_path, room.id, start)
    assert sum(1 for e in events if e["kind"] == "vote") == 1
    assert ack["revision"] == final["revision"]


def test_disconnect_mid_vote_never_blocks_the_others(debate):
    room, ann, _ = debate
    bob = room.join("Bob")
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as bob_ws:
        hello(bob_ws, bob)
        with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ann_ws:
            hello(ann_ws, ann)
            ann_ws.send_json({"type": "command", "id": 1,
                              "command": {"type": "vote", "proposal": 1, "choice": "disagree"}})
        bob_ws.send_json({"type": "command", "id": 9,
                          "command": {"type": "vote", "proposal": 1, "choice": "agree"}})
        ack = receive_until(bob_ws, "ack", limit=40)
        assert ack["id"] == 9
    assert next(p for p in room.state()["proposals"] if p["id"] == 1)["tally"]["agree"] == 1


def test_replayed_undo_is_applied_once(room, tmp_path):
    start = stored(tmp_path, room.id)[0]
    room.ok(room.facilitator, {"type": "add_variable", "name": "age"})
    room.ok(room.facilitator, {"type": "add_variable", "name": "fitness"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        hello(ws, room.facilitator)
        for msg_id in (1, 2):
            ws.send_json({"type": "command", "id": msg_id, "key": "undo-once", "command": {"type": "undo"}})
        first, second = receive_until(ws, "ack"), receive_until(ws, "ack")
    assert first["id"] == 1 and "replayed" not in first
    assert second["id"] == 2 and second["replayed"] is True
    assert second["revision"] == first["revision"]
    names = [v["name"] for v in room.state()["document"]["variables"]]
    assert names == ["bike_lease", "sick_days", "age"]  # one undo: only 'fitness' went
    events = assert_whole(tmp_path, room.id, start)
    assert [e["kind"] for e in events].count("undo") == 1


def test_replayed_http_command_with_idempotency_key(room, tmp_path):
    start = stored(tmp_path, room.id)[0]
    headers = {TOKEN_HEADER: room.facilitator, "Idempotency-Key": "add-age"}
    url = f"/api/sessions/{room.id}/commands"
    one = room.client.post(url, json={"type": "add_variable", "name": "age"}, headers=headers)
    two = room.client.post(url, json={"type": "add_variable", "name": "age"}, headers=headers)
    assert one.status_code == two.status_code == 200
    assert two.json()["replayed"] is True and two.json()["revision"] == one.json()["revision"]
    assert_whole(tmp_path, room.id, start)


def test_key_is_per_member(debate, tmp_path):
    """Two people who happen to pick the same key both get their own vote."""
    room, ann, start = debate
    bob = room.join("Bob")
    url = f"/api/sessions/{room.id}/commands"
    for token in (ann, bob):
        r = room.client.post(url, json={"type": "vote", "proposal": 1, "choice": "agree"},
                             headers={TOKEN_HEADER: token, "Idempotency-Key": "k1"})
        assert r.status_code == 200 and "replayed" not in r.json()
    assert next(p for p in room.state()["proposals"] if p["id"] == 1)["tally"]["agree"] == 2
    assert_whole(tmp_path, room.id, start)


def test_replay_is_recognised_after_a_restart(tmp_path):
    url_of = "/api/sessions/{}/commands"
    with TestClient(make_app(tmp_path)) as client:
        room = open_room(client, treatment="bike_lease", outcome="sick_days")
        start = stored(tmp_path, room.id)[0]
        h = {TOKEN_HEADER: room.facilitator, "Idempotency-Key": "draw-1"}
        first = client.post(url_of.format(room.id), json={"type": "add_arrow", "from": "bike_lease",
                                                          "to": "sick_days"}, headers=h).json()
    with TestClient(make_app(tmp_path)) as client:
        again = client.post(url_of.format(room.id), json={"type": "add_arrow", "from": "bike_lease",
                                                          "to": "sick_days"}, headers=h)
        assert again.status_code == 200 and again.json()["replayed"] is True
        assert again.json()["revision"] == first["revision"]
    assert_whole(tmp_path, room.id, start)


@pytest.mark.parametrize("key", ["", "x" * 101, 7, ["a"]])
def test_a_bad_key_is_refused_and_changes_nothing(room, key):
    before = room.state()
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        hello(ws, room.facilitator)
        ws.send_json({"type": "command", "id": 1, "key": key,
                      "command": {"type": "add_variable", "name": "age"}})
        error = receive_until(ws, "error")
    assert error["status"] == 400 and error["code"] == "invalid_key"
    assert room.state()["revision"] == before["revision"]


def test_duplicated_command_without_a_key_is_refused_by_the_rules(debate, tmp_path):
    """Without a key a resent proposal or settle meets the room's own rules, not a second copy."""
    room, ann, start = debate
    again = room.send(ann, {"type": "propose", "kind": "add", "from": "voucher_draw", "to": "sick_days"})
    assert again.status_code == 409 and again.json()["code"] == "duplicate_proposal"
    room.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "reject"})
    twice = room.send(room.facilitator, {"type": "settle", "proposal": 1, "decision": "accept"})
    assert twice.status_code == 409 and twice.json()["code"] == "already_settled"
    assert {"from": "voucher_draw", "to": "sick_days"} not in room.state()["document"]["arrows"]
    assert_whole(tmp_path, room.id, start)


@pytest.mark.parametrize("revision", [10**9, -5, "3", True, None, 2.5])
def test_out_of_order_revision_gets_the_full_state(room, revision):
    room.ok(room.facilitator, {"type": "add_variable", "name": "age"})
    before = room.state()
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        _, state = hello(ws, room.facilitator, revision=revision)
        assert state["revision"] == before["revision"]
        assert state["state"]["document"] == before["document"]
        ws.send_json({"type": "resync", "revision": revision})
        again = receive_until(ws, "state")
        assert again["revision"] == before["revision"]
        if revision == -5:  # older than the session: everything it has is missed
            assert [e["kind"] for e in again["missed"]] == ["create", "add_variable"]
        else:
            assert again["missed"] == []
    assert room.state() == before


def test_vote_on_a_proposal_settled_meanwhile_is_refused(debate, tmp_path):
    """A client acting on an old revision: the proposal it saw open was settled first."""
    room, ann, start = debate
    room.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "accept"})
    late = room.send(ann, {"type": "vote", "proposal": 1, "choice": "disagree"})
    assert late.status_code == 409 and late.json()["code"] == "voting_closed"
    assert_whole(tmp_path, room.id, start)


def test_two_facilitator_tabs_settle_and_undo_at_once(debate, tmp_path):
    room, ann, start = debate
    for target in ("commute_km", "voucher_draw", "engagement_score"):
        room.ok(ann, {"type": "propose", "kind": "add", "from": "age", "to": target})
    answers: dict[str, list] = {"a": [], "b": []}
    go = threading.Barrier(2, timeout=20)

    def tab(name: str) -> None:
        with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
            hello(ws, room.facilitator)
            go.wait()
            for p in (1, 2, 3, 4):  # both tabs settle every proposal, differently
                ws.send_json({"type": "command", "id": p, "command": {
                    "type": "settle", "proposal": p, "decision": "accept" if name == "a" else "reject"}})
            answers[name] += [_answer(ws) for _ in range(4)]
            go.wait()
            ws.send_json({"type": "command", "id": 5, "command": {"type": "undo"}})
            answers[name].append(_answer(ws))

    threads = [threading.Thread(target=tab, args=(n,)) for n in "ab"]
    for t in threads:
        t.start()
    for t in threads:
        t.join(30)
    assert len(answers["a"]) == len(answers["b"]) == 5
    for p in range(4):  # each proposal settled by exactly one tab; the other is told why
        kinds = sorted(answers[n][p]["type"] for n in "ab")
        assert kinds == ["ack", "error"], (p, answers)
        loser = next(answers[n][p] for n in "ab" if answers[n][p]["type"] == "error")
        assert loser["code"] == "already_settled"
    assert [answers[n][4]["type"] for n in "ab"] == ["ack", "ack"]  # two undos, one after the other
    undone = {answers[n][4]["event"]["undoes"] for n in "ab"}
    assert len(undone) == 2
    final = room.state()
    assert sum(p["status"] == "open" for p in final["proposals"]) == 2
    events = assert_whole(tmp_path, room.id, start)
    assert events[-1]["revision"] == final["revision"]


def _answer(ws):
    while True:
        message = ws.receive_json()
        if message["type"] in ("ack", "error"):
            return message


def test_failure_inside_the_analysis_is_a_clear_message(room, monkeypatch):
    import app.sessions.analysis as analysis

    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    before = room.state()

    def broken(_workshop):
        raise FloatingPointError("overflow in a matrix product")

    monkeypatch.setattr(analysis, "analyse_workshop", broken)
    room.client.app.state.sessions.analysis.forget(room.id)
    r = room.client.get(f"/api/sessions/{room.id}/analysis", headers={TOKEN_HEADER: room.facilitator})
    assert r.status_code == 422
    assert r.json()["code"] == "analysis_failed" and "FloatingPointError" in r.json()["error"]
    # The live push says the same, and the edit that triggered it still stands.
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        hello(ws, room.facilitator)
        ws.send_json({"type": "command", "id": 1, "command": {"type": "add_variable", "name": "age"}})
        pushed = receive_until(ws, "analysis", lambda m: m["revision"] == before["revision"] + 1, limit=40)
        assert pushed["analysis"] is None and pushed["problem"] == "the analysis failed on this diagram"
    after = room.state()
    assert after["document"]["arrows"] == before["document"]["arrows"]
    assert after["revision"] == before["revision"] + 1


@pytest.fixture
def agreed(client, tmp_path):
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    room = open_room(client, document=doc)
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    return room, f"/api/sessions/{room.id}/estimation", {TOKEN_HEADER: room.facilitator}


def _data(change) -> bytes:
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    change(frame)
    return frame.to_csv(index=False).encode()


def _collinear(f):
    f["commute_km"] = 2 * f["age"]


def _overflow(f):
    f["fitness"] = 1e300
    f.loc[0, "fitness"] = -1e300


def _no_variation(f):
    f["bike_lease"] = 1


def _infinite(f):
    f.loc[3, "age"] = float("inf")


@pytest.mark.parametrize("change, words", [
    (_collinear, "perfectly collinear"),        # a singular design matrix
    (_overflow, "values as large as 1e+300"),  # squares would overflow to inf
    (_no_variation, "single value"),
    (_infinite, "infinite values"),
])
@pytest.mark.parametrize("step", ["estimate", "validation", "sensitivity"])
def test_numerical_failure_in_an_estimate_is_a_clear_message(agreed, change, words, step):
    room, base, headers = agreed
    client = room.client
    assert client.put(f"{base}/data?name=bad.csv", content=_data(change), headers=headers).status_code == 200
    before_state, before_est = room.state(), client.get(base, headers=headers).json()
    body = {"wait": True} if step == "validation" else {}
    r = client.post(f"{base}/{step}", json=body, headers=headers)
    assert 400 <= r.status_code < 500, r.text
    assert words in r.json()["error"]
    assert room.state() == before_state
    assert client.get(base, headers=headers).json() == before_est


def test_singular_weighting_fit_is_a_clear_message(agreed):
    """An outcome that is an exact copy of the treatment makes the weighting fit singular."""
    room, base, headers = agreed
    def copy(f):
        f["sick_days"] = 1.0 * f["bike_lease"]
    room.client.put(f"{base}/data?name=copy.csv", content=_data(copy), headers=headers)
    before = room.state()
    r = room.client.post(f"{base}/estimate", json={"method": "weighting"}, headers=headers)
    # The outcome carries nothing beyond the treatment: the analyst gets a 422 that says so
    # (no interval of zero width), and the session is untouched.
    assert r.status_code == 422, r.text
    error = r.json()["error"]
    assert "single value in each arm" in error, error
    assert room.state() == before
