"""The log event: one record per change, built by :func:`new_event` only.

An event is kept as a plain JSON object (it is stored in SQLite, pushed to
every page and written into the record bundle), so its type is a TypedDict:
the keys every event has, and the optional ones some kinds add. ``before``
(the undo snapshot) never leaves the server; :func:`public_event` drops it.
"""

from __future__ import annotations

from typing import Any, TypedDict

from .models import Member

__all__ = ["Event", "new_event", "public_event", "SERVER_NAME"]

SERVER_NAME = "the server"


class _EventBase(TypedDict):
    revision: int
    at: float
    actor: str | None
    actor_name: str
    kind: str
    summary: str
    command: dict[str, Any]
    undoable: bool
    undone: bool


class Event(_EventBase, total=False):
    before: dict[str, Any]    # what undo restores (undoable events only)
    key: str                  # "<member id>:<idempotency key>" of a keyed command
    undoes: int               # the revision an undo reverted
    proposal: int             # the proposal a proposal event is about
    reason: str               # a stage move's written reason
    stage_from: str
    stage_to: str
    replayed: bool            # on an answer only: the keyed command was applied before


def new_event(*, revision: int, at: float, actor: Member | None, kind: str, summary: str,
              command: dict[str, Any] | None = None, undoable: bool = False,
              **extra: Any) -> Event:
    """One log event; ``actor`` None means the server itself made the change."""
    event: dict[str, Any] = {
        "revision": revision, "at": at, "actor": actor.id if actor else None,
        "actor_name": actor.name if actor else SERVER_NAME, "kind": kind, "summary": summary,
        "command": command if command is not None else {"type": kind},
        "undoable": undoable, "undone": False,
    }
    event.update(extra)
    return event  # type: ignore[return-value]


def public_event(event: dict[str, Any]) -> dict[str, Any]:
    """An event as the history view shows it (without the undo snapshot)."""
    return {k: v for k, v in event.items() if k != "before"}
