"""Who may do what, in which stage: one table, checked in one place.

Every command (and every operation of the estimation stage) has one
:class:`Rule`: the roles that may ask for it, the stages it is allowed in, and
the stages where only the facilitator may. :func:`check` is the only place a
rule is applied; :func:`permissions` is the same table as plain data for the
page, so the buttons it shows follow the rules the server applies.

A reader (a session reopened read-only from a record) holds no rule's role.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from ..errors import DiagramLocked, FacilitatorOnly, NeedsRole, ReadOnly, UseProposal, WrongStage
from .models import Member, Role
from .stages import LOCKED_STAGES, STAGES, Stage

__all__ = ["Rule", "RULES", "check", "permissions"]

EVERY_STAGE = frozenset(STAGES)
UNLOCKED = frozenset(s for s in STAGES if s not in LOCKED_STAGES)
DATA_STAGES = frozenset({Stage.AGREED, Stage.ESTIMATION})
MEMBERS = frozenset({Role.FACILITATOR, Role.PARTICIPANT})
FACILITATOR = frozenset({Role.FACILITATOR})
ANALYSTS = frozenset({Role.ANALYST})  # the facilitator counts as an analyst


@dataclass(frozen=True)
class Rule:
    roles: frozenset[Role]
    stages: frozenset[Stage] = EVERY_STAGE
    doing: str = ""                    # "only the facilitator can <doing>" / "... before anyone can <doing>"
    locked_doing: str = ""             # when the diagram lock refuses it, if worded otherwise
    wrong_stage: str = ""              # the refusal in a stage the lock does not explain
    facilitator_in: frozenset[Stage] = field(default_factory=frozenset)  # only the facilitator there
    facilitator_doing: str = ""        # the refusal there ...
    propose_instead: bool = False      # ... or: propose the change instead
    changes: bool = True               # a change (a reader is told the session is read-only)


def _drawing(doing: str) -> Rule:
    return Rule(MEMBERS, UNLOCKED, doing=doing, facilitator_in=frozenset({Stage.DEBATING}),
                propose_instead=True)


RULES: dict[str, Rule] = {
    # graph edits
    "add_variable": Rule(MEMBERS, UNLOCKED, doing="add variables"),
    "update_variable": Rule(MEMBERS, UNLOCKED, doing="change variables"),
    "move_variable": Rule(MEMBERS),
    "delete_variable": Rule(MEMBERS, UNLOCKED, doing="delete variables",
                            facilitator_in=frozenset({Stage.DEBATING}),
                            facilitator_doing="delete a variable while debating (it removes arrows)"),
    "add_arrow": _drawing("add an arrow"),
    "delete_arrow": _drawing("remove an arrow"),
    "reverse_arrow": _drawing("reverse an arrow"),
    "set_question": Rule(FACILITATOR, UNLOCKED, doing="change the treatment and outcome",
                         locked_doing="change the question"),
    "tidy": Rule(MEMBERS),
    "import_document": Rule(FACILITATOR, frozenset({Stage.DRAFTING}), doing="import a diagram",
                            wrong_stage="a diagram can only be imported while drafting"),
    # proposals, votes, disputes
    "propose": Rule(MEMBERS, frozenset({Stage.DEBATING}),
                    wrong_stage="proposals are made while debating; in drafting, draw the change directly"),
    "withdraw_proposal": Rule(MEMBERS),  # the proposer's own, or the facilitator (checked on the proposal)
    "vote": Rule(MEMBERS, UNLOCKED, doing="vote"),
    "withdraw_vote": Rule(MEMBERS, UNLOCKED, doing="change votes"),
    "settle": Rule(FACILITATOR, frozenset({Stage.DEBATING}), doing="settle proposals",
                   wrong_stage="proposals are settled while debating"),
    "flag_arrow": Rule(FACILITATOR, UNLOCKED, doing="mark arrows disputed or settled",
                       locked_doing="change disputes"),
    "state_hidden_cause": Rule(MEMBERS, UNLOCKED, doing="state a hidden cause"),
    "mark_absent": Rule(FACILITATOR, UNLOCKED, doing="mark left-out arrows as considered",
                        locked_doing="mark left-out arrows"),
    # facilitation
    "set_stage": Rule(FACILITATOR, doing="move the session to another stage"),
    "grant_role": Rule(FACILITATOR, doing="grant roles"),
    "rename_session": Rule(FACILITATOR, doing="rename the session"),
    "undo": Rule(FACILITATOR, UNLOCKED, doing="undo", locked_doing="undo changes"),
    # the estimation stage (HTTP operations, not commands)
    "attach_data": Rule(ANALYSTS, DATA_STAGES),
    "map_columns": Rule(ANALYSTS, DATA_STAGES),
    "estimate": Rule(ANALYSTS, DATA_STAGES),
    "export_record": Rule(ANALYSTS, changes=False),
}


def check(name: str, member: Member, stage: str) -> None:
    """Refuse ``member`` doing ``name`` in ``stage`` (the right error, the right words), or pass."""
    rule = RULES[name]
    if member.role == Role.READER and rule.changes:
        raise ReadOnly("this session was reopened read-only from a record; import the bundle "
                       "as a new session to change it")
    if not any(member.has_role(role) for role in rule.roles):
        if rule.roles == FACILITATOR:
            raise FacilitatorOnly(f"only the facilitator can {rule.doing}")
        needed = " or ".join(sorted(rule.roles))
        raise NeedsRole(f"this needs the {needed} role; ask the facilitator")
    if stage not in rule.stages:
        if rule.wrong_stage:
            raise WrongStage(rule.wrong_stage)
        if stage in LOCKED_STAGES and rule.stages <= UNLOCKED:
            raise DiagramLocked(
                f"the diagram is locked in the {stage} stage; the facilitator must "
                f"reopen it (with a reason) before anyone can {rule.locked_doing or rule.doing}")
        allowed = [s for s in STAGES if s in rule.stages]
        raise WrongStage(f"this needs the session in the {' or '.join(allowed)} stage; it is in {stage}")
    if stage in rule.facilitator_in and not member.is_facilitator:
        if rule.propose_instead:
            raise UseProposal(f"while debating, arrows change through proposals: propose to "
                              f"{rule.doing} instead")
        raise FacilitatorOnly(f"only the facilitator can {rule.facilitator_doing}")


def permissions() -> dict[str, dict[str, Any]]:
    """The table for the page: ``{name: {"roles": [...], "stages": [...], "facilitator_in": [...]}}``."""
    return {name: {"roles": sorted(rule.roles), "stages": [s for s in STAGES if s in rule.stages],
                   "facilitator_in": [s for s in STAGES if s in rule.facilitator_in]}
            for name, rule in RULES.items()}
