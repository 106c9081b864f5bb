"""Every change to a workshop goes through :func:`apply_command`.

A command is a small JSON object with a ``type`` (``add_variable``,
``add_arrow``, ``propose``, ``vote``, ``settle``, ``set_stage``, ``undo`` ...).
The function checks the member's permission and the stage, validates the
result (a cycle is refused with the cycle named), then changes the workshop
and returns the log event. Nothing is changed when it raises.
"""

from __future__ import annotations

import unicodedata
from typing import Any, Callable

from ..errors import BadRequest, Conflict, Forbidden, InvalidDiagram, NotFound
from ..graph.document import check_name, parse_document
from ..graph.errors import DiagramError
from ..graph import layout
from .events import Event, new_event, public_event
from .models import (
    PROPOSAL_KINDS, VOTE_CHOICES, Member, Proposal, ProposalStatus, Role, Vote, Workshop, arrow_key,
)
from .rules import check as check_rule
from .stages import STAGES, check_stage_move
from .voting import MAX_VOTE_REASON

__all__ = ["apply_command", "new_workshop", "add_member", "COMMAND_TYPES", "public_event"]

MAX_TITLE = 120
MAX_MEMBER_NAME = 40
MAX_PROPOSAL_REASON = 200


# -- small helpers ----------------------------------------------------------
def _text(command: dict, key: str, *, limit: int, required: bool = False, what: str | None = None) -> str:
    value = command.get(key)
    what = what or key
    if value is None:
        if required:
            raise BadRequest(f"'{key}' is missing", code="missing_field")
        return ""
    if not isinstance(value, str):
        raise BadRequest(f"'{key}' must be text", code="invalid_field")
    value = value.strip()
    if required and not value:
        raise BadRequest(f"{what} is empty", code="missing_field")
    if len(value) > limit:
        raise BadRequest(f"{what} is {len(value)} characters long; the limit is {limit}",
                         code="too_long")
    # Control and invisible format characters (a right-to-left override, a zero-width
    # space, a line separator) would let one name pass for another on screen.
    if any(ord(ch) < 32 or unicodedata.category(ch) in ("Cc", "Cf", "Zl", "Zp") for ch in value):
        raise BadRequest(f"{what} holds a control character", code="invalid_field")
    return value


def _name(command: dict, key: str = "name") -> str:
    value = command.get(key)
    if value is None:
        raise BadRequest(f"'{key}' is missing", code="missing_field")
    try:
        return check_name(value, what=f"'{key}'")
    except DiagramError as exc:
        raise InvalidDiagram(exc) from None


def _number(command: dict, key: str) -> float | None:
    value = command.get(key)
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)) or value != value \
            or abs(value) > 1e7:
        raise BadRequest(f"'{key}' must be a number", code="invalid_field")
    return float(value)


def _require_variable(workshop: Workshop, name: str) -> dict[str, Any]:
    v = workshop.variable(name)
    if v is None:
        raise NotFound(f"there is no variable {name!r}", code="unknown_variable")
    return v


def _validate(workshop: Workshop, **parts) -> None:
    try:
        parse_document(workshop.document(**parts))
    except DiagramError as exc:
        raise InvalidDiagram(exc) from None


def _arrow_ends(command: dict) -> tuple[str, str]:
    source = _name(command, "from")
    target = _name(command, "to")
    return source, target


class _Change:
    """The pieces of an event a handler fills in."""

    def __init__(self, summary: str, *, undoable: bool = False, **extra: Any):
        self.summary = summary
        self.undoable = undoable
        self.extra = extra


# -- graph edits --------------------------------------------------------------
def _add_variable(w: Workshop, m: Member, c: dict) -> _Change:
    name = _name(c)
    if w.variable(name) is not None:
        raise Conflict(f"there is already a variable {name!r}", code="duplicate_variable")
    var = {"name": name, "latent": bool(c.get("latent", False))}
    label = _text(c, "label", limit=200)
    if label:
        var["label"] = label
    description = c.get("description")
    if description:
        var["description"] = description
    x, y = _number(c, "x"), _number(c, "y")
    if x is None or y is None:
        x, y = layout.free_spot(w.variables)
    var["x"], var["y"] = x, y
    variables = w.variables + [var]
    _validate(w, variables=variables)
    w.variables = variables
    return _Change(f"added variable {name!r}", undoable=True)


