"""Sessions: create, join, read, change (commands), history, analysis, export."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Body, Request, Response

from ...errors import BadRequest
from ...sessions.vocabulary import vocabulary
from ...workshop.views import history, public_state
from ..deps import HubDep, MemberDep, SessionsDep
from ..guards import guarded_join_lookup
from ..schemas import (
    AnalysisRead, Command, CommandApplied, CreateSession, HistoryRead, Joined, JoinCodeFound, JoinSession,
    SessionCreated, SessionRead, VocabularyRead, body_schema,
)

router = APIRouter(prefix="/api", tags=["sessions"])


def _links(session_id: str, join_code: str, token: str | None = None) -> dict[str, str]:
    out = {"session_page": f"/s/{session_id}", "join_link": f"/join/{join_code}"}
    if token is not None:
        # The key travels in the URL fragment, which browsers never send to the server.
        out["facilitator_link"] = f"/s/{session_id}#key={token}"
    return out


@router.post("/sessions", status_code=201, response_model=SessionCreated,
             openapi_extra=body_schema(CreateSession))
async def create_session(sessions: SessionsDep, body: Any = Body(...)) -> dict:
    """Open a new session; the answer holds the facilitator's key (shown once)."""
    if not isinstance(body, dict):
        raise BadRequest("send a JSON object with a 'title'", code="invalid_request")
    w, token = sessions.create(
        title=body.get("title"), facilitator_name=body.get("name"),
        document=body.get("document"), treatment=body.get("treatment"),
        outcome=body.get("outcome"), document_text=body.get("document_text"),
        document_format=body.get("document_format"),
    )
    member = w.facilitators()[0]
    return {"ok": True, "session_id": w.id, "join_code": w.join_code, "token": token,
            "member": member.to_public(), **_links(w.id, w.join_code, token),
            "state": public_state(w)}


@router.get("/vocabulary", response_model=VocabularyRead)
async def read_vocabulary() -> dict:
    """The words and rules the page shows: stages, roles, vote choices, permissions, methods."""
    return {"ok": True, **vocabulary()}


@router.get("/join/{code}", response_model=JoinCodeFound)
async def read_join_code(code: str, sessions: SessionsDep, request: Request) -> dict:
    """What a join code leads to (title and stage only)."""
    w = await guarded_join_lookup(request, sessions, code)
    return {"ok": True, "session_id": w.id, "title": w.title, "stage": w.stage}


@router.post("/join", status_code=201, response_model=Joined, openapi_extra=body_schema(JoinSession))
async def join_session(sessions: SessionsDep, request: Request, body: Any = Body(...)) -> dict:
    """Join a session with its code and a display name; returns the participant's key."""
    if not isinstance(body, dict):
        raise BadRequest("send a JSON object with 'code' and 'name'", code="invalid_request")
    await guarded_join_lookup(request, sessions, body.get("code"))
    w, member, token = await sessions.join(body.get("code"), body.get("name"))
    return {"ok": True, "session_id": w.id, "token": token, "member": member.to_public(),
            **_links(w.id, w.join_code)}


@router.get("/sessions/{session_id}", response_model=SessionRead)
async def read_session(access: MemberDep, hub: HubDep) -> dict:
    """The session's current state, as every participant sees it."""
    w = access.workshop
    return {"ok": True, "member": access.member.to_public(), "state": public_state(w),
            "online": hub.online(w.id), "read_only": access.sessions.is_read_only(w.id)}


@router.post("/sessions/{session_id}/commands", response_model=CommandApplied,
             openapi_extra=body_schema(Command))
async def submit_command(access: MemberDep, request: Request, body: Any = Body(...)) -> dict:
    """Apply one change (see app.workshop.commands for the command types).

    An ``Idempotency-Key`` header makes a resent request harmless: the same key
    from the same member is applied once and answered with ``"replayed": true`` after."""
    event = await access.sessions.submit(access.session_id, access.member, body,
                                    key=request.headers.get("idempotency-key"))
    return {"ok": True, "revision": event["revision"], "event": _public(event),
            **({"replayed": True} if event.get("replayed") else {})}


@router.get("/sessions/{session_id}/history", response_model=HistoryRead)
async def read_history(access: MemberDep) -> dict:
    """Every change with who made it and when."""
    return {"ok": True, "events": history(access.workshop)}


@router.get("/sessions/{session_id}/analysis", response_model=AnalysisRead)
async def read_analysis(access: MemberDep) -> dict:
    """What the current diagram implies, with the dispute and absent-arrow checks."""
    return {"ok": True, **(await access.analysis_soon())}


EXPORTS = {
    "graphml": ("application/graphml+xml", "graphml"),
    "dot": ("text/vnd.graphviz", "gv"),
}


@router.get("/sessions/{session_id}/document")
async def export_document(access: MemberDep, format: str = "json"):
    """The current diagram as a graph document, or as GraphML or DOT (``?format=``)."""
    if format == "json":
        return access.workshop.document()
    if format not in EXPORTS:
        raise BadRequest("'format' must be json, graphml or dot", code="invalid_field")
    from ...graph.formats import to_dot, to_graphml

    diagram = access.diagram()
    text = to_graphml(diagram) if format == "graphml" else to_dot(diagram)
    media, suffix = EXPORTS[format]
    return Response(text, media_type=media, headers={
        "Content-Disposition": f'attachment; filename="diagram.{suffix}"'})


def _public(event: dict) -> dict:
    return {k: v for k, v in event.items() if k != "before"}
