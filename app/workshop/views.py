"""What participants see: the public state of a workshop (no tokens, no undo snapshots)."""

from __future__ import annotations

import json
from typing import Any

from .commands import public_event
from .hidden_causes import statements_public
from .models import Workshop, arrow_key
from .stages import STAGE_TITLES, STAGES
from .voting import disputed_items, proposal_public, tally, votes_public

__all__ = ["public_state", "history", "arrow_public", "change_patch", "can_undo"]

RECENT_EVENTS = 30


def absent_marks_public(w: Workshop) -> list[dict[str, Any]]:
    """Left-out arrows the room considered and keeps out (between variables still drawn)."""
    names = {v["name"] for v in w.variables}
    out = []
    for key, mark in sorted(w.absent_marks.items()):
        source, target = json.loads(key)
        if source in names and target in names:
            out.append({"from": source, "to": target, **mark})
    return out


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
        "can_undo": can_undo(w),
        "hidden_causes": statements_public(w),
        "absent_marks": absent_marks_public(w),
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


def can_undo(w: Workshop) -> bool:
    """Whether the facilitator has a change to undo (the newest ones are checked first)."""
    return any(e.get("undoable") and not e.get("undone") and e.get("before")
               for e in reversed(w.log))


# A change's patch says what it did to ``public_state``: the parts named below, each
# equal to the same part of the full state after the change.
#   moves            [{"name", "x", "y"}]        new positions
#   variables_added  [variable]                  appended to document.variables
#   arrows_removed   [[from, to]]                gone from document.arrows and arrows
#   arrows_added     [[from, to]]                appended, or in the place of its reverse
#                                                when that was removed in the same patch
#   arrow_notes      [arrow_public]              replace the arrow's entry in arrows
#   proposals        [proposal_public]           replace by id, or insert in id order
#   disputed, can_undo                           replace (absent: unchanged)
def change_patch(w: Workshop, event: dict[str, Any]) -> dict[str, Any] | None:
    """For a frequent change, just what it changed in the public state, for a live push.

    None when the change is not one of these (stages, undo, renames, roles ...) or
    the workshop has moved on since the event: the caller then sends the full state.
    """
    if event.get("revision") != w.revision:
        return None
    builder = _PATCHERS.get(event.get("kind"))
    return builder(w, event["command"], event) if builder else None


def _move_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    var = w.variable(command.get("name"))
    if var is None:
        return None
    return {"moves": [{"name": var["name"], "x": var["x"], "y": var["y"]}]}


def _variable_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    if not w.variables or w.variables[-1]["name"] != command.get("name"):
        return None
    # A proposal naming a variable that an undo took away counts again once it is back.
    return {"variables_added": [dict(w.variables[-1])], "disputed": disputed_items(w),
            "can_undo": can_undo(w)}


def _arrow_change(kind: str, a: str, b: str) -> tuple[list, list]:
    """(added, removed) arrows for adding, removing or reversing a -> b."""
    return {"add": ([[a, b]], []), "remove": ([], [[a, b]]), "reverse": ([[b, a]], [[a, b]])}[kind]


def _arrow_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    kind = {"add_arrow": "add", "delete_arrow": "remove", "reverse_arrow": "reverse"}[event["kind"]]
    added, removed = _arrow_change(kind, command["from"], command["to"])
    return _with_arrows(w, added, removed, {})


def _with_arrows(w: Workshop, added: list, removed: list, patch: dict) -> dict[str, Any] | None:
    drawn = set(w.arrows)
    if any((x, y) not in drawn for x, y in added) or any((x, y) in drawn for x, y in removed):
        return None  # not what this change should have left: send the full state
    notes = [arrow_public(w, x, y) for x, y in added]
    return {"arrows_added": added, "arrows_removed": removed, "arrow_notes": notes, **patch,
            "disputed": disputed_items(w), "can_undo": can_undo(w)}


def _vote_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    if "proposal" in command:
        p = w.proposals.get(command["proposal"])
        if p is None:
            return None
        # Votes on a proposal change its tally only: what is disputed depends on the
        # proposal's status, never on its votes.
        return {"proposals": [proposal_public(w, p)]}
    a, b = command["from"], command["to"]
    # A vote can be withdrawn from an arrow no longer drawn; nothing shown changes then.
    notes = [arrow_public(w, a, b)] if w.has_arrow(a, b) else []
    return {"arrow_notes": notes, "disputed": disputed_items(w)}


def _proposal_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    p = w.proposals.get(event.get("proposal"))
    if p is None:
        return None
    patch = {"proposals": [proposal_public(w, p)]}
    if event["kind"] == "settle" and p.status == "accepted":
        added, removed = _arrow_change(p.kind, p.source, p.target)
        return _with_arrows(w, added, removed, patch)
    return {**patch, "disputed": disputed_items(w), "can_undo": can_undo(w)}


def _flag_patch(w: Workshop, command: dict, event: dict) -> dict[str, Any] | None:
    a, b = command["from"], command["to"]
    if not w.has_arrow(a, b):
        return None
    return {"arrow_notes": [arrow_public(w, a, b)], "disputed": disputed_items(w),
            "can_undo": can_undo(w)}


_PATCHERS = {
    "move_variable": _move_patch,
    "add_variable": _variable_patch,
    "add_arrow": _arrow_patch, "delete_arrow": _arrow_patch, "reverse_arrow": _arrow_patch,
    "vote": _vote_patch, "withdraw_vote": _vote_patch,
    "propose": _proposal_patch, "settle": _proposal_patch, "withdraw_proposal": _proposal_patch,
    "flag_arrow": _flag_patch,
}


def history(w: Workshop) -> list[dict[str, Any]]:
    return [public_event(e) for e in w.log]