def _update_variable(w: Workshop, m: Member, c: dict) -> _Change:
    name = _name(c)
    old = _require_variable(w, name)
    new = dict(old)
    changes = []
    if "label" in c:
        label = _text(c, "label", limit=200)
        if label:
            new["label"] = label
        else:
            new.pop("label", None)
        changes.append("label")
    if "description" in c:
        if c["description"] in (None, ""):
            new.pop("description", None)
        else:
            new["description"] = c["description"]
        changes.append("description")
    if "latent" in c:
        if not isinstance(c["latent"], bool):
            raise BadRequest("'latent' must be true or false", code="invalid_field")
        new["latent"] = c["latent"]
        changes.append("unmeasured" if c["latent"] else "measured")
    new_name = name
    if c.get("new_name") not in (None, name):
        new_name = _name(c, "new_name")
        if w.variable(new_name) is not None:
            raise Conflict(f"there is already a variable {new_name!r}", code="duplicate_variable")
        new["name"] = new_name
        changes.append(f"renamed to {new_name!r}")
    if not changes:
        raise BadRequest("nothing to change: give label, description, latent or new_name",
                         code="empty_change")
    variables = [new if v["name"] == name else v for v in w.variables]

    def rn(n: str) -> str:
        return new_name if n == name else n

    arrows = [(rn(a), rn(b)) for a, b in w.arrows]
    treatment = [rn(n) for n in w.treatment]
    outcome = [rn(n) for n in w.outcome]
    _validate(w, variables=variables, arrows=arrows, treatment=treatment, outcome=outcome)
    if new_name != name:
        for p in w.proposals.values():
            p.source, p.target = rn(p.source), rn(p.target)
        w.votes = {_rename_subject(s, name, new_name): v for s, v in w.votes.items()}
        w.arrow_flags = {_rename_key(k, name, new_name): f for k, f in w.arrow_flags.items()}
        w.absent_marks = {_rename_key(k, name, new_name): f for k, f in w.absent_marks.items()}
        for statement in w.hidden_causes.values():
            statement["variable"] = rn(statement["variable"])
    w.variables, w.arrows, w.treatment, w.outcome = variables, arrows, treatment, outcome
    what = ", ".join(changes)
    return _Change(f"changed variable {name!r}: {what}", undoable=True)


def _rename_key(key: str, old: str, new: str) -> str:
    from .models import parse_arrow_key
    a, b = parse_arrow_key(key)
    return arrow_key(new if a == old else a, new if b == old else b)


def _rename_subject(subject: str, old: str, new: str) -> str:
    if subject.startswith("arrow:"):
        return "arrow:" + _rename_key(subject[len("arrow:"):], old, new)
    return subject


def _move_variable(w: Workshop, m: Member, c: dict) -> _Change:
    name = _name(c)
    var = _require_variable(w, name)
    x, y = _number(c, "x"), _number(c, "y")
    if x is None or y is None:
        raise BadRequest("moving a variable needs both 'x' and 'y'", code="missing_field")
    var["x"], var["y"] = x, y
    return _Change(f"moved {name!r}")


def _delete_variable(w: Workshop, m: Member, c: dict) -> _Change:
    name = _name(c)
    _require_variable(w, name)
    removed = [(a, b) for a, b in w.arrows if name in (a, b)]
    w.variables = [v for v in w.variables if v["name"] != name]
    w.arrows = [a for a in w.arrows if a not in removed]
    w.treatment = [n for n in w.treatment if n != name]
    w.outcome = [n for n in w.outcome if n != name]
    for p in w.proposals.values():
        if p.is_pending and name in (p.source, p.target):
            p.status = ProposalStatus.WITHDRAWN
    extra = f" and its {len(removed)} arrow(s)" if removed else ""
    return _Change(f"deleted variable {name!r}{extra}", undoable=True)


def _add_arrow(w: Workshop, m: Member, c: dict) -> _Change:
    source, target = _arrow_ends(c)
    _require_variable(w, source)
    _require_variable(w, target)
    if w.has_arrow(source, target):
        raise Conflict(f"there is already an arrow {source} → {target}", code="duplicate_arrow")
    arrows = w.arrows + [(source, target)]
    _validate(w, arrows=arrows)
    w.arrows = arrows
    return _Change(f"drew arrow {source} → {target}", undoable=True)


