"""The application's errors: one base with a code, subclasses named after the problem.

Every problem a person can act on is an :class:`AppError`: a ``message``
written for them, a ``code`` for machines (catalogued in docs/errors.md) and
a ``kind``, the family it belongs to (``not_found``, ``conflict``, ``invalid``
...). The graph layer's :class:`~app.graph.errors.DiagramError`, the
estimation's :class:`~app.estimation.errors.DataError` and the record
bundle's :class:`~app.reporting.bundle.BundleError` are AppErrors too.

This module imports nothing else of the application and knows no web
framework: app/web/errors.py holds the one table from kind to HTTP status and
the one handler that renders every error in one shape.
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "AppError", "BadRequest", "Unauthorized", "Forbidden", "NotFound", "Conflict",
    "PayloadTooLarge", "Unprocessable", "TooManyRequests",
    "InvalidDiagram", "FacilitatorOnly", "NeedsRole", "ReadOnly", "DiagramLocked", "UseProposal",
    "WrongStage", "UnknownSession", "UnknownJoinCode", "NoKey", "BadKey", "ExpiredKey", "WrongSession",
    "TooManyAttempts", "AnalysisFailed", "LinkExpired", "BadMessage", "MessageTooLarge",
]


class AppError(Exception):
    """Base class: a problem the user can act on. Subclasses set ``kind`` and ``code``."""

    kind = "bad_request"
    code = "bad_request"

    def __init__(self, message: str, *, code: str | None = None, item: Any = None):
        super().__init__(message)
        self.message = message
        self.item = item
        if code is not None:
            self.code = code


# -- the families (app/web/errors.py gives each its HTTP status) -----------------------------
class BadRequest(AppError):
    kind = code = "bad_request"


class Unauthorized(AppError):
    kind = "not_signed_in"
    code = "not_signed_in"


class Forbidden(AppError):
    kind = code = "forbidden"


class NotFound(AppError):
    kind = code = "not_found"


class SessionBusy(AppError):
    """Other processes kept changing the session while this change was being stored."""
    kind = "unavailable"
    code = "session_busy"


class Conflict(AppError):
    kind = code = "conflict"


class PayloadTooLarge(AppError):
    kind = code = "too_large"


class Unprocessable(AppError):
    """Well-formed, but the content cannot be used (a diagram, data, a record)."""

    kind = "invalid"
    code = "invalid"


class TooManyRequests(AppError):
    kind = "too_many"
    code = "too_many_attempts"


class InvalidDiagram(Unprocessable):
    """A :class:`~app.graph.errors.DiagramError` met while changing a session (keeps its code and cycle)."""

    code = "invalid_diagram"

    def __init__(self, error: AppError):
        super().__init__(error.message, code=error.code, item=getattr(error, "item", None))
        self.cycle = getattr(error, "cycle", None)


# -- who may do what, in which stage (app/workshop/rules.py raises these) -----------------
class FacilitatorOnly(Forbidden):
    code = "facilitator_only"


class NeedsRole(Forbidden):
    code = "needs_role"


class ReadOnly(Conflict):
    code = "read_only"


class DiagramLocked(Conflict):
    code = "diagram_locked"


class UseProposal(Conflict):
    code = "use_proposal"


class WrongStage(Conflict):
    code = "wrong_stage"


# -- sessions and keys (app/sessions) --------------------------------------------------------
class UnknownSession(NotFound):
    code = "unknown_session"


class UnknownJoinCode(NotFound):
    code = "unknown_join_code"


class NoKey(Unauthorized):
    code = "no_token"


class BadKey(Unauthorized):
    code = "bad_token"


class ExpiredKey(Unauthorized):
    code = "expired_token"


class WrongSession(Forbidden):
    code = "wrong_session"


class TooManyAttempts(TooManyRequests):
    code = "too_many_attempts"


class AnalysisFailed(Unprocessable):
    """A failure inside the analysis (a numerical error, say); the session is unchanged."""

    code = "analysis_failed"


class LinkExpired(NotFound):
    code = "link_expired"


# -- the live connection's messages ----------------------------------------------------------
class BadMessage(BadRequest):
    code = "bad_message"


class MessageTooLarge(PayloadTooLarge):
    code = "message_too_large"
