"""The report's words follow the session's state: a diagram is called agreed only once
the room locked it, and each proposal's line says what was decided (or that nothing was)."""

from __future__ import annotations

from app.reporting.report import render_report
from tests.helpers.report_page import parse


def _bundle(client, room):
    return client.get(f"/api/sessions/{room.id}/export/bundle",
                      headers={"X-Arrowmoot-Token": room.facilitator}).json()


def _setup(room):
    for name in ("age", "commute"):
        room.ok(room.facilitator, {"type": "add_variable", "name": name})


def test_a_drafting_session_is_not_called_agreed(client, room):
    _setup(room)
    page = parse(render_report(_bundle(client, room)))
    assert "The diagram in draft (not yet agreed)" in page.headings
    assert "The agreed diagram" not in page.headings
    assert "the room had not agreed this diagram" in page.full_text
    assert "agreed diagram" not in page.full_text


def test_each_proposal_line_says_what_was_decided(client, room):
    _setup(room)
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    ann = room.join("Ann")
    for frm, to in (("age", "bike_lease"), ("age", "sick_days"), ("commute", "bike_lease")):
        room.ok(ann, {"type": "propose", "kind": "add", "from": frm, "to": to})
    room.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "dispute"})
    room.ok(room.facilitator, {"type": "settle", "proposal": 2, "decision": "accept"})
    text = parse(render_report(_bundle(client, room))).full_text
    assert "Settled by" not in text
    assert "#1 " in text and "Left disputed by " in text and ": not settled." in text
    assert "Accepted by " in text
    assert "Still open: no decision yet." in text
    assert "The diagram under debate (not yet agreed)" in text

    room.ok(room.facilitator, {"type": "settle", "proposal": 3, "decision": "reject"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    page = parse(render_report(_bundle(client, room)))
    assert "The agreed diagram" in page.headings and "Rejected by " in page.full_text
    assert "not yet agreed" not in page.full_text
