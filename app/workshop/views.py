"""What participants see: the public state of a workshop (no tokens, no undo snapshots)."""

from __future__ import annotations

from typing import Any

from .commands import public_event
from .models import Workshop, arrow_key
from .stages import STAGE_TITLES, STAGES
from .voting import disputed_items, proposal_public, tally, votes_public

__all__ = ["public_state", "history", "arrow_public", "arrow_patch"]

RECENT_EVENTS = 30


def public_state(w: Workshop, *, compact: bool = False) -> dict[str, Any]:
    """The state every member sees.

    ``compact`` (used for live pushes) leaves out the recent log and lists only
    arrows that carry votes or a mark; the page fills in the rest from the
    document (``"arrows_compact": true`` says so).
    """
    arrows = []
    for a, b in w.arrows:
        note = arrow_public(w, a, b, compact=compact)
        if note is not None:
            arrows.append(note)
    disputes = disputed_items(w)
    out = {
        "session": {"id": w.id, "title": w.title, "join_code": w.join_code,
                    "created": w.created, "stage": w.stage,
                    "stage_title": STAGE_TITLES[w.stage], "stages": list(STAGES)},
        "revision": w.revision,
        "document": w.document(),
        "arrows": arrows,
        "arrows_compact": compact,
        "members": [m.to_public() for m in w.members.values()],
        "proposals": [proposal_public(w, p) for p in sorted(w.proposals.values(), key=lambda p: p.id)],
        "disputed": disputes,
        "can_undo": any(e.get("undoable") and not e.get("undone") and e.get("before")
                        for e in w.log),
    }
    if not compact:
        out["recent"] = [public_event(e) for e in w.log[-RECENT_EVENTS:]]
    return out


def arrow_public(w: Workshop, a: str, b: str, *, compact: bool = False) -> dict[str, Any] | None:
    """One arrow with its mark and votes (None when ``compact`` and it has neither)."""
    key = arrow_key(a, b)
    subject = f"arrow:{key}"
    flag = w.arrow_flags.get(key)
    votes = w.votes.get(subject)
    if compact and not flag and not votes:
        return None
    return {"from": a, "to": b, "flag": flag, "tally": tally(votes),
            "votes": votes_public(w, subject)}


def arrow_patch(w: Workshop, event: dict[str, Any]) -> dict[str, Any] | None:
    """For a drawn, removed or reversed arrow: just what changed, for a live push."""
    kind = event.get("kind")
    if kind not in ("add_arrow", "delete_arrow", "reverse_arrow"):
        return None
    a, b = event["command"]["from"], event["command"]["to"]
    added = {"add_arrow": [[a, b]], "delete_arrow": [], "reverse_arrow": [[b, a]]}[kind]
    removed = {"add_arrow": [], "delete_arrow": [[a, b]], "reverse_arrow": [[a, b]]}[kind]
    notes = [n for n in (arrow_public(w, x, y, compact=True) for x, y in added) if n]
    return {"arrows_added": added, "arrows_removed": removed, "arrow_notes": notes,
            "disputed": disputed_items(w),
            "can_undo": any(e.get("undoable") and not e.get("undone") and e.get("before")
                            for e in w.log)}


def history(w: Workshop) -> list[dict[str, Any]]:
    return [public_event(e) for e in w.log]
