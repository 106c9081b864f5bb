"""A realistic workshop, built only through the HTTP API, for the record and report tests.

The demo diagram (sample_data/cycle_to_work.json) is drawn, two colleagues join,
the room debates three proposals and one drawn arrow, the facilitator settles
them, the diagram is locked, the analyst attaches sample_data/cycle_to_work.csv
and runs every estimation step. ``build_workshop`` returns the ids and keys.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from pathlib import Path

from fastapi.testclient import TestClient

ROOT = Path(__file__).resolve().parents[2]
SAMPLE = ROOT / "sample_data"
TOKEN_HEADER = "X-Arrowmoot-Token"


@dataclass
class Workshop:
    client: TestClient
    session_id: str
    facilitator: str
    analyst: str
    participant: str

    def headers(self, token: str | None = None) -> dict:
        return {TOKEN_HEADER: token or self.facilitator}

    def get(self, path: str, token: str | None = None):
        return self.client.get(f"/api/sessions/{self.session_id}{path}", headers=self.headers(token))


def _ok(response):
    assert response.status_code in (200, 201), response.text
    return response.json()


def build_workshop(client: TestClient, *, document: dict | None = None, estimate: bool = True,
                   title: str = "Bike leases and sick days and sick days") -> Workshop:
    doc = document or json.loads((SAMPLE / "cycle_to_work.json").read_text())
    made = _ok(client.post("/api/sessions", json={"title": title, "name": "Fran (facilitator)",
                                                  "document": doc}))
    sid, fac = made["session_id"], made["token"]
    joined_a = _ok(client.post("/api/join", json={"code": made["join_code"], "name": "Ana (HR analyst)"}))
    joined_p = _ok(client.post("/api/join", json={"code": made["join_code"], "name": "Pat (occupational health)"}))
    ana, pat = joined_a["token"], joined_p["token"]

    def send(token, command):
        return _ok(client.post(f"/api/sessions/{sid}/commands", json=command, headers={TOKEN_HEADER: token}))

    send(fac, {"type": "grant_role", "member": joined_a["member"]["id"], "role": "analyst"})
    send(fac, {"type": "set_stage", "stage": "debating"})
    names = [v["name"] for v in doc["variables"]]
    if {"commute_km", "fitness", "voucher_draw", "department"} <= set(names):
        p1 = send(pat, {"type": "propose", "kind": "add", "from": "commute_km", "to": "fitness",
                        "reason": "People with long commutes have less time to exercise"})["event"]["proposal"]
        send(ana, {"type": "vote", "proposal": p1, "choice": "agree", "reason": "matches the survey"})
        send(fac, {"type": "vote", "proposal": p1, "choice": "disagree", "reason": "fitness was measured first"})
        send(fac, {"type": "settle", "proposal": p1, "decision": "dispute"})
        p2 = send(ana, {"type": "propose", "kind": "remove", "from": "department", "to": "bike_lease",
                        "reason": "Every department got the same offer"})["event"]["proposal"]
        send(pat, {"type": "vote", "proposal": p2, "choice": "disagree", "reason": "field staff cannot cycle"})
        send(fac, {"type": "settle", "proposal": p2, "decision": "reject"})
        send(pat, {"type": "vote", "from": "voucher_draw", "to": "bike_lease", "choice": "unsure",
                   "reason": "not everyone reads the e-mails"})
    send(fac, {"type": "set_stage", "stage": "agreed"})
    send(fac, {"type": "set_stage", "stage": "estimation"})
    if estimate:
        base = f"/api/sessions/{sid}/estimation"
        head = {TOKEN_HEADER: ana}
        _ok(client.put(f"{base}/data?name=cycle_to_work.csv", content=(SAMPLE / "cycle_to_work.csv").read_bytes(),
                       headers=head))
        _ok(client.post(f"{base}/estimate", json={}, headers=head))
        _ok(client.post(f"{base}/validation", json={"resamples": 50, "wait": True}, headers=head))
        _ok(client.post(f"{base}/sensitivity", json={}, headers=head))
        _ok(client.post(f"{base}/disputes", json={}, headers=head))
    return Workshop(client=client, session_id=sid, facilitator=fac, analyst=ana, participant=pat)
