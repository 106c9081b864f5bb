"""Frequent changes travel as patches; each patch carries exactly what the full state changed.

The reference is ``public_state`` after the change (what GET /api/sessions/{id} answers,
and what the server would otherwise have pushed): every part a patch carries must equal
the same part of it, and every part the patch leaves out must be unchanged.
"""

from __future__ import annotations

import json
import logging

import pytest

from app.web import live
from tests.helpers.socket import hello

BLANK_TALLY = {"agree": 0, "disagree": 0, "unsure": 0, "total": 0}


def _arrow_pairs(state: dict) -> list[tuple[str, str]]:
    return [(a["from"], a["to"]) for a in state["document"]["arrows"]]


def check_patch(patch: dict, before: dict, after: dict) -> None:
    """``patch`` turns ``before`` into ``after`` (both full public states)."""
    assert patch["type"] == "patch", f"a full state was sent for {patch.get('event', {}).get('kind')}"
    assert patch["base"] == before["revision"] and patch["revision"] == after["revision"]
    assert patch["event"]["revision"] == after["revision"] and "before" not in patch["event"]
    # Never carried by a patch, so never changed by one.
    assert after["session"] == before["session"]
    assert after["members"] == before["members"]
    for part in ("treatment", "outcome", "format", "version"):
        assert after["document"][part] == before["document"][part]
    for part in ("disputed", "can_undo"):
        if part in patch:
            assert patch[part] == after[part]
        else:
            assert after[part] == before[part], f"{part} changed but the patch left it out"

    # Variables: moved in place, new ones appended, nothing else touched.
    added = patch.get("variables_added", [])
    variables = after["document"]["variables"]
    assert variables[len(variables) - len(added):] == added
    moved = {m["name"]: m for m in patch.get("moves", [])}
    expected = [dict(v, x=moved[v["name"]]["x"], y=moved[v["name"]]["y"]) if v["name"] in moved else v
                for v in before["document"]["variables"]]
    assert variables[:len(variables) - len(added)] == expected

    # Arrows: removed ones gone, added ones appended or in the place of their reverse.
    removed = [tuple(a) for a in patch.get("arrows_removed", [])]
    new = [tuple(a) for a in patch.get("arrows_added", [])]
    in_place = {(b, a): (a, b) for a, b in new if (b, a) in removed}
    pairs = [in_place.get(p, p) for p in _arrow_pairs(before) if p in in_place or p not in removed]
    pairs += [p for p in new if p not in in_place.values()]
    assert _arrow_pairs(after) == pairs
    notes_after = {(a["from"], a["to"]): a for a in after["arrows"]}
    notes_before = {(a["from"], a["to"]): a for a in before["arrows"]}
    carried = {(n["from"], n["to"]): n for n in patch.get("arrow_notes", [])}
    assert set(new) <= set(carried), "a new arrow came without its votes and mark"
    for pair, note in notes_after.items():
        if pair in carried:
            assert carried[pair] == note
        else:
            assert note == notes_before[pair], f"arrow {pair} changed but the patch left it out"

    # Proposals: the ones carried equal the full state's; the others did not change.
    proposals_after = {p["id"]: p for p in after["proposals"]}
    proposals_before = {p["id"]: p for p in before["proposals"]}
    carried = {p["id"]: p for p in patch.get("proposals", [])}
    assert [p["id"] for p in after["proposals"]] == sorted(proposals_after)
    for pid, p in proposals_after.items():
        if pid in carried:
            assert carried[pid] == p
        else:
            assert p == proposals_before[pid], f"proposal #{pid} changed but the patch left it out"


class Watcher:
    """One member's WebSocket, reading the push that each change makes."""

    def __init__(self, room, ws):
        self.room, self.ws = room, ws
        _, start = hello(ws, room.facilitator)
        self.revision = start["revision"]

    def change(self, token: str, command: dict) -> dict:
        before = self.room.state()
        assert before["revision"] == self.revision
        self.room.ok(token, command)
        push = self.next_push()
        after = self.room.state()
        self.revision = after["revision"]
        return {"push": push, "before": before, "after": after}

    def next_push(self) -> dict:
        for _ in range(50):
            message = self.ws.receive_json()
            if message["type"] in ("patch", "state") and message["revision"] == self.revision + 1:
                return message
        raise AssertionError("no push for the change")


