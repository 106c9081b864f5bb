"""Security: what a participant may not do, join-code guessing, how keys are kept and
compared, where the server listens, and cross-origin requests."""

from __future__ import annotations

import hashlib
import json
from pathlib import Path

import pytest
from fastapi.testclient import TestClient
from starlette.websockets import WebSocketDisconnect

from tests.helpers.app import TOKEN_HEADER, make_app, open_room
from app.settings import Settings
from app.main import create_app
from app.web.errors import status_of

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
DOC = json.loads((SAMPLE / "cycle_to_work.json").read_text())


@pytest.fixture
def debate(client):
    room = open_room(client, document=DOC)
    ann = room.join("Ann")
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ok(ann, {"type": "propose", "kind": "add", "from": "voucher_draw", "to": "sick_days"})
    return room, ann


# -- roles ----------------------------------------------------------------------------
FACILITATOR_ONLY = [
    ({"type": "set_stage", "stage": "agreed"}, "facilitator_only"),
    ({"type": "set_stage", "stage": "drafting", "reason": "redo"}, "facilitator_only"),
    ({"type": "settle", "proposal": 1, "decision": "accept"}, "facilitator_only"),
    ({"type": "undo"}, "facilitator_only"),
    ({"type": "grant_role", "member": "SELF", "role": "analyst"}, "facilitator_only"),
    ({"type": "flag_arrow", "from": "age", "to": "bike_lease", "flag": "settled"}, "facilitator_only"),
    ({"type": "rename_session", "title": "mine now"}, "facilitator_only"),
    ({"type": "set_question", "treatment": "age", "outcome": "sick_days"}, "facilitator_only"),
]


@pytest.mark.parametrize("command, code", FACILITATOR_ONLY)
def test_participant_cannot_do_what_only_the_facilitator_may(debate, command, code):
    room, ann = debate
    me = room.client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: ann}).json()["member"]["id"]
    command = {k: (me if v == "SELF" else v) for k, v in command.items()}
    before = room.state()
    r = room.send(ann, command)
    assert r.status_code == 403, r.text
    assert r.json()["code"] == code and r.json()["error"].startswith("only the facilitator can")
    assert room.state() == before


def test_participant_cannot_do_it_over_the_websocket_either(debate):
    room, ann = debate
    before = room.state()
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        ws.send_json({"type": "hello", "token": ann})
        for i, (command, _) in enumerate(FACILITATOR_ONLY[:4]):
            ws.send_json({"type": "command", "id": i, "command": command})
        errors = []
        while len(errors) < 4:
            m = ws.receive_json()
            if m["type"] in ("ack", "error"):
                errors.append(m)
    assert [m["type"] for m in errors] == ["error"] * 4
    assert {m["status"] for m in errors} == {403}
    assert room.state() == before


@pytest.fixture
def agreed(client):
    room = open_room(client, document=DOC)
    ann = room.join("Ann")
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    return room, ann, f"/api/sessions/{room.id}/estimation"


def test_participant_cannot_upload_data_or_estimate(agreed):
    room, ann, base = agreed
    csv = (SAMPLE / "cycle_to_work.csv").read_bytes()
    r = room.client.put(f"{base}/data?name=x.csv", content=csv, headers={TOKEN_HEADER: ann})
    assert r.status_code == 403 and r.json()["code"] == "needs_role"
    for step in ("estimate", "validation", "validation/stop", "sensitivity", "disputes"):
        r = room.client.post(f"{base}/{step}", json={}, headers={TOKEN_HEADER: ann})
        assert r.status_code == 403, step
    r = room.client.put(f"{base}/mapping", json={"mapping": {}}, headers={TOKEN_HEADER: ann})
    assert r.status_code == 403
    assert room.client.get(base, headers={TOKEN_HEADER: ann}).json()["data"] is None


def test_analyst_role_opens_the_upload_but_not_the_stages(agreed):
    room, ann, base = agreed
    member = room.client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: ann}).json()["member"]["id"]
    room.ok(room.facilitator, {"type": "grant_role", "member": member, "role": "analyst"})
    csv = (SAMPLE / "cycle_to_work.csv").read_bytes()
    assert room.client.put(f"{base}/data?name=x.csv", content=csv, headers={TOKEN_HEADER: ann}).status_code == 200
    assert room.send(ann, {"type": "set_stage", "stage": "estimation"}).status_code == 403
    assert room.send(ann, {"type": "undo"}).status_code == 403


@pytest.mark.parametrize("path", ["", "/history", "/analysis", "/document", "/estimation"])
def test_participant_cannot_read_another_session(client, debate, path):
    room, ann = debate
    other = open_room(client, title="Other room", treatment="bike_lease", outcome="sick_days")
    r = client.get(f"/api/sessions/{other.id}{path}", headers={TOKEN_HEADER: ann})
    assert r.status_code == 403 and r.json()["code"] == "wrong_session"
    assert "Other room" not in r.text


