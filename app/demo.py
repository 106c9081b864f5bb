"""The demo session: the bike-lease diagram in the debating stage, with invented
members, their votes and reasons, open and settled disputes, and the invented
data attached and mapped for the estimation stage.

Everything is done through the application layer's own calls (create, join, submit, note),
as a room would do it, from two files in ``sample_data/``: the diagram
(``cycle_to_work.json``) and the debate (``cycle_to_work.session.json``). A
debate file has a ``facilitator`` and ``members`` (each with a short ``key``
used by the steps), and ``steps``: ``{"by": key, "command": {...}}``, where a
step may carry a ``label`` naming the proposal it makes, and a later
``"proposal"`` may give that label instead of the number. ``data`` names the
file to attach and the member shown attaching it.
"""

from __future__ import annotations

import json
import logging
from pathlib import Path
from typing import Any

from .sessions import Sessions
from .workshop.models import Member, Workshop

__all__ = ["DEBATE_FORMAT", "debate_path", "open_demo_session"]

log = logging.getLogger("arrowmoot")

DEBATE_FORMAT = "arrowmoot-demo-session"


def debate_path(document_path: Path) -> Path:
    """Where the debate file of a demo diagram lives: ``NAME.session.json`` beside ``NAME.json``."""
    return document_path.with_suffix(".session.json")


def _read_debate(path: Path) -> dict[str, Any]:
    debate = json.loads(path.read_text(encoding="utf-8"))
    if not isinstance(debate, dict) or debate.get("format") != DEBATE_FORMAT:
        raise ValueError(f"{path.name} is not a demo debate file (format {DEBATE_FORMAT!r})")
    return debate


def _resolved(command: dict[str, Any], labels: dict[str, int]) -> dict[str, Any]:
    proposal = command.get("proposal")
    if isinstance(proposal, str):
        if proposal not in labels:
            raise ValueError(f"a step votes on or settles proposal {proposal!r}, which no earlier step made")
        return {**command, "proposal": labels[proposal]}
    return command


async def open_demo_session(sessions: Sessions, document_path: Path) -> tuple[Workshop, str]:
    """Create the demo session and return it with the facilitator's key (shown once).

    Without a debate file beside the diagram, the session stays in drafting with
    the diagram only. Should a step be refused or the data be unusable, the
    session is kept as far as it got and a warning names the step.
    """
    document = json.loads(document_path.read_text(encoding="utf-8"))
    path = debate_path(document_path)
    debate = _read_debate(path) if path.is_file() else {}
    facilitator = debate.get("facilitator", {"key": "facilitator", "name": "Facilitator"})
    w, token = sessions.create(title=debate.get("title", "Demo session (invented data)"),
                               facilitator_name=facilitator["name"], document=document)
    members = {facilitator["key"]: next(m for m in w.members.values() if m.is_facilitator)}
    try:
        await _replay(sessions, w, debate, members, path)
    except Exception as exc:  # the diagram alone is still a usable demo
        log.warning("demo session only partly built: %s", exc)
    return sessions.workshop(w.id), token


async def _replay(sessions: Sessions, w: Workshop, debate: dict[str, Any], members: dict[str, Member],
                  path: Path) -> None:
    chair = next(iter(members.values()))
    for entry in debate.get("members", []):
        _, member, _ = await sessions.join(w.join_code, entry["name"])
        members[entry["key"]] = member
        if entry.get("analyst"):
            await sessions.submit(w.id, chair, {"type": "grant_role", "member": member.id, "role": "analyst"})
    labels: dict[str, int] = {}
    for number, step in enumerate(debate.get("steps", []), start=1):
        try:
            event = await sessions.submit(w.id, members[step["by"]], _resolved(step["command"], labels))
        except Exception as exc:
            raise ValueError(f"step {number} of {path.name} was refused: {exc}") from exc
        if "label" in step:
            labels[step["label"]] = event["proposal"]
    data = debate.get("data")
    if data:
        variables = [v["name"] for v in sessions.workshop(w.id).variables]
        info = sessions.attach_data(w.id, path.parent / data["file"], variables=variables)
        await sessions.note(w.id, members.get(data.get("by"), chair),
                       f"attached the demo's invented data {info['name']} ({info['rows']:,} rows); "
                       f"{len(info['mapping'])} variables mapped to the columns of the same name; "
                       "estimates wait until the diagram is agreed", kind="estimation")
