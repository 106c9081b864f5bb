"""The workshop over HTTP: sessions, roles, edits, proposals, votes, stages, undo, errors."""

from __future__ import annotations

import pytest

from tests.helpers.app import TOKEN_HEADER, open_room


def test_create_session_adds_question_variables(room):
    state = room.state()
    names = [v["name"] for v in state["document"]["variables"]]
    assert names == ["bike_lease", "sick_days"]
    assert state["document"]["treatment"] == ["bike_lease"]
    assert state["session"]["stage"] == "drafting"
    assert len(room.join_code) == 6


def test_create_session_from_document_keeps_it(client, demo_document):
    r = open_room(client, document=demo_document)
    doc = r.state()["document"]
    assert len(doc["variables"]) == len(demo_document["variables"])
    assert len(doc["arrows"]) == len(demo_document["arrows"])


def test_create_session_without_title_is_refused(client):
    r = client.post("/api/sessions", json={"title": "  "})
    assert r.status_code == 400
    assert r.json() == {"ok": False, "error": "the title is empty", "status": 400, "code": "missing_field"}


def test_read_session_without_key_is_refused(room):
    r = room.client.get(f"/api/sessions/{room.id}")
    assert r.status_code == 401
    assert r.json()["code"] == "no_token"
    r = room.client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: "mabc.forged"})
    assert r.status_code == 401
    assert r.json()["error"] == "that session key is not valid"


def test_key_of_another_session_is_refused(client, room):
    other = open_room(client, title="Another room")
    r = client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: other.facilitator})
    assert r.status_code == 403
    assert r.json()["code"] == "wrong_session"


def test_join_with_unknown_code_names_the_problem(client):
    r = client.post("/api/join", json={"code": "ZZZZZZ", "name": "Ann"})
    assert r.status_code == 404
    assert r.json()["error"] == "no session has that join code; check it with the facilitator"


def test_join_code_is_case_and_space_tolerant(room):
    r = room.client.post("/api/join", json={"code": " " + room.join_code.lower() + " ", "name": "Ann"})
    assert r.status_code == 201


def test_participant_edits_while_drafting(room):
    ann = room.join("Ann")
    room.ok(ann, {"type": "add_variable", "name": "age", "x": 100, "y": 50})
    room.ok(ann, {"type": "add_arrow", "from": "age", "to": "bike_lease"})
    state = room.state(ann)
    assert {"from": "age", "to": "bike_lease"} in state["document"]["arrows"]
    assert state["recent"][-1]["actor_name"] == "Ann"