def test_participant_cannot_open_another_sessions_socket(client, debate):
    room, ann = debate
    other = open_room(client, title="Other room")
    with client.websocket_connect(f"/ws/sessions/{other.id}") as ws:
        ws.send_json({"type": "hello", "token": ann})
        m = ws.receive_json()
        assert m["type"] == "error" and m["code"] == "wrong_session"
        with pytest.raises(WebSocketDisconnect) as closed:
            ws.receive_json()
        assert closed.value.code == 4403


# -- join codes ----------------------------------------------------------------------------
def _recorded_pauses(client):
    """Make the join limiter record its pauses instead of sleeping them."""
    pauses: list[float] = []

    async def sleep(seconds):
        pauses.append(seconds)

    client.app.state.join_limiter.sleep = sleep
    return pauses


def test_wrong_join_codes_slow_down_but_the_right_code_gets_in(client, room):
    pauses = _recorded_pauses(client)
    limit = client.app.state.settings.join_attempts_per_minute
    for i in range(limit):
        r = client.post("/api/join", json={"code": f"WRONG{i}", "name": "Eve"})
        assert r.status_code == 404 and r.json()["code"] == "unknown_join_code"
    assert pauses == []  # within the allowance: full speed
    r = client.post("/api/join", json={"code": "WRONGX", "name": "Eve"})
    assert r.status_code == 404  # still an answer, after a pause
    assert pauses == [1.0]
    # the right code from the same address (a room behind one router) is let in, after its turn
    assert client.post("/api/join", json={"code": room.join_code, "name": "Sam"}).status_code == 201
    assert client.get(f"/api/join/{room.join_code}").status_code == 200
    assert client.get(f"/join/{room.join_code}").status_code == 200
    assert pauses == [1.0, 2.0, 2.0, 2.0]


def test_right_join_codes_do_not_count(client, room):
    pauses = _recorded_pauses(client)
    limit = client.app.state.settings.join_attempts_per_minute
    for i in range(limit * 2):
        assert client.post("/api/join", json={"code": room.join_code, "name": f"P{i}"}).status_code == 201
    assert pauses == []


def test_join_pause_grows_moves_on_and_is_per_address():
    from app.web.guards import JoinLimiter

    now = [1000.0]
    limiter = JoinLimiter(limit=3, window=60.0, step=1.0, max_wait=5.0, clock=lambda: now[0])
    for code in ("AAAAAA", "BBBBBB", "AAAAAA", "aaaaaa "):  # a typo retried counts once
        limiter.failed("10.0.0.1", code)
    assert limiter.pause("10.0.0.1") == 0
    limiter.failed("10.0.0.1", "CCCCCC")
    assert limiter.pause("10.0.0.1") == 1.0
    for i in range(10):
        limiter.failed("10.0.0.1", f"D{i}")
    assert limiter.pause("10.0.0.1") == 5.0  # capped
    assert limiter.pause("10.0.0.2") == 0  # another address is not affected
    now[0] += 61
    assert limiter.pause("10.0.0.1") == 0


def test_join_turns_are_taken_one_at_a_time_and_a_flood_is_turned_away():
    import asyncio

    from app.web.guards import JoinLimiter, TooManyAttempts

    async def run():
        gate = asyncio.Event()
        inside: list[int] = []
        limiter = JoinLimiter(limit=1, window=60.0, max_queue=2, sleep=lambda s: gate.wait())
        limiter.failed("10.0.0.1", "WRONG1")

        async def one(i):
            async with limiter.turn("10.0.0.1"):
                inside.append(i)
                assert len(inside) == 1  # one at a time
                await asyncio.sleep(0)
                inside.remove(i)
                return i

        tasks = [asyncio.create_task(one(i)) for i in range(2)]
        await asyncio.sleep(0.01)
        with pytest.raises(TooManyAttempts) as err:
            async with limiter.turn("10.0.0.1"):
                pass
        assert status_of(err.value) == 429 and "waiting from this address at once" in err.value.message
        gate.set()
        assert sorted(await asyncio.gather(*tasks)) == [0, 1]

    asyncio.run(run())


def test_join_limiter_forgets_quiet_addresses():
    from app.web.guards import JoinLimiter

    now = [0.0]
    limiter = JoinLimiter(limit=3, window=60.0, clock=lambda: now[0])
    limiter.MAX_ADDRESSES = 100
    for i in range(150):
        limiter.failed(f"10.0.{i // 256}.{i % 256}", "WRONG")
    now[0] += 61
    limiter.pause("10.9.9.9")
    assert len(limiter._failures) <= 1


# -- keys --------------------------------------------------------------------------------
def test_keys_are_stored_only_as_digests(tmp_path):
    with TestClient(make_app(tmp_path)) as client:
        room = open_room(client, treatment="bike_lease", outcome="sick_days")
        ann = room.join("Ann")
        room.ok(ann, {"type": "add_variable", "name": "age"})
        store = client.app.state.store
        with store._lock:
            rows = store._conn.execute("SELECT token_hash, member_id FROM tokens").fetchall()
    raw = b"".join(p.read_bytes() for p in tmp_path.iterdir() if p.name.startswith("arrowmoot.sqlite3"))
    for token in (room.facilitator, ann):
        secret = token.split(".", 1)[1]
        assert secret.encode() not in raw and token.encode() not in raw
        assert hashlib.sha256(token.encode()).hexdigest() in {r["token_hash"] for r in rows}


