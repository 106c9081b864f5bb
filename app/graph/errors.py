"""Problems with a diagram or a question about it.

Every error carries a message written for the person who made the mistake:
it names the offending variable, arrow or field. The web layer maps
:class:`DiagramError` to HTTP 422 and the CLI to exit code 2.
"""

from __future__ import annotations

from ..errors import Unprocessable


class DiagramError(Unprocessable, ValueError):
    """Base class: the diagram document or the question is not usable."""

    code = "invalid_diagram"

    def __init__(self, message: str, *, item: object | None = None):
        super().__init__(message, item=item)


class MalformedDocument(DiagramError):
    code = "malformed_document"


class InvalidName(DiagramError):
    code = "invalid_name"


class DuplicateVariable(DiagramError):
    code = "duplicate_variable"


class UnknownVariable(DiagramError):
    code = "unknown_variable"


class SelfLoop(DiagramError):
    code = "self_loop"


class DuplicateArrow(DiagramError):
    code = "duplicate_arrow"


class DiagramHasCycle(DiagramError):
    code = "cycle"

    def __init__(self, cycle: list[str]):
        shown = " -> ".join(cycle + cycle[:1])
        super().__init__(
            f"the arrows form a cycle: {shown}; a causal diagram must be acyclic",
            item=cycle,
        )
        self.cycle = cycle


class DiagramTooLarge(DiagramError):
    code = "too_large"


class BadQuestion(DiagramError):
    """Treatment or outcome missing, unknown or overlapping."""

    code = "bad_question"