def test_cycle_is_refused_with_the_cycle_named_and_nothing_lost(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    before = room.state()
    r = room.send(room.facilitator, {"type": "add_arrow", "from": "sick_days", "to": "bike_lease"})
    assert r.status_code == 422
    body = r.json()
    assert body["code"] == "cycle"
    assert "sick_days -> bike_lease -> sick_days" in body["error"] or "bike_lease -> sick_days -> bike_lease" in body["error"]
    after = room.state()
    assert after["document"] == before["document"]
    assert after["revision"] == before["revision"]


@pytest.mark.parametrize("command, status, code", [
    ({"type": "add_arrow", "from": "bike_lease", "to": "nobody"}, 404, "unknown_variable"),
    ({"type": "add_arrow", "from": "bike_lease", "to": "bike_lease"}, 422, "self_loop"),
    ({"type": "add_variable", "name": "bike_lease"}, 409, "duplicate_variable"),
    ({"type": "add_variable", "name": "bad\u0007name"}, 422, "invalid_name"),
    ({"type": "add_variable", "name": ""}, 422, "invalid_name"),
    ({"type": "explode"}, 400, "unknown_command"),
    ({"type": "move_variable", "name": "bike_lease", "x": "left", "y": 1}, 400, "invalid_field"),
    ({"type": "vote", "from": "bike_lease", "to": "sick_days", "choice": "maybe"}, 400, "invalid_field"),
    ({"type": "propose", "kind": "add", "from": "bike_lease", "to": "sick_days"}, 409, "wrong_stage"),
])
def test_bad_commands_get_a_clear_message(room, command, status, code):
    r = room.send(room.facilitator, command)
    assert r.status_code == status, r.text
    body = r.json()
    assert set(body) >= {"ok", "error", "status", "code"}
    assert body["ok"] is False and body["status"] == status and body["code"] == code
    assert body["error"]


def test_command_body_must_be_an_object(room):
    r = room.client.post(f"/api/sessions/{room.id}/commands", json=[1, 2],
                         headers={TOKEN_HEADER: room.facilitator})
    assert r.status_code == 400
    assert r.json()["code"] == "invalid_command"


def test_only_facilitator_moves_stages_and_undoes(room):
    ann = room.join("Ann")
    r = room.send(ann, {"type": "set_stage", "stage": "debating"})
    assert r.status_code == 403
    assert r.json()["error"] == "only the facilitator can move the session to another stage"
    r = room.send(ann, {"type": "undo"})
    assert r.status_code == 403
    r = room.send(ann, {"type": "set_question", "treatment": ["sick_days"], "outcome": ["bike_lease"]})
    assert r.status_code == 403


def test_debating_turns_arrow_edits_into_proposals(room):
    ann, bo = room.join("Ann"), room.join("Bo")
    room.ok(room.facilitator, {"type": "add_variable", "name": "fitness"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    r = room.send(ann, {"type": "add_arrow", "from": "fitness", "to": "sick_days"})
    assert r.status_code == 409 and r.json()["code"] == "use_proposal"
    room.ok(ann, {"type": "propose", "kind": "add", "from": "fitness", "to": "sick_days",
                  "reason": "fitter staff are off sick less"})
    room.ok(ann, {"type": "vote", "proposal": 1, "choice": "agree"})
    room.ok(bo, {"type": "vote", "proposal": 1, "choice": "disagree", "reason": "not shown here"})
    room.ok(bo, {"type": "vote", "proposal": 1, "choice": "unsure"})  # a member's later vote replaces the earlier
    p = room.state()["proposals"][0]
    assert p["tally"] == {"agree": 1, "disagree": 0, "unsure": 1, "total": 2}
    assert p["status"] == "open"
    room.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "accept"})
    state = room.state()
    assert {"from": "fitness", "to": "sick_days"} in state["document"]["arrows"]
    assert state["proposals"][0]["status"] == "accepted"
    r = room.send(ann, {"type": "vote", "proposal": 1, "choice": "agree"})
    assert r.status_code == 409 and r.json()["code"] == "voting_closed"


def test_accepting_a_proposal_that_makes_a_cycle_is_refused(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ok(room.facilitator, {"type": "propose", "kind": "add", "from": "sick_days", "to": "bike_lease"})
    r = room.send(room.facilitator, {"type": "settle", "proposal": 1, "decision": "accept"})
    assert r.status_code == 422 and r.json()["code"] == "cycle"
    assert room.state()["proposals"][0]["status"] == "open"


def test_locking_and_reopening_needs_a_reason(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    r = room.send(room.facilitator, {"type": "add_variable", "name": "age"})
    assert r.status_code == 409 and r.json()["code"] == "diagram_locked"
    r = room.send(room.facilitator, {"type": "set_stage", "stage": "debating"})
    assert r.status_code == 400
    assert r.json()["error"] == "reopening a locked diagram needs a written reason; it goes into the log"
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating", "reason": "HR found a new confounder"})
    history = room.client.get(f"/api/sessions/{room.id}/history",
                              headers={TOKEN_HEADER: room.facilitator}).json()["events"]
    assert "HR found a new confounder" in history[-1]["summary"]


def test_locking_with_open_proposals_is_refused(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ok(room.facilitator, {"type": "propose", "kind": "remove", "from": "bike_lease", "to": "sick_days"})
    r = room.send(room.facilitator, {"type": "set_stage", "stage": "agreed"})
    assert r.status_code == 409 and r.json()["code"] == "open_proposals"
    room.ok(room.facilitator, {"type": "settle", "proposal": 1, "decision": "dispute"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "agreed"})


def test_undo_reverts_the_last_graph_change(room):
    room.ok(room.facilitator, {"type": "add_variable", "name": "age", "x": 10, "y": 10})
    room.ok(room.facilitator, {"type": "add_arrow", "from": "age", "to": "bike_lease"})
    room.ok(room.facilitator, {"type": "move_variable", "name": "age", "x": 300, "y": 40})
    room.ok(room.facilitator, {"type": "undo"})
    state = room.state()
    assert state["document"]["arrows"] == []
    age = next(v for v in state["document"]["variables"] if v["name"] == "age")
    assert (age["x"], age["y"]) == (300, 40)  # later moves survive the undo
    room.ok(room.facilitator, {"type": "undo"})
    assert [v["name"] for v in room.state()["document"]["variables"]] == ["bike_lease", "sick_days"]
    events = room.client.get(f"/api/sessions/{room.id}/history",
                             headers={TOKEN_HEADER: room.facilitator}).json()["events"]
    assert [e["kind"] for e in events][-2:] == ["undo", "undo"]
    assert all("before" not in e for e in events)


def test_rename_updates_arrows_question_and_votes(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "vote", "from": "bike_lease", "to": "sick_days", "choice": "agree"})
    room.ok(room.facilitator, {"type": "update_variable", "name": "bike_lease", "new_name": "leased_bike"})
    state = room.state()
    assert state["document"]["treatment"] == ["leased_bike"]
    assert state["arrows"][0]["from"] == "leased_bike"
    assert state["arrows"][0]["tally"]["agree"] == 1


def test_grant_analyst_role(room):
    ann = room.join("Ann")
    ann_id = room.state(ann)["members"][1]["id"]
    room.ok(room.facilitator, {"type": "grant_role", "member": ann_id, "role": "analyst"})
    me = room.client.get(f"/api/sessions/{room.id}", headers={TOKEN_HEADER: ann}).json()["member"]
    assert me["roles"] == ["participant", "analyst"]


def test_identify_m_bias_example(client):
    """M-bias: adjusting for the collider M opens X <- A -> M <- B -> Y.

    Greenland, Pearl & Robins (1999), Epidemiology 10(1), Figure 2: the empty
    set is sufficient and {M} is not.
    """
    doc = {"variables": ["x", "y", "a", "b", "m"],
           "arrows": [["a", "x"], ["a", "m"], ["b", "m"], ["b", "y"], ["x", "y"]],
           "treatment": "x", "outcome": "y", "adjust": ["m"]}
    r = client.post("/api/identify", json=doc)
    assert r.status_code == 200
    body = r.json()
    assert body["minimal_adjustment_sets"] == [[]]
    assert body["adjustment_check"]["valid"] is False


def test_identify_bad_documents(client):
    r = client.post("/api/identify", json={"variables": ["a"], "arrows": [["a", "b"]], "treatment": "a", "outcome": "a"})
    assert r.status_code == 422
    assert r.json()["code"] == "unknown_variable"
    r = client.post("/api/identify", json=[1])
    assert r.status_code == 400
    assert r.json()["code"] == "malformed_document"


def test_unknown_session_gives_json_404_and_html_page(client):
    r = client.get("/api/sessions/nope", headers={TOKEN_HEADER: "x"})
    assert r.status_code == 404 and r.json()["code"] == "unknown_session"
    page = client.get("/s/nope", headers={"Accept": "text/html"})
    assert page.status_code == 404
    assert "there is no session with that id" in page.text


def test_pages_escape_user_text(client):
    r = open_room(client, title="<script>alert(1)</script>")
    page = client.get(f"/join/{r.join_code}")
    assert page.status_code == 200
    assert "<script>alert(1)</script>" not in page.text
    assert "&lt;script&gt;" in page.text
    assert "script-src 'self'" in page.headers["content-security-policy"]


def test_create_from_graphml_and_export_dot_round_trip(client, demo_document):
    """GraphML in, DOT out; the exported DOT parses back (with networkx/pydot) to the same arrows."""
    import networkx as nx
    import pydot
    from app.graph.document import parse_document
    from app.graph.formats import to_graphml

    text = to_graphml(parse_document(demo_document))
    r = client.post("/api/sessions", json={"title": "From GraphML", "document_text": text,
                                           "document_format": "graphml"})
    assert r.status_code == 201, r.text
    body = r.json()
    out = client.get(f"/api/sessions/{body['session_id']}/document?format=dot",
                     headers={TOKEN_HEADER: body["token"]})
    assert out.status_code == 200 and out.headers["content-type"].startswith("text/vnd.graphviz")
    graph = nx.nx_pydot.from_pydot(pydot.graph_from_dot_data(out.text)[0])
    exported = {(a.strip('"'), b.strip('"')) for a, b, *_ in graph.edges}
    assert exported == {(a["from"], a["to"]) for a in demo_document["arrows"]}


def test_import_refuses_a_cyclic_dot_file_and_keeps_the_diagram(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    before = room.state()["document"]
    r = room.send(room.facilitator, {"type": "import_document", "format": "dot",
                                     "text": "digraph { a -> b; b -> a }"})
    assert r.status_code == 422 and r.json()["code"] == "cycle"
    assert room.state()["document"] == before


def test_undoing_a_rename_brings_back_names_in_proposals_and_votes(room):
    room.ok(room.facilitator, {"type": "add_arrow", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "vote", "from": "bike_lease", "to": "sick_days", "choice": "agree"})
    room.ok(room.facilitator, {"type": "set_stage", "stage": "debating"})
    room.ok(room.facilitator, {"type": "propose", "kind": "remove", "from": "bike_lease", "to": "sick_days"})
    room.ok(room.facilitator, {"type": "update_variable", "name": "bike_lease", "new_name": "joined"})
    assert room.state()["proposals"][0]["from"] == "joined"
    room.ok(room.facilitator, {"type": "undo"})
    state = room.state()
    assert state["proposals"][0]["from"] == "bike_lease"
    assert state["arrows"][0]["tally"]["agree"] == 1
