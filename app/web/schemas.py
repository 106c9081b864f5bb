"""Request and response models of the session API, so the OpenAPI schema describes it.

Responses are validated against these models on the way out; each allows extra
keys, so a field added later is never dropped by the model. Request bodies are
described with :func:`body_schema` and still read by the route itself, which
names what is wrong in its own words (a model would answer in the framework's).
"""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ConfigDict, Field

__all__ = [
    "body_schema", "CreateSession", "JoinSession", "Command", "MemberOut", "SessionCreated",
    "JoinCodeFound", "Joined", "SessionRead", "CommandApplied", "HistoryRead", "AnalysisRead",
    "VocabularyRead",
]


class _Out(BaseModel):
    model_config = ConfigDict(extra="allow")

    ok: bool = True


class _In(BaseModel):
    model_config = ConfigDict(extra="allow")


# -- request bodies ---------------------------------------------------------------------------
class CreateSession(_In):
    """Open a session: a title, and optionally a diagram and the question."""

    title: str = Field(max_length=120)
    name: str | None = Field(None, description="the facilitator's display name", max_length=40)
    document: dict[str, Any] | None = Field(None, description="a graph document (docs/vocabulary.md)")
    document_text: str | None = Field(None, description="a graph file's text instead of a document")
    document_format: str | None = Field(None, description="json, graphml or dot, for document_text")
    treatment: str | list[str] | None = None
    outcome: str | list[str] | None = None


class JoinSession(_In):
    """Join with the code the facilitator gave and a display name."""

    code: str
    name: str = Field(max_length=40)


class Command(_In):
    """One change: a ``type`` (see app/workshop/commands.py) and that command's fields."""

    type: str


def body_schema(model: type[BaseModel]) -> dict[str, Any]:
    """``openapi_extra`` that describes a JSON request body by ``model``."""
    return {"requestBody": {"required": True, "content": {"application/json": {
        "schema": model.model_json_schema()}}}}


# -- responses ----------------------------------------------------------------------------------
class MemberOut(_Out):
    """A member as everyone in the session sees them."""

    id: str
    name: str
    role: str
    analyst: bool
    roles: list[str]
    joined: float


class SessionCreated(_Out):
    """A new session; ``token`` is the facilitator's key, shown this once."""

    session_id: str
    join_code: str
    token: str
    member: MemberOut
    session_page: str
    join_link: str
    facilitator_link: str
    state: dict[str, Any]


class JoinCodeFound(_Out):
    session_id: str
    title: str
    stage: str


class Joined(_Out):
    """A new member; ``token`` is their key, shown this once."""

    session_id: str
    token: str
    member: MemberOut
    session_page: str
    join_link: str


class SessionRead(_Out):
    member: MemberOut
    state: dict[str, Any]
    online: list[str]
    read_only: bool


class CommandApplied(_Out):
    """The change's event; ``replayed`` is true when its key had been applied before."""

    revision: int
    event: dict[str, Any]


class HistoryRead(_Out):
    events: list[dict[str, Any]]


class AnalysisRead(_Out):
    """What the diagram implies at ``revision``; ``problem`` says why there is no analysis."""

    revision: int | None = None
    analysis: dict[str, Any] | None = None
    problem: str | None = None


class Permission(BaseModel):
    roles: list[str]
    stages: list[str]
    facilitator_in: list[str]


class VocabularyRead(_Out):
    """The words and rules the page shows (app/sessions/vocabulary.py)."""

    stages: list[dict[str, Any]]
    stage_titles: dict[str, str]
    locked_stages: list[str]
    roles: dict[str, str]
    vote_choices: dict[str, str]
    proposal_kinds: dict[str, str]
    proposal_statuses: dict[str, str]
    permissions: dict[str, Permission]
    methods: list[dict[str, Any]]  # the estimator registry (app/estimation/methods.py)
