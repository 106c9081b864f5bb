"""Marking a left-out arrow "considered, stays out": who may, what it needs, undo."""

from __future__ import annotations


def _send(client, room, token, command):
    return client.post(f"/api/sessions/{room.id}/commands", json=command, headers={"X-Arrowmoot-Token": token})


def test_marks_are_the_facilitators_for_arrows_not_drawn_and_undo_takes_them_back(client, room):
    room.ok(room.facilitator, {"type": "add_variable", "name": "age"})
    ann = room.join("Ann")
    mark = {"type": "mark_absent", "from": "age", "to": "sick_days", "reason": "checked the literature"}
    r = _send(client, room, ann, mark)
    assert r.status_code == 403
    room.ok(room.facilitator, mark)
    state = client.get(f"/api/sessions/{room.id}", headers={"X-Arrowmoot-Token": ann}).json()["state"]
    assert [(m["from"], m["to"], m["by_name"], m["reason"]) for m in state["absent_marks"]] == [
        ("age", "sick_days", room_name(state), "checked the literature")]
    room.ok(room.facilitator, {"type": "undo"})
    state = client.get(f"/api/sessions/{room.id}", headers={"X-Arrowmoot-Token": ann}).json()["state"]
    assert state["absent_marks"] == []
    room.ok(room.facilitator, {"type": "add_arrow", "from": "age", "to": "sick_days"})
    r = _send(client, room, room.facilitator, mark)
    assert r.status_code == 409 and r.json()["code"] == "arrow_drawn"
    r = _send(client, room, room.facilitator, {"type": "mark_absent", "from": "age", "to": "bike_lease", "considered": False})
    assert r.status_code == 404 and r.json()["code"] == "unknown_mark"


def room_name(state):
    return next(m["name"] for m in state["members"] if m["role"] == "facilitator")
