"""The four stages of a workshop and what each one allows.

drafting  -> everyone draws variables and arrows directly.
debating  -> arrows change through proposals; everyone votes; the facilitator settles.
agreed    -> the diagram is locked; the analyst may prepare data.
estimation-> data is attached and the effect estimated with the agreed diagram.

Moving back from a locked stage (agreed, estimation) reopens the diagram and
needs a written reason, which goes into the log.
"""

from __future__ import annotations

from ..errors import BadRequest, Conflict
from .models import Word

__all__ = ["Stage", "STAGES", "LOCKED_STAGES", "STAGE_TITLES", "check_stage_move", "is_locked"]


class Stage(Word):
    DRAFTING = "drafting"
    DEBATING = "debating"
    AGREED = "agreed"
    ESTIMATION = "estimation"


STAGES = tuple(Stage)  # in their order
LOCKED_STAGES = frozenset({Stage.AGREED, Stage.ESTIMATION})
STAGE_TITLES = {
    Stage.DRAFTING: "Drafting",
    Stage.DEBATING: "Debating",
    Stage.AGREED: "Agreed",
    Stage.ESTIMATION: "Estimation",
}
MAX_REASON = 500


def is_locked(stage: str) -> bool:
    return stage in LOCKED_STAGES


def check_stage_move(current: str, target: str, reason: str | None, *,
                     open_proposals: int, has_question: bool) -> str:
    """Validate a stage change; return the cleaned reason (may be empty)."""
    if target not in STAGES:
        raise BadRequest(
            f"unknown stage {target!r}; the stages are {', '.join(STAGES)}", code="unknown_stage"
        )
    if target == current:
        raise Conflict(f"the session is already in the {target} stage", code="same_stage")
    reason = (reason or "").strip()
    if len(reason) > MAX_REASON:
        raise BadRequest(f"the reason is {len(reason)} characters long; the limit is {MAX_REASON}",
                         code="reason_too_long")
    reopening = is_locked(current) and not is_locked(target)
    if reopening and not reason:
        raise BadRequest(
            "reopening a locked diagram needs a written reason; it goes into the log",
            code="reason_required",
        )
    if target in LOCKED_STAGES and not is_locked(current):
        if open_proposals:
            raise Conflict(
                f"{open_proposals} proposal(s) are still open; accept, reject or leave each "
                "disputed before locking the diagram",
                code="open_proposals",
            )
        if not has_question:
            raise Conflict("choose a treatment and an outcome before locking the diagram",
                           code="no_question")
    return reason
