"""The workshop's state: members, the shared diagram, proposals, votes and the log.

Plain dataclasses with ``to_state`` / ``from_state`` (JSON-ready dicts) so the
store can keep a session as one JSON value. No I/O happens here.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from enum import StrEnum
from typing import Any

from ..graph.document import Diagram, parse_document

__all__ = [
    "Word", "Role", "VoteChoice", "ProposalKind", "ProposalStatus", "ArrowFlag",
    "ROLES", "VOTE_CHOICES", "PROPOSAL_KINDS", "PROPOSAL_STATUSES", "PENDING_STATUSES",
    "ROLE_LABELS", "VOTE_LABELS", "PROPOSAL_KIND_LABELS", "PROPOSAL_STATUS_LABELS",
    "Member", "Proposal", "Vote", "Workshop", "arrow_key", "parse_arrow_key",
]


class Word(StrEnum):
    """A word of the workshop's vocabulary: stored and sent as its text, which it equals."""

    @classmethod
    def _missing_(cls, value: object):
        raise ValueError(f"{value!r} is not one of {', '.join(cls)}")


class Role(Word):
    FACILITATOR = "facilitator"
    PARTICIPANT = "participant"
    READER = "reader"      # a session reopened read-only from a record: may look, never change
    ANALYST = "analyst"    # granted on top of participant (``Member.analyst``); never a member's role


class VoteChoice(Word):
    AGREE = "agree"
    DISAGREE = "disagree"
    UNSURE = "unsure"


class ProposalKind(Word):
    ADD = "add"
    REMOVE = "remove"
    REVERSE = "reverse"


class ProposalStatus(Word):
    OPEN = "open"
    ACCEPTED = "accepted"
    REJECTED = "rejected"
    DISPUTED = "disputed"
    WITHDRAWN = "withdrawn"


class ArrowFlag(Word):
    DISPUTED = "disputed"
    SETTLED = "settled"


ROLES = (Role.FACILITATOR, Role.PARTICIPANT, Role.READER)  # what a member's ``role`` may be
VOTE_CHOICES = tuple(VoteChoice)
PROPOSAL_KINDS = tuple(ProposalKind)
PROPOSAL_STATUSES = tuple(ProposalStatus)
PENDING_STATUSES = frozenset({ProposalStatus.OPEN, ProposalStatus.DISPUTED})  # not yet decided
ARROW_FLAGS = tuple(ArrowFlag)

ROLE_LABELS = {Role.FACILITATOR: "Facilitator", Role.PARTICIPANT: "Participant",
               Role.READER: "Reader", Role.ANALYST: "Analyst"}
VOTE_LABELS = {VoteChoice.AGREE: "Agree", VoteChoice.DISAGREE: "Disagree", VoteChoice.UNSURE: "Unsure"}
PROPOSAL_KIND_LABELS = {ProposalKind.ADD: "add", ProposalKind.REMOVE: "remove",
                        ProposalKind.REVERSE: "reverse"}
PROPOSAL_STATUS_LABELS = {ProposalStatus.OPEN: "open", ProposalStatus.ACCEPTED: "accepted",
                          ProposalStatus.REJECTED: "rejected", ProposalStatus.DISPUTED: "disputed",
                          ProposalStatus.WITHDRAWN: "withdrawn"}


def arrow_key(source: str, target: str) -> str:
    """A stable text key for an arrow (names may hold any punctuation)."""
    return json.dumps([source, target], ensure_ascii=False)


def parse_arrow_key(key: str) -> tuple[str, str]:
    source, target = json.loads(key)
    return source, target


@dataclass
class Member:
    id: str
    name: str
    role: Role = Role.PARTICIPANT
    analyst: bool = False
    joined: float = 0.0

    def __post_init__(self) -> None:
        self.role = Role(self.role)

    @property
    def is_facilitator(self) -> bool:
        return self.role == Role.FACILITATOR

    @property
    def is_reader(self) -> bool:
        return self.role == Role.READER

    def has_role(self, role: str) -> bool:
        if role == Role.FACILITATOR:
            return self.is_facilitator
        if role == Role.ANALYST:
            return self.analyst or self.is_facilitator
        if role == Role.PARTICIPANT:
            return not self.is_reader
        if role == Role.READER:
            return True
        return False

    def to_public(self) -> dict[str, Any]:
        roles = [self.role] + (["analyst"] if self.analyst else [])
        return {"id": self.id, "name": self.name, "role": self.role, "analyst": self.analyst,
                "roles": roles, "joined": self.joined}


@dataclass
class Vote:
    choice: VoteChoice
    reason: str = ""
    at: float = 0.0

    def __post_init__(self) -> None:
        self.choice = VoteChoice(self.choice)


@dataclass
class Proposal:
    id: int
    kind: ProposalKind
    source: str
    target: str
    by: str
    reason: str = ""
    status: ProposalStatus = ProposalStatus.OPEN
    created: float = 0.0
    settled_by: str | None = None
    settled_at: float | None = None

    def __post_init__(self) -> None:
        self.kind = ProposalKind(self.kind)
        self.status = ProposalStatus(self.status)

    @property
    def subject(self) -> str:
        return f"proposal:{self.id}"

    @property
    def is_pending(self) -> bool:
        """Open or left disputed: the room has not decided it."""
        return self.status in PENDING_STATUSES

    def describe(self) -> str:
        return f"{PROPOSAL_KIND_LABELS[self.kind]} {self.source} → {self.target}"