def test_keys_are_compared_in_constant_time(room, monkeypatch):
    """The digest of the offered key is compared with hmac.compare_digest, never with ==."""
    import hmac

    calls = []
    real = hmac.compare_digest

    def spy(a, b):
        calls.append((a, b))
        return real(a, b)

    monkeypatch.setattr(hmac, "compare_digest", spy)
    member_id = room.facilitator.split(".")[0]
    forged = member_id + ".not-the-secret"
    assert room.send(forged, {"type": "undo"}).status_code == 401
    assert room.client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: room.facilitator}).status_code == 200
    digests = {hashlib.sha256(t.encode()).hexdigest() for t in (forged, room.facilitator)}
    assert len(calls) >= 2 and {b for _, b in calls} >= digests
    # The stored digest is found by the member id before the comparison, so the
    # database lookup itself never depends on the secret part of the key.
    assert all(a == hashlib.sha256(room.facilitator.encode()).hexdigest() for a, _ in calls)


# -- where the server listens ----------------------------------------------------------------
def test_serve_binds_to_loopback_unless_told_otherwise(monkeypatch, tmp_path, capsys):
    import uvicorn
    from app import cli

    seen = []
    monkeypatch.setattr(uvicorn, "run", lambda app, **kw: seen.append(kw))
    monkeypatch.setenv("ARROWMOOT_DEMO_SESSION", "0")
    assert cli.main(["serve", "--db", str(tmp_path / "a.sqlite3")]) == 0
    assert seen[-1]["host"] == "127.0.0.1"
    assert "warning" not in capsys.readouterr().err
    assert cli.main(["serve", "--host", "0.0.0.0", "--db", str(tmp_path / "a.sqlite3")]) == 0
    assert seen[-1]["host"] == "0.0.0.0"
    assert "anyone who can reach this address" in capsys.readouterr().err


# -- cross-origin ---------------------------------------------------------------------------
@pytest.mark.parametrize("method, path", [("post", "/api/sessions"), ("get", "/api/join/ABCDEF"),
                                          ("post", "/api/join"), ("post", "/api/identify")])
def test_cross_origin_requests_are_refused_by_default(client, method, path):
    r = getattr(client, method)(path, headers={"Origin": "https://evil.example"},
                                **({"json": {"title": "t"}} if method == "post" else {}))
    assert r.status_code == 403 and r.json()["code"] == "cross_origin"
    assert "access-control-allow-origin" not in r.headers


def test_cross_origin_command_with_a_stolen_key_is_refused(room):
    before = room.state()
    r = room.client.post(f"/api/sessions/{room.id}/commands", json={"type": "undo"},
                         headers={TOKEN_HEADER: room.facilitator, "Origin": "http://127.0.0.1:9999"})
    assert r.status_code == 403
    assert room.state() == before


def test_preflight_from_a_foreign_origin_is_refused(client):
    r = client.options("/api/sessions", headers={"Origin": "https://evil.example",
                                                 "Access-Control-Request-Method": "POST"})
    assert r.status_code == 403 and "access-control-allow-origin" not in r.headers


def test_same_origin_and_non_browser_requests_pass(client):
    assert client.post("/api/sessions", json={"title": "t"}, headers={"Origin": "http://testserver"}).status_code == 201
    assert client.post("/api/sessions", json={"title": "t"}).status_code == 201


def test_listed_origin_gets_the_preflight_and_the_header(tmp_path):
    settings = Settings(db_path=tmp_path / "a.sqlite3", data_dir=tmp_path / "d", demo_session=False,
                        analysis_in_process=False, allowed_origins=("https://board.example",))
    with TestClient(create_app(settings=settings)) as client:
        pre = client.options("/api/sessions", headers={"Origin": "https://board.example",
                                                       "Access-Control-Request-Method": "POST",
                                                       "Access-Control-Request-Headers": "x-arrowmoot-token"})
        assert pre.status_code == 204
        assert pre.headers["access-control-allow-origin"] == "https://board.example"
        assert "x-arrowmoot-token" in pre.headers["access-control-allow-headers"]
        r = client.post("/api/sessions", json={"title": "t"}, headers={"Origin": "https://board.example"})
        assert r.status_code == 201 and r.headers["access-control-allow-origin"] == "https://board.example"
        assert client.post("/api/sessions", json={"title": "t"},
                           headers={"Origin": "https://other.example"}).status_code == 403


def test_cross_origin_websocket_is_closed_before_hello(room):
    with pytest.raises(WebSocketDisconnect) as closed:
        with room.client.websocket_connect(f"/ws/sessions/{room.id}",
                                           headers={"Origin": "https://evil.example"}) as ws:
            ws.receive_json()
    assert closed.value.code == 4403


def test_pages_forbid_framing_and_inline_script(client):
    r = client.get("/")
    csp = r.headers["content-security-policy"]
    assert "frame-ancestors 'none'" in csp and "script-src 'self'" in csp and "unsafe-inline" not in csp
    assert r.headers["x-content-type-options"] == "nosniff"
