"""Every error answers in one shape, every code is in the catalogue, the catalogue is current."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from app.errors import AppError
from app.web.errors import HTTP_STATUS
from tests.helpers.error_catalogue import _error_classes, catalogue, render

ROOT = Path(__file__).resolve().parent.parent
SHAPE = {"ok", "error", "status", "code"}
BOGUS = {"session_id": "no-such-session", "code": "ZZZZZZ", "ticket": "no-such-ticket"}
# Endpoints that cannot fail without a session or a body: they answer 200 to anyone.
ALWAYS_ANSWER = {("GET", "/api/vocabulary"), ("GET", "/healthz"), ("GET", "/readyz")}


def test_the_catalogue_in_the_docs_is_current():
    assert (ROOT / "docs" / "errors.md").read_text(encoding="utf-8") == render(), \
        "run: python -m tests.helpers.error_catalogue > docs/errors.md"


def test_every_kind_of_error_has_a_status():
    for cls in _error_classes().values():
        assert cls.kind in HTTP_STATUS, cls.__name__


def test_each_code_has_one_status_except_the_documented_pairs():
    """A code means one problem; the few that both a command and a document check use keep both
    statuses (a document with a duplicate variable is 422, adding a duplicate variable is 409;
    a body that is not an object is 400, one that fails the schema 422)."""
    doubled = {code for code, entry in catalogue().items() if len(entry["status"]) > 1}
    assert doubled <= {"duplicate_arrow", "duplicate_variable", "malformed_document", "self_loop",
                       "too_large", "unknown_variable", "unknown_arrow", "invalid_request"}


def _api_routes(app):
    """Every operation the OpenAPI schema describes."""
    for path, operations in app.openapi()["paths"].items():
        for method in operations:
            yield method.upper(), path


def test_every_endpoint_answers_errors_in_one_shape(client):
    """Each API endpoint, asked with made-up ids, no key and no body, refuses in the one shape."""
    known = catalogue()
    seen = 0
    for method, path in _api_routes(client.app):
        url = re.sub(r"\{(\w+)\}", lambda m: BOGUS.get(m.group(1), "x"), path)
        r = client.request(method, url, content=b"[]", headers={"content-type": "application/json"})
        if (method, path) in ALWAYS_ANSWER:
            assert r.status_code == 200
            continue
        assert 400 <= r.status_code < 500, (method, path, r.status_code, r.text)
        body = r.json()
        assert set(body) == SHAPE, (method, path, body)
        assert body["ok"] is False and body["status"] == r.status_code
        assert isinstance(body["error"], str) and body["error"].strip()
        assert body["code"] in known, (method, path, body["code"])
        seen += 1
    assert seen >= 20


def test_errors_with_a_session_keep_the_shape(room):
    """With a real session: no key, a forged key, a refused command, a diagram with a cycle."""
    bad = [
        room.client.get(f"/api/sessions/{room.id}"),
        room.client.get(f"/api/sessions/{room.id}", headers={"X-Arrowmoot-Token": "m1.forged"}),
        room.send(room.join("Pat"), {"type": "set_stage", "stage": "debating"}),
        room.send(room.facilitator, {"type": "nonsense"}),
    ]
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    bad.append(room.send(room.facilitator, {"type": "add_arrow", "from": "sick_days", "to": "bike_lease"}))
    for r in bad:
        body = r.json()
        assert body["ok"] is False and body["status"] == r.status_code and body["code"] in catalogue()
        assert set(body) - {"cycle"} == SHAPE
    assert bad[-1].json()["cycle"] and bad[-1].json()["code"] == "cycle"


def test_the_socket_sends_the_same_shape(room):
    with room.client.websocket_connect(f"/ws/sessions/{room.id}") as ws:
        ws.send_json({"type": "hello", "token": "m1.forged"})
        message = ws.receive_json()
    assert message["type"] == "error" and message["status"] == 401 and message["code"] == "bad_token"
    assert SHAPE <= set(message)


@pytest.mark.parametrize("cls", [c for c in _error_classes().values() if "code" in vars(c)],
                         ids=lambda c: c.__name__)
def test_every_named_error_is_an_app_error_with_its_own_code(cls):
    assert issubclass(cls, AppError) and cls.code