@dataclass
class Workshop:
    id: str
    title: str
    join_code: str
    created: float = 0.0
    stage: str = "drafting"  # a Stage (app/workshop/stages.py)
    revision: int = 0
    variables: list[dict[str, Any]] = field(default_factory=list)
    arrows: list[tuple[str, str]] = field(default_factory=list)
    treatment: list[str] = field(default_factory=list)
    outcome: list[str] = field(default_factory=list)
    members: dict[str, Member] = field(default_factory=dict)
    proposals: dict[int, Proposal] = field(default_factory=dict)
    next_proposal: int = 1
    votes: dict[str, dict[str, Vote]] = field(default_factory=dict)
    arrow_flags: dict[str, str] = field(default_factory=dict)
    # left-out arrows the room considered and keeps out: arrow key -> {by, by_name, at, reason}
    absent_marks: dict[str, dict] = field(default_factory=dict)
    hidden_causes: dict[str, dict[str, Any]] = field(default_factory=dict)  # member id -> statement
    join_role: Role = Role.PARTICIPANT  # the role of whoever joins (reader in a read-only session)
    log: list[dict[str, Any]] = field(default_factory=list)

    # -- lookups --------------------------------------------------------------
    def variable(self, name: str) -> dict[str, Any] | None:
        for v in self.variables:
            if v["name"] == name:
                return v
        return None

    def has_arrow(self, source: str, target: str) -> bool:
        return (source, target) in self.arrows

    def facilitators(self) -> list[Member]:
        return [m for m in self.members.values() if m.is_facilitator]

    def member_name(self, member_id: str | None) -> str:
        if member_id is None:
            return "the server"
        m = self.members.get(member_id)
        return m.name if m else "a former member"

    def document(self, *, variables=None, arrows=None, treatment=None, outcome=None) -> dict:
        return {
            "format": "arrowmoot-graph",
            "version": 1,
            "variables": [dict(v) for v in (self.variables if variables is None else variables)],
            "arrows": [{"from": a, "to": b} for a, b in (self.arrows if arrows is None else arrows)],
            "treatment": list(self.treatment if treatment is None else treatment),
            "outcome": list(self.outcome if outcome is None else outcome),
        }

    def diagram(self) -> Diagram:
        return parse_document(self.document())

    def structure(self) -> dict[str, Any]:
        """What undo restores: the diagram, the question and proposal outcomes."""
        return {
            "variables": [dict(v) for v in self.variables],
            "arrows": [list(a) for a in self.arrows],
            "treatment": list(self.treatment),
            "outcome": list(self.outcome),
            "proposals": {str(p.id): [p.status, p.settled_by, p.settled_at, p.source, p.target]
                          for p in self.proposals.values()},
            "arrow_flags": dict(self.arrow_flags),
            "absent_marks": {k: dict(v) for k, v in self.absent_marks.items()},
        }

    # -- serialisation --------------------------------------------------------
    def to_state(self) -> dict[str, Any]:
        # Members, proposals and votes hold only plain values, so a copy of their field
        # dict equals dataclasses.asdict at a fraction of the cost (this runs on every edit).
        return {
            "id": self.id, "title": self.title, "join_code": self.join_code,
            "created": self.created, "stage": self.stage, "revision": self.revision,
            "variables": [dict(v) for v in self.variables],
            "arrows": [list(a) for a in self.arrows],
            "treatment": list(self.treatment), "outcome": list(self.outcome),
            "members": [dict(vars(m)) for m in self.members.values()],
            "proposals": [dict(vars(p)) for p in self.proposals.values()],
            "next_proposal": self.next_proposal,
            "votes": {subject: {mid: dict(vars(v)) for mid, v in by.items()}
                      for subject, by in self.votes.items()},
            "arrow_flags": dict(self.arrow_flags),
            "absent_marks": {k: dict(v) for k, v in self.absent_marks.items()},
            "hidden_causes": {mid: dict(s) for mid, s in self.hidden_causes.items()},
            "join_role": self.join_role,
        }

    @classmethod
    def from_state(cls, state: dict[str, Any], log: list[dict] | None = None) -> "Workshop":
        return cls(
            id=state["id"], title=state["title"], join_code=state["join_code"],
            created=state.get("created", 0.0), stage=state.get("stage", "drafting"),
            revision=state.get("revision", 0),
            variables=[dict(v) for v in state.get("variables", [])],
            arrows=[(a, b) for a, b in state.get("arrows", [])],
            treatment=list(state.get("treatment", [])), outcome=list(state.get("outcome", [])),
            members={m["id"]: Member(**m) for m in state.get("members", [])},
            proposals={p["id"]: Proposal(**p) for p in state.get("proposals", [])},
            next_proposal=state.get("next_proposal", 1),
            votes={subject: {mid: Vote(**v) for mid, v in by.items()}
                   for subject, by in state.get("votes", {}).items()},
            arrow_flags=dict(state.get("arrow_flags", {})),
            absent_marks={k: dict(v) for k, v in (state.get("absent_marks") or {}).items()},
            hidden_causes={str(mid): dict(s) for mid, s in (state.get("hidden_causes") or {}).items()},
            join_role=Role(state.get("join_role", Role.PARTICIPANT)),
            log=list(log or []),
        )
