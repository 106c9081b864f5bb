"""Property-based fuzzing of the HTTP API from its own OpenAPI schema (schemathesis).

Every operation in /openapi.json gets a bounded number of generated requests, both
schema-valid and schema-breaking. The checks: no 5xx, and every response matches
the schema the app publishes for it. Half the requests carry a real session id and
the facilitator's key, so they get past authentication into the handlers; one
session is drafting, one is agreed with data attached (so the estimation routes run).
"""

from __future__ import annotations

import itertools
import json
import tempfile
from pathlib import Path

import schemathesis
from fastapi.testclient import TestClient
from hypothesis import HealthCheck, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import response_schema_conformance

from tests.helpers.app import TOKEN_HEADER, make_app

SAMPLE = Path(__file__).resolve().parents[1] / "sample_data"
EXAMPLES = 12  # per operation; the whole file stays well under a minute

APP = make_app(Path(tempfile.mkdtemp(prefix="arrowmoot-fuzz-")))
schema = schemathesis.openapi.from_asgi("/openapi.json", APP)


def _sessions() -> list[tuple[str, str]]:
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    out = []
    with TestClient(APP) as client:
        for stage in ("drafting", "agreed"):
            made = client.post("/api/sessions", json={"title": f"fuzz {stage}", "document": doc}).json()
            sid, headers = made["session_id"], {TOKEN_HEADER: made["token"]}
            if stage == "agreed":
                assert client.post(f"/api/sessions/{sid}/commands", headers=headers,
                                   json={"type": "set_stage", "stage": "agreed"}).status_code == 200
                assert client.put(f"/api/sessions/{sid}/estimation/data?name=cycle.csv", headers=headers,
                                  content=(SAMPLE / "cycle_to_work.csv").read_bytes()).status_code == 200
            out.append((sid, made["token"]))
    return out


SESSIONS = _sessions()
TURN = itertools.count()


@schema.parametrize()
@settings(max_examples=EXAMPLES, deadline=None, derandomize=True,
          suppress_health_check=list(HealthCheck))
def test_api_answers_within_its_schema_and_never_with_a_server_error(case):
    turn = next(TURN)
    if turn % 2 == 0:
        sid, token = SESSIONS[(turn // 2) % len(SESSIONS)]
        if "session_id" in (case.path_parameters or {}):
            case.path_parameters["session_id"] = sid
        case.headers = {**(case.headers or {}), TOKEN_HEADER: token}
    response = case.call_and_validate(checks=[not_a_server_error, response_schema_conformance])
    if response.status_code >= 400 and "json" in response.headers.get("content-type", [""])[0]:
        body = response.json()
        assert body["ok"] is False and isinstance(body["error"], str) and body["status"] == response.status_code