def _delete_arrow(w: Workshop, m: Member, c: dict) -> _Change:
    source, target = _arrow_ends(c)
    if not w.has_arrow(source, target):
        raise NotFound(f"there is no arrow {source} → {target}", code="unknown_arrow")
    w.arrows = [a for a in w.arrows if a != (source, target)]
    return _Change(f"removed arrow {source} → {target}", undoable=True)


def _reverse_arrow(w: Workshop, m: Member, c: dict) -> _Change:
    source, target = _arrow_ends(c)
    if not w.has_arrow(source, target):
        raise NotFound(f"there is no arrow {source} → {target}", code="unknown_arrow")
    arrows = [(target, source) if a == (source, target) else a for a in w.arrows]
    _validate(w, arrows=arrows)
    w.arrows = arrows
    return _Change(f"reversed arrow {source} → {target} to {target} → {source}", undoable=True)


def _set_question(w: Workshop, m: Member, c: dict) -> _Change:
    parts = {}
    for part in ("treatment", "outcome"):
        raw = c.get(part, [])
        if isinstance(raw, str):
            raw = [raw] if raw else []
        if not isinstance(raw, list) or not all(isinstance(n, str) for n in raw):
            raise BadRequest(f"'{part}' must be a variable name or a list of names",
                             code="invalid_field")
        parts[part] = raw
    _validate(w, **parts)
    w.treatment, w.outcome = parts["treatment"], parts["outcome"]
    t = ", ".join(w.treatment) or "(none)"
    o = ", ".join(w.outcome) or "(none)"
    return _Change(f"set the question: effect of {t} on {o}", undoable=True)


def _tidy(w: Workshop, m: Member, c: dict) -> _Change:
    positions = layout.layered_positions([v["name"] for v in w.variables], w.arrows)
    for v in w.variables:
        v["x"], v["y"] = positions[v["name"]]
    return _Change("tidied the layout", undoable=True)


def _import_document(w: Workshop, m: Member, c: dict) -> _Change:
    doc = read_document(c.get("document"), c.get("text"), c.get("format"))
    variables = doc["variables"]
    if any(v.get("x") is None or v.get("y") is None for v in variables):
        positions = layout.layered_positions([v["name"] for v in variables],
                                             [(a["from"], a["to"]) for a in doc["arrows"]])
        for v in variables:
            v["x"], v["y"] = positions[v["name"]]
    w.variables = variables
    w.arrows = [(a["from"], a["to"]) for a in doc["arrows"]]
    w.treatment, w.outcome = doc["treatment"], doc["outcome"]
    for p in w.proposals.values():
        if p.status == "open":
            p.status = ProposalStatus.WITHDRAWN
    return _Change(f"imported a diagram with {len(variables)} variables and "
                   f"{len(w.arrows)} arrows", undoable=True)


# -- proposals, votes, disputes ---------------------------------------------------
def _propose(w: Workshop, m: Member, c: dict) -> _Change:
    kind = c.get("kind")
    if kind not in PROPOSAL_KINDS:
        raise BadRequest(f"'kind' must be one of {', '.join(PROPOSAL_KINDS)}", code="invalid_field")
    source, target = _arrow_ends(c)
    _require_variable(w, source)
    _require_variable(w, target)
    reason = _text(c, "reason", limit=MAX_PROPOSAL_REASON, what="the reason")
    if kind == "add":
        if w.has_arrow(source, target):
            raise Conflict(f"the arrow {source} → {target} is already drawn", code="duplicate_arrow")
        if source == target:
            raise BadRequest("an arrow needs two different variables", code="self_loop")
    elif not w.has_arrow(source, target):
        raise NotFound(f"there is no arrow {source} → {target} to {kind}", code="unknown_arrow")
    for p in w.proposals.values():
        if p.is_pending and (p.kind, p.source, p.target) == (kind, source, target):
            raise Conflict(f"proposal #{p.id} already proposes to {p.describe()}",
                           code="duplicate_proposal")
    p = Proposal(id=w.next_proposal, kind=kind, source=source, target=target, by=m.id,
                 reason=reason, created=c["_now"])
    w.proposals[p.id] = p
    w.next_proposal += 1
    return _Change(f"proposed #{p.id}: {p.describe()}", proposal=p.id)