@pytest.fixture
def debate(room):
    """A room in the debating stage: a small diagram, two participants."""
    for name in ("age", "fitness", "commute"):
        room.ok(room.facilitator, {"type": "add_variable", "name": name})
    for a, b in (("age", "bike_lease"), ("age", "sick_days"), ("fitness", "sick_days"), ("bike_lease", "fitness")):
        room.ok(room.facilitator, {"type": "add_arrow", "from": a, "to": b})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ann, room.bob = room.join("Ann"), room.join("Bob")
    return room


def test_each_frequent_change_arrives_as_a_patch_equal_to_the_full_state(debate):
    room = debate
    fac, ann, bob = room.facilitator, room.ann, room.bob
    steps = [
        (ann, {"type": "propose", "kind": "add", "from": "commute", "to": "sick_days", "reason": "stress"}),
        (bob, {"type": "vote", "proposal": 1, "choice": "agree", "reason": "seen it"}),
        (ann, {"type": "vote", "proposal": 1, "choice": "disagree"}),
        (ann, {"type": "withdraw_vote", "proposal": 1}),
        (bob, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "disagree", "reason": "no"}),
        (ann, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "unsure"}),
        (bob, {"type": "withdraw_vote", "from": "age", "to": "bike_lease"}),
        (bob, {"type": "propose", "kind": "reverse", "from": "bike_lease", "to": "fitness"}),
        (ann, {"type": "propose", "kind": "remove", "from": "age", "to": "sick_days"}),
        (bob, {"type": "propose", "kind": "add", "from": "commute", "to": "bike_lease"}),
        (ann, {"type": "propose", "kind": "add", "from": "age", "to": "commute"}),
        (ann, {"type": "vote", "proposal": 2, "choice": "agree"}),
        (fac, {"type": "settle", "proposal": 1, "decision": "accept"}),
        (fac, {"type": "settle", "proposal": 2, "decision": "accept"}),
        (fac, {"type": "settle", "proposal": 3, "decision": "dispute"}),
        (fac, {"type": "settle", "proposal": 3, "decision": "accept"}),
        (fac, {"type": "settle", "proposal": 4, "decision": "reject"}),
        (ann, {"type": "withdraw_proposal", "proposal": 5}),
        (bob, {"type": "add_variable", "name": "weather", "latent": True, "x": 300, "y": 80}),
        (ann, {"type": "add_variable", "name": "distance", "label": "Distance to work"}),
        (bob, {"type": "move_variable", "name": "age", "x": 42, "y": 24}),
        (fac, {"type": "flag_arrow", "from": "fitness", "to": "bike_lease", "flag": "disputed"}),
        (fac, {"type": "flag_arrow", "from": "commute", "to": "sick_days", "flag": "settled"}),
        (fac, {"type": "add_arrow", "from": "weather", "to": "commute"}),
        (fac, {"type": "reverse_arrow", "from": "weather", "to": "commute"}),
        (fac, {"type": "delete_arrow", "from": "commute", "to": "weather"}),
    ]
    kinds = set()
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        watcher = Watcher(room, ws)
        for token, command in steps:
            seen = watcher.change(token, command)
            check_patch(seen["push"], seen["before"], seen["after"])
            kinds.add(command["type"])
        # the reversal kept the arrow's place; the accepted add arrived with its proposal
        assert ("fitness", "bike_lease") in _arrow_pairs(seen["after"])
    assert kinds >= {"vote", "withdraw_vote", "propose", "settle", "withdraw_proposal",
                     "add_variable", "move_variable", "flag_arrow"}


