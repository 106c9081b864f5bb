"""A change the store could not keep is dropped: the session is what the store holds."""

from __future__ import annotations

import pytest


def test_change_that_fails_to_store_leaves_the_session_as_stored(room, monkeypatch):
    sessions = room.client.app.state.sessions
    ann = room.join("Ann")
    room.ok(room.facilitator, {"type": "add_variable", "name": "age"})
    room.ok(ann, {"type": "add_arrow", "from": "age", "to": "bike_lease"})
    before = room.state()
    real = sessions.store.save_change
    calls = []

    def failing(**kwargs):
        calls.append(kwargs["event"]["kind"])
        raise OSError("disk full")

    monkeypatch.setattr(sessions.store, "save_change", failing)
    with pytest.raises(OSError, match="disk full"):
        room.send(room.facilitator, {"type": "undo"})  # changes the log's undone flags too
    with pytest.raises(OSError, match="disk full"):
        room.send(ann, {"type": "add_variable", "name": "fitness"})
    assert calls == ["undo", "add_variable"]
    monkeypatch.setattr(sessions.store, "save_change", real)

    after = room.state()
    assert after == before  # nothing of the two changes is left, in memory or stored
    assert [e["undone"] for e in room.client.get(
        f"/api/sessions/{room.id}/history", headers={"X-Arrowmoot-Token": room.facilitator}
    ).json()["events"]] == [False] * len(before["recent"])
    # and the session goes on from there
    event = room.ok(ann, {"type": "add_variable", "name": "fitness"})
    assert event["revision"] == before["revision"] + 1
    assert room.ok(room.facilitator, {"type": "undo"})["event"]["undoes"] == event["revision"]