def _proposal(w: Workshop, c: dict) -> Proposal:
    pid = c.get("proposal")
    if isinstance(pid, bool) or not isinstance(pid, int):
        raise BadRequest("'proposal' must be a proposal number", code="invalid_field")
    p = w.proposals.get(pid)
    if p is None:
        raise NotFound(f"there is no proposal #{pid}", code="unknown_proposal")
    return p


def _vote(w: Workshop, m: Member, c: dict) -> _Change:
    choice = c.get("choice")
    if choice not in VOTE_CHOICES:
        raise BadRequest(f"'choice' must be one of {', '.join(VOTE_CHOICES)}", code="invalid_field")
    reason = _text(c, "reason", limit=MAX_VOTE_REASON, what="the reason")
    if "proposal" in c:
        p = _proposal(w, c)
        if not p.is_pending:
            raise Conflict(f"proposal #{p.id} is {p.status}; votes are closed", code="voting_closed")
        subject, what = p.subject, f"proposal #{p.id}"
    else:
        source, target = _arrow_ends(c)
        if not w.has_arrow(source, target):
            raise NotFound(f"there is no arrow {source} → {target} to vote on", code="unknown_arrow")
        subject, what = f"arrow:{arrow_key(source, target)}", f"arrow {source} → {target}"
    w.votes.setdefault(subject, {})[m.id] = Vote(choice=choice, reason=reason, at=c["_now"])
    return _Change(f"voted {choice} on {what}" + (f": {reason}" if reason else ""))


def _withdraw_vote(w: Workshop, m: Member, c: dict) -> _Change:
    if "proposal" in c:
        p = _proposal(w, c)
        subject, what = p.subject, f"proposal #{p.id}"
    else:
        source, target = _arrow_ends(c)
        subject, what = f"arrow:{arrow_key(source, target)}", f"arrow {source} → {target}"
    if m.id not in w.votes.get(subject, {}):
        raise NotFound(f"you have no vote on {what}", code="no_vote")
    del w.votes[subject][m.id]
    return _Change(f"withdrew their vote on {what}")


def _settle(w: Workshop, m: Member, c: dict) -> _Change:
    p = _proposal(w, c)
    decision = c.get("decision")
    if decision not in ("accept", "reject", "dispute"):
        raise BadRequest("'decision' must be accept, reject or dispute", code="invalid_field")
    if not p.is_pending:
        raise Conflict(f"proposal #{p.id} is already {p.status}", code="already_settled")
    if decision == "accept":
        arrows = list(w.arrows)
        if p.kind == "add":
            if (p.source, p.target) in arrows:
                raise Conflict(f"the arrow {p.source} → {p.target} is already drawn",
                               code="duplicate_arrow")
            arrows.append((p.source, p.target))
        else:
            if (p.source, p.target) not in arrows:
                raise Conflict(f"the arrow {p.source} → {p.target} is no longer drawn",
                               code="unknown_arrow")
            if p.kind == "remove":
                arrows.remove((p.source, p.target))
            else:
                arrows = [(p.target, p.source) if a == (p.source, p.target) else a for a in arrows]
        _validate(w, arrows=arrows)
        w.arrows = arrows
        p.status = ProposalStatus.ACCEPTED
    else:
        p.status = "rejected" if decision == "reject" else "disputed"
    p.settled_by, p.settled_at = m.id, c["_now"]
    verb = {"accept": "accepted", "reject": "rejected", "dispute": "left disputed"}[decision]
    return _Change(f"{verb} proposal #{p.id}: {p.describe()}", undoable=True, proposal=p.id)


def _withdraw_proposal(w: Workshop, m: Member, c: dict) -> _Change:
    p = _proposal(w, c)
    if p.by != m.id and not m.is_facilitator:
        raise Forbidden("only the proposer or the facilitator can withdraw a proposal",
                        code="not_yours")
    if p.status != "open":
        raise Conflict(f"proposal #{p.id} is {p.status}, not open", code="already_settled")
    p.status = ProposalStatus.WITHDRAWN
    return _Change(f"withdrew proposal #{p.id}: {p.describe()}", undoable=True, proposal=p.id)


