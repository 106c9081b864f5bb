"""Several server processes on one PostgreSQL database share every session.

Two real servers (uvicorn, each its own process) on one throwaway database:
an edit through one reaches a WebSocket client of the other; edits sent
alternately or at the same moment through both land exactly once, with one
gapless sequence of revisions decided by the database; killing one server
mid-load loses no edit it acknowledged.
"""

from __future__ import annotations

import json
import threading
import time

import httpx
import pytest
from websockets.sync.client import connect

from tests.helpers.app import TOKEN_HEADER
from tests.helpers.live_server import LiveServer


@pytest.fixture(scope="module")
def two_servers(tmp_path_factory, postgres_cluster):
    """Two servers for the whole module (each test opens its own session); the URL in
    ARROWMOOT_DB_PATH selects PostgreSQL."""
    url = postgres_cluster.new_database()
    folder = tmp_path_factory.mktemp("shared")  # the shared folder for attached files
    servers = [LiveServer(folder, db=url), LiveServer(folder, db=url)]
    for server in servers:
        server.start()
    for server in servers:
        assert httpx.get(server.base + "/readyz", timeout=30).json()["store"] == "postgresql"
    yield servers, url
    for server in servers:
        server.stop()


def _open_session(base: str, members: int = 0) -> tuple[str, list[str]]:
    made = httpx.post(base + "/api/sessions", json={"title": "Cycle-to-work workshop", "treatment": "bike_lease",
                                                     "outcome": "sick_days"}, timeout=30).json()
    keys = [made["token"]]
    for i in range(members):
        joined = httpx.post(base + "/api/join", json={"code": made["join_code"], "name": f"Colleague {i}"},
                            timeout=30)
        assert joined.status_code == 201, joined.text
        keys.append(joined.json()["token"])
    return made["session_id"], keys


def _send(base: str, session_id: str, key: str, name: str) -> dict:
    """Add a variable (with a command key, so a resend is harmless); wait out pacing."""
    for _ in range(100):
        r = httpx.post(f"{base}/api/sessions/{session_id}/commands",
                       json={"type": "add_variable", "name": name, "x": 10, "y": 10},
                       headers={TOKEN_HEADER: key, "Idempotency-Key": name}, timeout=30)
        if r.status_code == 429:
            time.sleep(0.2)
            continue
        assert r.status_code == 200, r.text
        return r.json()
    raise AssertionError("still paced after 20 s")


def _stored(url: str, session_id: str) -> list[tuple[int, dict]]:
    import psycopg

    with psycopg.connect(url) as conn:
        rows = conn.execute("SELECT revision, data FROM events WHERE session_id = %s ORDER BY revision",
                            (session_id,)).fetchall()
    return [(r[0], json.loads(r[1])) for r in rows]


def _added(events: list[tuple[int, dict]]) -> list[str]:
    return [e["command"]["name"] for _, e in events if e["kind"] == "add_variable"]


def _assert_gapless(events: list[tuple[int, dict]]) -> None:
    revisions = [r for r, _ in events]
    assert revisions == list(range(revisions[0], revisions[0] + len(revisions))), revisions


def test_edit_through_one_server_is_pushed_to_a_client_of_the_other(two_servers):
    (a, b), _ = two_servers
    session_id, (key,) = _open_session(a.base)
    with connect(f"ws://127.0.0.1:{b.port}/ws/sessions/{session_id}", open_timeout=30) as ws:
        ws.send(json.dumps({"type": "hello", "token": key}))
        seen = [json.loads(ws.recv(timeout=30)) for _ in range(2)]
        assert [m["type"] for m in seen] == ["welcome", "state"]
        ack = _send(a.base, session_id, key, "commute_distance")
        deadline = time.monotonic() + 30
        while time.monotonic() < deadline:
            message = json.loads(ws.recv(timeout=30))
            if message["type"] in ("patch", "state") and message.get("revision") == ack["revision"]:
                break
        else:
            raise AssertionError("the edit made through the other server never arrived")
    assert "commute_distance" in json.dumps(message)
    state = httpx.get(f"{b.base}/api/sessions/{session_id}", headers={TOKEN_HEADER: key}, timeout=30).json()
    assert state["state"]["revision"] == ack["revision"]


def test_alternating_edits_land_once_with_consecutive_revisions(two_servers):
    (a, b), url = two_servers
    session_id, keys = _open_session(a.base, members=3)
    names = [f"v{i:03d}" for i in range(200)]
    for i, name in enumerate(names):
        _send((a, b)[i % 2].base, session_id, keys[i % 4], name)
    events = _stored(url, session_id)
    _assert_gapless(events)
    assert _added(events) == names  # each exactly once, in the order sent


def test_concurrent_edits_through_both_servers_never_gap_or_repeat(two_servers):
    (a, b), url = two_servers
    session_id, keys = _open_session(a.base, members=3)
    acked: list[dict] = []

    def sender(server, key, prefix):
        for i in range(30):
            acked.append(_send(server.base, session_id, key, f"{prefix}{i:02d}"))

    threads = [threading.Thread(target=sender, args=(s, k, p))
               for s, k, p in ((a, keys[0], "a"), (b, keys[1], "b"), (a, keys[2], "c"), (b, keys[3], "d"))]
    for t in threads:
        t.start()
    for t in threads:
        t.join(300)
    events = _stored(url, session_id)
    _assert_gapless(events)
    assert sorted(_added(events)) == sorted(f"{p}{i:02d}" for p in "abcd" for i in range(30))
    assert sorted(e["revision"] for e in acked) == [r for r, e in events if e["kind"] == "add_variable"]


def test_killing_one_server_mid_load_loses_no_acknowledged_edit(two_servers):
    (a, b), url = two_servers
    session_id, keys = _open_session(a.base, members=1)
    acknowledged: list[str] = []
    for i in range(60):
        name = f"k{i:02d}"
        server = a if i % 2 == 0 or b.proc.poll() is not None else b
        if i == 30:
            b.kill()  # SIGKILL, mid-load
            server = a
        try:
            _send(server.base, session_id, keys[i % 2], name)
        except httpx.HTTPError:
            _send(a.base, session_id, keys[i % 2], name)  # the page reconnects to the other server and resends
        acknowledged.append(name)
    b.start()  # for any test after this one
    events = _stored(url, session_id)
    _assert_gapless(events)
    assert _added(events) == acknowledged
