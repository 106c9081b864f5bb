"""Storage: a restart brings everything back, on SQLite and on PostgreSQL; SQLite's WAL mode and hashed keys."""

from __future__ import annotations

import hashlib
import sqlite3

from fastapi.testclient import TestClient

from tests.helpers.app import TOKEN_HEADER, Room, make_app, open_room


def test_restart_brings_back_sessions_edits_and_votes(tmp_path, db_target):
    with TestClient(make_app(tmp_path, db=db_target)) as client:
        room = open_room(client, treatment="bike_lease", outcome="sick_days")
        other = open_room(client, title="Second room")
        ann = room.join("Ann")
        room.ok(ann, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
        room.ok(ann, {"type": "vote", "from": "bike_lease", "to": "sick_days", "choice": "disagree",
                      "reason": "the effect may run the other way"})
        room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
        room.ok(ann, {"type": "propose", "kind": "reverse", "from": "bike_lease", "to": "sick_days"})
        room.ok(room.facilitator, {"type": "vote", "proposal": 1, "choice": "unsure"})
        before = room.state()
        history_before = client.get(f"/api/sessions/{room.id}/history",
                                    headers={TOKEN_HEADER: room.facilitator}).json()
    with TestClient(make_app(tmp_path, db=db_target)) as client:
        again = Room(client, {"session_id": room.id, "join_code": room.join_code,
                              "token": room.facilitator})
        after = again.state()
        assert after["document"] == before["document"]
        assert after["arrows"] == before["arrows"]
        assert after["proposals"] == before["proposals"]
        assert after["revision"] == before["revision"]
        assert again.state(ann)["session"]["stage"] == "debating"  # Ann's key still works
        history_after = client.get(f"/api/sessions/{room.id}/history",
                                   headers={TOKEN_HEADER: room.facilitator}).json()
        assert history_after == history_before
        assert client.get(f"/api/sessions/{other.id}",
                          headers={TOKEN_HEADER: other.facilitator}).status_code == 200
        # and it keeps working after the restart
        again.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "reject"})


def test_database_uses_wal_and_stores_only_key_digests(tmp_path):
    with TestClient(make_app(tmp_path)) as client:
        room = open_room(client)
        ann = room.join("Ann")
    conn = sqlite3.connect(tmp_path / "arrowmoot.sqlite3")
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    stored = {row[0] for row in conn.execute("SELECT token_hash FROM tokens")}
    assert stored == {hashlib.sha256(t.encode()).hexdigest() for t in (room.facilitator, ann)}
    conn.close()
    raw = b"".join(p.read_bytes() for p in tmp_path.glob("arrowmoot.sqlite3*"))
    for token in (room.facilitator, ann):
        assert token.split(".")[1].encode() not in raw


def test_demo_session_created_once(tmp_path, capsys, db_target):
    with TestClient(make_app(tmp_path, demo=True, db=db_target)) as client:
        sessions = client.app.state.store.list_sessions()
    assert len(sessions) == 1
    printed = capsys.readouterr().err
    assert "Join code for participants" in printed and "#key=" in printed
    with TestClient(make_app(tmp_path, demo=True, db=db_target)) as client:
        assert len(client.app.state.store.list_sessions()) == 1
    assert "#key=" not in capsys.readouterr().err


def test_attachments_are_per_session(tmp_path, db_target):
    app = make_app(tmp_path, db=db_target)
    store = app.state.store
    with TestClient(app) as client:
        a, b = open_room(client), open_room(client, title="B")
    store.put_attachment(a.id, "mapping", {"bike_lease": "joined"})
    assert store.get_attachment(a.id, "mapping") == {"bike_lease": "joined"}
    assert store.get_attachment(b.id, "mapping") is None
    assert store.session_data_dir(a.id).is_dir()
    store.put_attachment(a.id, "mapping", {"bike_lease": "leased"})  # replaced, not added
    assert store.get_attachment(a.id, "mapping") == {"bike_lease": "leased"}
    assert "mapping" in store.list_attachment_keys(a.id)
    assert store.delete_attachment(a.id, "mapping") is True
    assert store.delete_attachment(a.id, "mapping") is False


def test_undo_still_works_after_a_restart(tmp_path, db_target):
    with TestClient(make_app(tmp_path, db=db_target)) as client:
        room = open_room(client, treatment="bike_lease", outcome="sick_days")
        room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    with TestClient(make_app(tmp_path, db=db_target)) as client:
        again = Room(client, {"session_id": room.id, "join_code": room.join_code,
                              "token": room.facilitator})
        again.ok(room.facilitator, {"type": "undo"})
        assert again.state()["document"]["arrows"] == []
