"""The workshop's state: members, the shared diagram, proposals, votes and the log.

Plain dataclasses with ``to_state`` / ``from_state`` (JSON-ready dicts) so the
store can keep a session as one JSON value. No I/O happens here.
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from typing import Any

from ..graph.document import Diagram, parse_document

__all__ = [
    "ROLES", "VOTE_CHOICES", "PROPOSAL_KINDS", "PROPOSAL_STATUSES",
    "Member", "Proposal", "Vote", "Workshop", "arrow_key", "parse_arrow_key",
]

ROLES = ("facilitator", "participant")
VOTE_CHOICES = ("agree", "disagree", "unsure")
PROPOSAL_KINDS = ("add", "remove", "reverse")
PROPOSAL_STATUSES = ("open", "accepted", "rejected", "disputed", "withdrawn")
ARROW_FLAGS = ("disputed", "settled")


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
    role: str = "participant"
    analyst: bool = False
    joined: float = 0.0

    @property
    def is_facilitator(self) -> bool:
        return self.role == "facilitator"

    def has_role(self, role: str) -> bool:
        if role == "facilitator":
            return self.is_facilitator
        if role == "analyst":
            return self.analyst or self.is_facilitator
        if role == "participant":
            return True
        return False

    def to_public(self) -> dict[str, Any]:
        roles = [self.role] + (["analyst"] if self.analyst else [])
        return {"id": self.id, "name": self.name, "role": self.role, "analyst": self.analyst,
                "roles": roles, "joined": self.joined}


@dataclass
class Vote:
    choice: str
    reason: str = ""
    at: float = 0.0


@dataclass
class Proposal:
    id: int
    kind: str
    source: str
    target: str
    by: str
    reason: str = ""
    status: str = "open"
    created: float = 0.0
    settled_by: str | None = None
    settled_at: float | None = None

    @property
    def subject(self) -> str:
        return f"proposal:{self.id}"

    def describe(self) -> str:
        verb = {"add": "add", "remove": "remove", "reverse": "reverse"}[self.kind]
        return f"{verb} {self.source} → {self.target}"


@dataclass
class Workshop:
    id: str
    title: str
    join_code: str
    created: float = 0.0
    stage: str = "drafting"
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
    hidden_causes: dict[str, dict[str, Any]] = field(default_factory=dict)  # member id -> statement
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
            "hidden_causes": {mid: dict(s) for mid, s in self.hidden_causes.items()},
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
            hidden_causes={str(mid): dict(s) for mid, s in (state.get("hidden_causes") or {}).items()},
            log=list(log or []),
        )
