"""FastAPI dependencies: the store, the live hub, the session and its member.

Interfaces for other engineers
------------------------------
Everything below is stable; import from ``app.web.deps``.

* ``SessionDep`` — ``Annotated[SessionAccess, Depends(get_session)]``: loads the
  session named by the ``{session_id}`` path parameter or answers 404. No
  permission check (use it for public reads only).
* ``MemberDep`` — the same, but requires a valid token for that session in the
  ``X-Arrowmoot-Token`` header (401 without / with a bad key, 403 for another
  session's key). ``access.member`` is the :class:`~app.workshop.models.Member`.
* ``FacilitatorDep``, ``AnalystDep`` — require that role. The facilitator counts
  as an analyst too. ``require_role("analyst")`` builds the same dependency.
* ``SessionAccess`` (what every dependency above returns):
  ``.session_id``, ``.stage`` (``drafting`` / ``debating`` / ``agreed`` / ``estimation``),
  ``.diagram()`` (the current validated :class:`~app.graph.document.Diagram`),
  ``.document()`` (the graph document dict), ``.revision``, ``.title``,
  ``.require_stage(*stages)`` (409 otherwise),
  ``.put_attachment(key, value)`` / ``.get_attachment(key, default=None)`` /
  ``.delete_attachment(key)`` (a per-session JSON store in the database),
  ``.data_dir()`` (a per-session directory under the data dir, created on use),
  ``await .log(summary, kind="estimation", **extra)`` (adds an event to the
  session history and pushes the new state to every participant).
* ``SessionsDep`` (the application layer, :class:`app.sessions.Sessions`),
  ``HubDep`` (the live connections), ``StoreDep`` and ``SettingsDep``
  (``request.app.state.sessions`` etc.). ``access.analysis_now()`` (sync) and
  ``await access.analysis_soon()`` give the panel's analysis of the current
  revision: ``{"revision", "analysis", "problem", "disputes", "absent"}``.
* Errors: raise ``app.errors.NotFound`` / ``BadRequest`` / ``Conflict`` /
  ``Forbidden`` / ``PayloadTooLarge`` (or any ``AppError``); one handler turns them
  into ``{"ok": false, "error", "status", "code"}``. ``DiagramError`` becomes 422.
* The session page loads ``/static/js/estimation.js`` (an ES module) when that
  file exists, and calls its ``mountEstimation(element, context)`` export with the
  panel element ``#estimation-panel`` and ``{sessionId, token, member, state,
  subscribe}`` (see static/js/session.js). A router ``app.web.routes.estimation.router``
  is included by ``create_app`` when that module exists.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Annotated, Any

from fastapi import Depends, Request

from ..errors import Forbidden
from ..graph.document import Diagram
from ..sessions import Sessions
from ..sessions.keys import TOKEN_HEADER
from ..settings import Settings
from ..storage import Store
from ..workshop.models import Member, Workshop
from ..workshop.rules import check as check_rule
from .live import Hub

__all__ = [
    "SessionAccess", "get_session", "get_member", "require_role",
    "SessionDep", "MemberDep", "FacilitatorDep", "AnalystDep", "permit",
    "AttachDataDep", "MapColumnsDep", "EstimateDep", "RecordDep",
    "StoreDep", "HubDep", "SessionsDep", "SettingsDep", "TOKEN_HEADER",
]


def get_store(request: Request) -> Store:
    return request.app.state.store


def get_hub(request: Request) -> Hub:
    return request.app.state.hub


def get_sessions(request: Request) -> Sessions:
    return request.app.state.sessions


def get_settings(request: Request) -> Settings:
    return request.app.state.settings


StoreDep = Annotated[Store, Depends(get_store)]
HubDep = Annotated[Hub, Depends(get_hub)]
SessionsDep = Annotated[Sessions, Depends(get_sessions)]
SettingsDep = Annotated[Settings, Depends(get_settings)]


@dataclass
class SessionAccess:
    session_id: str
    sessions: Sessions
    member: Member | None = None

    @property
    def workshop(self) -> Workshop:
        return self.sessions.workshop(self.session_id)

    @property
    def stage(self) -> str:
        return self.workshop.stage

    @property
    def revision(self) -> int:
        return self.workshop.revision

    @property
    def title(self) -> str:
        return self.workshop.title

    def diagram(self) -> Diagram:
        return self.workshop.diagram()

    def document(self) -> dict[str, Any]:
        return self.workshop.document()

    def require_stage(self, *stages: str) -> None:
        self.sessions.require_stage(self.session_id, *stages)

    def put_attachment(self, key: str, value: Any) -> None:
        self.sessions.store.put_attachment(self.session_id, key, value)

    def get_attachment(self, key: str, default: Any = None) -> Any:
        return self.sessions.store.get_attachment(self.session_id, key, default)

    def delete_attachment(self, key: str) -> bool:
        return self.sessions.store.delete_attachment(self.session_id, key)

    def list_attachment_keys(self) -> list[str]:
        return self.sessions.store.list_attachment_keys(self.session_id)

    def data_dir(self) -> Path:
        return self.sessions.store.session_data_dir(self.session_id)

    def analysis_now(self) -> dict[str, Any]:
        return self.sessions.analysis.now(self.session_id)

    async def analysis_soon(self) -> dict[str, Any]:
        return await self.sessions.analysis.soon(self.session_id)

    async def log(self, summary: str, kind: str = "estimation", **extra: Any) -> dict:
        return await self.sessions.note(self.session_id, self.member, summary, kind=kind, **extra)


# The dependencies are async so they run on the event loop, like every change.
async def get_session(session_id: str, sessions: SessionsDep) -> SessionAccess:
    sessions.workshop(session_id)  # 404 when missing
    return SessionAccess(session_id=session_id, sessions=sessions)


async def get_member(session_id: str, request: Request, sessions: SessionsDep) -> SessionAccess:
    sessions.workshop(session_id)
    member = sessions.authenticate(session_id, request.headers.get(TOKEN_HEADER))
    return SessionAccess(session_id=session_id, sessions=sessions, member=member)


def require_role(role: str):
    """A dependency that lets only members holding ``role`` through."""

    async def dependency(access: Annotated[SessionAccess, Depends(get_member)]) -> SessionAccess:
        assert access.member is not None
        if not access.member.has_role(role):
            raise Forbidden(f"this needs the {role} role; ask the facilitator", code="needs_role")
        return access

    return dependency


def permit(operation: str):
    """A dependency that lets a member through only where the rule table allows ``operation``."""

    async def dependency(access: Annotated[SessionAccess, Depends(get_member)]) -> SessionAccess:
        assert access.member is not None
        check_rule(operation, access.member, access.stage)
        return access

    return dependency


SessionDep = Annotated[SessionAccess, Depends(get_session)]
MemberDep = Annotated[SessionAccess, Depends(get_member)]
FacilitatorDep = Annotated[SessionAccess, Depends(require_role("facilitator"))]
AnalystDep = Annotated[SessionAccess, Depends(require_role("analyst"))]
# The estimation stage and the record, as app/workshop/rules.py allows them.
AttachDataDep = Annotated[SessionAccess, Depends(permit("attach_data"))]
MapColumnsDep = Annotated[SessionAccess, Depends(permit("map_columns"))]
EstimateDep = Annotated[SessionAccess, Depends(permit("estimate"))]
RecordDep = Annotated[SessionAccess, Depends(permit("export_record"))]