def _flag_arrow(w: Workshop, m: Member, c: dict) -> _Change:
    source, target = _arrow_ends(c)
    if not w.has_arrow(source, target):
        raise NotFound(f"there is no arrow {source} → {target}", code="unknown_arrow")
    flag = c.get("flag")
    if flag not in ("disputed", "settled", None):
        raise BadRequest("'flag' must be disputed, settled or null", code="invalid_field")
    key = arrow_key(source, target)
    if flag is None:
        w.arrow_flags.pop(key, None)
        text = "cleared the mark on"
    else:
        w.arrow_flags[key] = flag
        text = f"marked {flag}:"
    return _Change(f"{text} arrow {source} → {target}", undoable=True)


def _mark_absent(w: Workshop, m: Member, c: dict) -> _Change:
    """The room considered a left-out arrow and keeps it out (``considered`` false clears it)."""
    source, target = _arrow_ends(c)
    _require_variable(w, source)
    _require_variable(w, target)
    if w.has_arrow(source, target):
        raise Conflict(f"the arrow {source} → {target} is drawn, not left out", code="arrow_drawn")
    key = arrow_key(source, target)
    if c.get("considered", True) is False:
        if w.absent_marks.pop(key, None) is None:
            raise NotFound(f"{source} → {target} was not marked as considered", code="unknown_mark")
        return _Change(f"took back “considered, stays out” for {source} → {target}", undoable=True)
    reason = _text(c, "reason", limit=MAX_PROPOSAL_REASON, what="the reason")
    w.absent_marks[key] = {"by": m.id, "by_name": m.name, "at": c["_now"], "reason": reason}
    return _Change(f"considered {source} → {target} and keeps it out" + (f": {reason}" if reason else ""),
                   undoable=True)


def _state_hidden_cause(w: Workshop, m: Member, c: dict) -> _Change:
    """A member's strongest imaginable hidden common cause, compared with a measured variable;
    ``times`` null withdraws it."""
    from .hidden_causes import check_statement, strength_words

    if c.get("times") is None:
        if w.hidden_causes.pop(m.id, None) is None:
            raise NotFound("you have stated no hidden cause", code="no_statement")
        return _Change("withdrew their hidden-cause statement")
    try:
        variable, times = check_statement(w, _name(c, "variable"), c.get("times"))
    except ValueError as exc:
        raise BadRequest(str(exc), code="invalid_field") from None
    w.hidden_causes[m.id] = {"variable": variable, "times": times, "at": c.get("_now")}
    return _Change(f"stated that a hidden common cause could be {strength_words(times)} {variable}")


# -- facilitation -------------------------------------------------------------------
def _set_stage(w: Workshop, m: Member, c: dict) -> _Change:
    target = c.get("stage")
    if not isinstance(target, str):
        raise BadRequest(f"'stage' must be one of {', '.join(STAGES)}", code="invalid_field")
    open_count = sum(1 for p in w.proposals.values() if p.status == "open")
    reason = check_stage_move(w.stage, target, c.get("reason") if isinstance(c.get("reason"), str)
                              else None, open_proposals=open_count,
                              has_question=bool(w.treatment and w.outcome))
    old = w.stage
    w.stage = target
    text = f"moved the session from {old} to {target}"
    if reason:
        text += f" (reason: {reason})"
    return _Change(text, reason=reason, stage_from=old, stage_to=target)


def _grant_role(w: Workshop, m: Member, c: dict) -> _Change:
    target = w.members.get(c.get("member"))
    if target is None:
        raise NotFound("there is no such member in this session", code="unknown_member")
    if c.get("role") != "analyst":
        raise BadRequest("the role that can be granted is 'analyst'", code="invalid_field")
    granted = c.get("granted", True)
    if not isinstance(granted, bool):
        raise BadRequest("'granted' must be true or false", code="invalid_field")
    target.analyst = granted
    verb = "granted" if granted else "withdrew"
    return _Change(f"{verb} the analyst role {'to' if granted else 'from'} {target.name}")


def _rename_session(w: Workshop, m: Member, c: dict) -> _Change:
    title = _text(c, "title", limit=MAX_TITLE, required=True, what="the title")
    w.title = title
    return _Change(f"renamed the session to {title!r}")