def test_a_vote_on_a_proposal_carries_its_tally_and_nothing_it_did_not_change(debate):
    room = debate
    room.ok(room.ann, {"type": "propose", "kind": "add", "from": "commute", "to": "sick_days"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        watcher = Watcher(room, ws)
        seen = watcher.change(room.bob, {"type": "vote", "proposal": 1, "choice": "agree"})
        patch = seen["push"]
        assert set(patch) == {"type", "revision", "base", "proposals", "event"}
        assert patch["proposals"][0]["tally"] == dict(BLANK_TALLY, agree=1, total=1)
        assert patch["proposals"][0]["votes"][0]["name"] == "Bob"
        # a small message, not the session (the full state is far larger)
        assert len(json.dumps(patch)) < len(json.dumps(seen["after"])) / 3


def test_a_vote_against_an_arrow_puts_it_in_dispute_in_the_patch(debate):
    room = debate
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        watcher = Watcher(room, ws)
        seen = watcher.change(room.bob, {"type": "vote", "from": "age", "to": "bike_lease",
                                         "choice": "disagree"})
        patch = seen["push"]
        check_patch(patch, seen["before"], seen["after"])
        assert [item["pair"] for item in patch["disputed"]] == [["age", "bike_lease"]]
        assert patch["arrow_notes"][0]["tally"]["disagree"] == 1


def test_withdrawing_a_vote_from_an_arrow_no_longer_drawn_changes_nothing_shown(debate):
    room = debate
    room.ok(room.bob, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "agree"})
    room.ok(room.facilitator, {"type": "delete_arrow", "from": "age", "to": "bike_lease"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        watcher = Watcher(room, ws)
        seen = watcher.change(room.bob, {"type": "withdraw_vote", "from": "age", "to": "bike_lease"})
        check_patch(seen["push"], seen["before"], seen["after"])
        assert seen["push"]["arrow_notes"] == []


@pytest.mark.parametrize("command", [
    {"type": "set_stage", "stage": "drafting"},
    {"type": "undo"},
    {"type": "rename_session", "title": "Renamed"},
    {"type": "update_variable", "name": "age", "label": "Age in years"},
    {"type": "set_question", "treatment": ["bike_lease"], "outcome": ["fitness"]},
])
def test_rare_changes_still_send_the_full_state(debate, command):
    room = debate
    room.ok(room.facilitator, {"type": "flag_arrow", "from": "age", "to": "bike_lease", "flag": "settled"})
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        watcher = Watcher(room, ws)
        seen = watcher.change(room.facilitator, command)
        assert seen["push"]["type"] == "state"
        pushed = seen["push"]["state"]
        assert pushed["revision"] == seen["after"]["revision"]
        assert pushed["proposals"] == seen["after"]["proposals"]
        assert pushed["disputed"] == seen["after"]["disputed"]


def test_a_patch_that_cannot_be_built_falls_back_to_the_full_state(debate, monkeypatch, caplog):
    room = debate

    def broken(w, event):
        raise KeyError("something the patch builder did not expect")

    monkeypatch.setattr(live, "change_patch", broken)
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws, \
            caplog.at_level(logging.ERROR, logger="arrowmoot"):
        watcher = Watcher(room, ws)
        seen = watcher.change(room.bob, {"type": "vote", "from": "age", "to": "bike_lease",
                                         "choice": "agree"})
        assert seen["push"]["type"] == "state"
        assert seen["push"]["state"]["disputed"] == seen["after"]["disputed"]
        notes = {(a["from"], a["to"]): a for a in seen["push"]["state"]["arrows"]}
        assert notes[("age", "bike_lease")]["tally"]["agree"] == 1
    assert "could not build the patch for a vote" in caplog.text


def test_no_patch_for_an_event_the_workshop_has_moved_past(debate):
    """A patch is built only against the revision right before the current one."""
    from app.workshop.views import change_patch

    room = debate
    room.ok(room.bob, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "agree"})
    w = room.client.app.state.sessions.workshop(room.id)
    vote = w.log[-1]
    assert change_patch(w, vote)["arrow_notes"][0]["tally"]["agree"] == 1
    room.ok(room.ann, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "agree"})
    assert change_patch(w, vote) is None
