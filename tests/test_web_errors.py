"""One error shape everywhere: every endpoint answers bad input with ok/error/status/code."""

from __future__ import annotations

import sys

import pytest

from tests.helpers.app import TOKEN_HEADER
from app.settings import SETTING_HELP, Settings, user_data_dir

KEYS = {"ok", "error", "status", "code"}


def _assert_shape(response, status):
    assert response.status_code == status, response.text
    body = response.json()
    assert KEYS <= set(body), body
    assert body["ok"] is False and body["status"] == status
    assert isinstance(body["error"], str) and body["error"]


@pytest.mark.parametrize("method, path, body, status", [
    ("POST", "/api/identify", "not json at all", 422),
    ("POST", "/api/identify", {"variables": "x"}, 422),
    ("POST", "/api/sessions", [], 400),
    ("POST", "/api/sessions", {"title": "t", "document": {"variables": [1]}}, 422),
    ("POST", "/api/sessions", {"title": "t", "treatment": "a", "outcome": "a"}, 422),
    ("POST", "/api/join", {"code": "", "name": "x"}, 400),
    ("POST", "/api/join", {"code": "QQQQQQ", "name": "x"}, 404),
    ("GET", "/api/join/QQQQQQ", None, 404),
    ("GET", "/api/sessions/none", None, 404),
    ("GET", "/api/sessions/none/history", None, 404),
    ("GET", "/api/sessions/none/analysis", None, 404),
    ("POST", "/api/sessions/none/commands", {"type": "tidy"}, 404),
    ("DELETE", "/api/identify", None, 405),
    ("GET", "/api/no-such-thing", None, 404),
])
def test_error_shape_without_a_session(client, method, path, body, status):
    kwargs = {}
    if isinstance(body, str):
        kwargs = {"content": body, "headers": {"Content-Type": "application/json"}}
    elif body is not None:
        kwargs = {"json": body}
    _assert_shape(client.request(method, path, **kwargs), status)


@pytest.mark.parametrize("path", ["", "/history", "/analysis", "/document"])
def test_session_reads_need_a_key(room, path):
    _assert_shape(room.client.get(f"/api/sessions/{room.id}{path}"), 401)
    _assert_shape(room.client.get(f"/api/sessions/{room.id}{path}", headers={TOKEN_HEADER: "m1.zz"}), 401)


def test_join_needs_a_name(room):
    r = room.client.post("/api/join", json={"code": room.join_code, "name": "   "})
    _assert_shape(r, 400)
    assert r.json()["error"] == "your name is empty"


def test_websocket_from_a_foreign_origin_is_refused(room):
    from starlette.websockets import WebSocketDisconnect

    with pytest.raises(WebSocketDisconnect) as info:
        with room.client.websocket_connect(f"/ws/sessions/{room.id}",
                                           headers={"Origin": "http://evil.example"}) as ws:
            ws.receive_json()
    assert info.value.code == 4403


def test_websocket_from_the_same_origin_is_accepted(room):
    with room.client.websocket_connect(f"/ws/sessions/{room.id}",
                                       headers={"Origin": "http://testserver"}) as ws:
        ws.send_json({"type": "hello", "token": room.facilitator})
        assert ws.receive_json()["type"] == "welcome"


def test_every_setting_has_help():
    assert set(Settings.names()) == set(SETTING_HELP)


def test_settings_read_the_environment(monkeypatch, tmp_path):
    monkeypatch.setenv("ARROWMOOT_DB_PATH", str(tmp_path / "x.sqlite3"))
    monkeypatch.setenv("ARROWMOOT_UPLOAD_LIMIT_BYTES", "1234")
    s = Settings()
    assert s.db_path == tmp_path / "x.sqlite3" and s.upload_limit_bytes == 1234
    monkeypatch.delenv("ARROWMOOT_DB_PATH")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "user"))
    if sys.platform not in ("win32", "darwin"):
        assert Settings().db_path == tmp_path / "user" / "arrowmoot" / "arrowmoot.sqlite3"
    assert Settings().db_path == user_data_dir() / "arrowmoot.sqlite3"
    assert Settings().data_dir is None  # attached files follow the database's folder