def _undo(w: Workshop, m: Member, c: dict) -> _Change:
    target = next((e for e in reversed(w.log)
                   if e.get("undoable") and not e.get("undone") and e.get("before")), None)
    if target is None:
        raise Conflict("there is nothing to undo", code="nothing_to_undo")
    before = target["before"]
    positions = {v["name"]: (v.get("x"), v.get("y")) for v in w.variables}
    variables = []
    for v in before["variables"]:
        v = dict(v)
        if v["name"] in positions and target["kind"] != "tidy":
            v["x"], v["y"] = positions[v["name"]]
        variables.append(v)
    arrows = [tuple(a) for a in before["arrows"]]
    _validate(w, variables=variables, arrows=arrows, treatment=before["treatment"],
              outcome=before["outcome"])
    w.variables, w.arrows = variables, arrows
    w.treatment, w.outcome = list(before["treatment"]), list(before["outcome"])
    for pid, saved in before["proposals"].items():
        p = w.proposals.get(int(pid))
        if p is not None:
            p.status, p.settled_by, p.settled_at = saved[0], saved[1], saved[2]
            if len(saved) >= 5:
                p.source, p.target = saved[3], saved[4]
    w.arrow_flags = dict(before.get("arrow_flags", {}))
    w.absent_marks = {k: dict(v) for k, v in before.get("absent_marks", {}).items()}
    renamed = target["command"].get("new_name") if target["kind"] == "update_variable" else None
    if renamed and renamed != target["command"].get("name"):
        # votes on arrows follow the variable's name back
        old = target["command"]["name"]
        w.votes = {_rename_subject(s, renamed, old): v for s, v in w.votes.items()}
        for statement in w.hidden_causes.values():
            if statement["variable"] == renamed:
                statement["variable"] = old
    target["undone"] = True
    return _Change(f"undid #{target['revision']}: {target['actor_name']} {target['summary']}",
                   undoes=target["revision"])


HANDLERS: dict[str, Callable[[Workshop, Member, dict], _Change]] = {
    "add_variable": _add_variable,
    "update_variable": _update_variable,
    "move_variable": _move_variable,
    "delete_variable": _delete_variable,
    "add_arrow": _add_arrow,
    "delete_arrow": _delete_arrow,
    "reverse_arrow": _reverse_arrow,
    "set_question": _set_question,
    "tidy": _tidy,
    "import_document": _import_document,
    "propose": _propose,
    "withdraw_proposal": _withdraw_proposal,
    "vote": _vote,
    "withdraw_vote": _withdraw_vote,
    "settle": _settle,
    "flag_arrow": _flag_arrow,
    "mark_absent": _mark_absent,
    "state_hidden_cause": _state_hidden_cause,
    "set_stage": _set_stage,
    "grant_role": _grant_role,
    "rename_session": _rename_session,
    "undo": _undo,
}
COMMAND_TYPES = tuple(HANDLERS)


def apply_command(workshop: Workshop, member: Member, command: Any, *, now: float) -> Event:
    """Check and apply one command; return its log event. Raises AppError, changes nothing then."""
    if not isinstance(command, dict):
        raise BadRequest("a command must be a JSON object with a 'type'", code="invalid_command")
    kind = command.get("type")
    handler = HANDLERS.get(kind) if isinstance(kind, str) else None
    if handler is None:
        raise BadRequest(
            f"unknown command type {kind!r}; known types: {', '.join(COMMAND_TYPES)}",
            code="unknown_command",
        )
    check_rule(kind, member, workshop.stage)
    before = workshop.structure()
    # Handlers validate before they change anything, but a snapshot makes
    # "nothing changes on error" hold even for a bug in a handler.
    # to_state() builds fresh lists and dicts down to the plain values, and no handler
    # changes a value inside a variable in place, so it needs no deep copy (which cost
    # more than anything else on each edit under load).
    backup = workshop.to_state()
    backup_log_flags = [e.get("undone") for e in workshop.log]
    work = dict(command)
    work["_now"] = now
    try:
        change = handler(workshop, member, work)
    except Exception:  # a refusal or a bug alike: put everything back, then let it through
        _restore(workshop, backup, backup_log_flags)
        raise
    workshop.revision += 1
    clean = {k: v for k, v in command.items() if k not in ("document", "text")}
    extra = dict(change.extra, before=before) if change.undoable else change.extra
    event = new_event(revision=workshop.revision, at=now, actor=member, kind=kind,
                      summary=change.summary, command=clean, undoable=change.undoable, **extra)
    workshop.log.append(event)
    return event


def _restore(workshop: Workshop, state: dict, log_flags: list) -> None:
    fresh = Workshop.from_state(state, workshop.log)
    for name in ("title", "stage", "revision", "variables", "arrows", "treatment", "outcome",
                 "members", "proposals", "next_proposal", "votes", "arrow_flags", "absent_marks",
                 "hidden_causes"):
        setattr(workshop, name, getattr(fresh, name))
    for event, flag in zip(workshop.log, log_flags):
        event["undone"] = flag


IMPORT_FORMATS = ("json", "graphml", "dot")


def read_document(document: Any = None, text: Any = None, fmt: Any = None) -> dict[str, Any]:
    """A validated graph document from our JSON document, or from GraphML or DOT text."""
    try:
        if text is None:
            return parse_document(document).to_document()
        if not isinstance(text, str):
            raise BadRequest("'text' must be the file's text", code="invalid_field")
        if fmt not in IMPORT_FORMATS:
            raise BadRequest(f"'format' must be one of {', '.join(IMPORT_FORMATS)}",
                             code="invalid_field")
        if fmt == "json":
            import json
            try:
                return parse_document(json.loads(text)).to_document()
            except json.JSONDecodeError as exc:
                raise BadRequest(f"the file is not JSON: {exc.msg} (line {exc.lineno})",
                                 code="malformed_document") from None
        from ..graph.formats import from_dot, from_graphml
        return (from_graphml if fmt == "graphml" else from_dot)(text).to_document()
    except DiagramError as exc:
        raise InvalidDiagram(exc) from None


def new_workshop(*, session_id: str, title: str, join_code: str, facilitator_id: str,
                 facilitator_name: str, document: Any = None, treatment: Any = None,
                 outcome: Any = None, now: float) -> tuple[Workshop, Event]:
    """A new session with its facilitator; the question may create missing variables."""
    title = _text({"title": title}, "title", limit=MAX_TITLE, required=True, what="the title")
    name = _text({"name": facilitator_name}, "name", limit=MAX_MEMBER_NAME, what="your name") \
        or "Facilitator"
    w = Workshop(id=session_id, title=title, join_code=join_code, created=now)
    fac = Member(id=facilitator_id, name=name, role=Role.FACILITATOR, joined=now)
    w.members[fac.id] = fac
    if document is not None:
        doc = document if isinstance(document, dict) and document.get("_validated") else read_document(document)
        doc = {k: v for k, v in doc.items() if k != "_validated"}
        w.variables = doc["variables"]
        w.arrows = [(a["from"], a["to"]) for a in doc["arrows"]]
        w.treatment, w.outcome = doc["treatment"], doc["outcome"]
        if any(v.get("x") is None or v.get("y") is None for v in w.variables):
            positions = layout.layered_positions([v["name"] for v in w.variables], w.arrows)
            for v in w.variables:
                v["x"], v["y"] = positions[v["name"]]
    for part, raw in (("treatment", treatment), ("outcome", outcome)):
        if raw in (None, "", []):
            continue
        names = [raw] if isinstance(raw, str) else raw
        if not isinstance(names, list):
            raise BadRequest(f"'{part}' must be a variable name or a list of names",
                             code="invalid_field")
        for i, n in enumerate(names):
            n = _name({part: n}, part)
            if w.variable(n) is None:
                if document is None:
                    # A fresh diagram: treatment on the left, outcome on the right, room between.
                    x, y = (160.0 if part == "treatment" else 660.0), 300.0 + 110.0 * i
                else:
                    x, y = layout.free_spot(w.variables)
                w.variables.append({"name": n, "latent": False, "x": x, "y": y})
        setattr(w, part, list(names))
    _validate(w)
    event = new_event(revision=0, at=now, actor=fac, kind="create",
                      summary=f"opened the session {title!r}")
    w.log.append(event)
    return w, event


def add_member(workshop: Workshop, *, member_id: str, name: Any, now: float) -> tuple[Member, Event]:
    """A new member in the session's joining role (a participant, or a reader when read-only)."""
    name = _text({"name": name}, "name", limit=MAX_MEMBER_NAME, required=True, what="your name")
    member = Member(id=member_id, name=name, role=workshop.join_role, joined=now)
    workshop.members[member.id] = member
    workshop.revision += 1
    event = new_event(revision=workshop.revision, at=now, actor=member, kind="join",
                      summary="joined the session")
    workshop.log.append(event)
    return member, event

