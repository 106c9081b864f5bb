"""The application's errors: the class carries the HTTP status, one handler renders them.

Every error reaches the client in one shape. API callers (paths under ``/api``
or ``/ws``, or anyone who asks for JSON) get::

    {"ok": false, "error": "<message for a person>", "status": 422, "code": "<machine code>"}

Browsers asking for a page get ``templates/error.html`` with the same message.
The classes carry no web dependency, so the workshop domain raises them too;
only :func:`install_error_handlers` knows about FastAPI.
"""

from __future__ import annotations

import logging
from typing import Any

from .graph.errors import DiagramError

__all__ = [
    "AppError", "BadRequest", "Unauthorized", "Forbidden", "NotFound", "Conflict",
    "PayloadTooLarge", "InvalidDiagram", "error_body", "install_error_handlers",
]

log = logging.getLogger("arrowmoot")


class AppError(Exception):
    """Base class: a problem the user can act on. Subclasses set ``status`` and ``code``."""

    status = 400
    code = "bad_request"

    def __init__(self, message: str, *, code: str | None = None, status: int | None = None):
        super().__init__(message)
        self.message = message
        if code is not None:
            self.code = code
        if status is not None:
            self.status = status


class BadRequest(AppError):
    status = 400
    code = "bad_request"


class Unauthorized(AppError):
    status = 401
    code = "not_signed_in"


class Forbidden(AppError):
    status = 403
    code = "forbidden"


class NotFound(AppError):
    status = 404
    code = "not_found"


class Conflict(AppError):
    status = 409
    code = "conflict"


class PayloadTooLarge(AppError):
    status = 413
    code = "too_large"


class InvalidDiagram(AppError):
    """Wraps a :class:`DiagramError` from the graph layer."""

    status = 422
    code = "invalid_diagram"

    def __init__(self, error: DiagramError):
        super().__init__(error.message, code=error.code)
        self.cycle = getattr(error, "cycle", None)


def from_exception(exc: Exception) -> AppError:
    if isinstance(exc, AppError):
        return exc
    if isinstance(exc, DiagramError):
        return InvalidDiagram(exc)
    raise TypeError(exc)


def error_body(message: str, status: int, code: str, **extra: Any) -> dict[str, Any]:
    body = {"ok": False, "error": message, "status": status, "code": code}
    body.update(extra)
    return body


def _wants_json(request) -> bool:
    path = request.url.path
    if path.startswith("/api") or path.startswith("/ws"):
        return True
    accept = request.headers.get("accept", "")
    return "application/json" in accept and "text/html" not in accept


def _render(request, message: str, status: int, code: str, **extra: Any):
    from fastapi.responses import HTMLResponse, JSONResponse
    if _wants_json(request):
        return JSONResponse(error_body(message, status, code, **extra), status_code=status)
    templates = getattr(request.app.state, "templates", None)
    if templates is None:
        return HTMLResponse(f"<h1>{status}</h1>", status_code=status)
    return templates.TemplateResponse(
        request, "error.html", {"message": message, "status": status, "code": code},
        status_code=status,
    )


def _describe_json_error(err: dict, body: Any) -> str:
    """A body that is not JSON, in words: what is wrong and where (line, column)."""
    why = str((err.get("ctx") or {}).get("error") or "it cannot be read")
    pos = next((p for p in err.get("loc", ()) if isinstance(p, int) and not isinstance(p, bool)), None)
    where = ""
    if pos is not None:
        text = body.decode("utf-8", "replace") if isinstance(body, (bytes, bytearray)) else str(body or "")
        line = text.count("\n", 0, pos) + 1
        column = pos - (text.rfind("\n", 0, pos) + 1) + 1
        where = f" at line {line}, column {column}"
    return (f"the request body is not valid JSON{where}: {why[:1].lower() + why[1:]}. "
            "Send one JSON object, with double quotes around every name and text value")


def _describe_validation(exc) -> str:
    json_error = next((e for e in exc.errors() if e.get("type") == "json_invalid"), None)
    if json_error is not None:
        return _describe_json_error(json_error, getattr(exc, "body", None))
    parts = []
    for err in exc.errors()[:5]:
        loc = [str(p) for p in err.get("loc", ()) if p not in ("body",)]
        where = ".".join(loc) or "request body"
        parts.append(f"{where}: {err.get('msg', 'invalid')}")
    return "; ".join(parts) or "the request is not valid"


def install_error_handlers(app) -> None:
    from fastapi import Request
    from fastapi.exceptions import RequestValidationError
    from starlette.exceptions import HTTPException as StarletteHTTPException
    @app.exception_handler(AppError)
    async def handle_app_error(request: Request, exc: AppError):
        extra = {k: getattr(exc, k) for k in ("cycle", "retry_after") if getattr(exc, k, None)}
        return _render(request, exc.message, exc.status, exc.code, **extra)

    @app.exception_handler(DiagramError)
    async def handle_diagram_error(request: Request, exc: DiagramError):
        err = InvalidDiagram(exc)
        extra = {"cycle": err.cycle} if err.cycle else {}
        return _render(request, err.message, err.status, err.code, **extra)

    @app.exception_handler(RequestValidationError)
    async def handle_validation(request: Request, exc: RequestValidationError):
        return _render(request, _describe_validation(exc), 422, "invalid_request")

    @app.exception_handler(StarletteHTTPException)
    async def handle_http(request: Request, exc: StarletteHTTPException):
        message = exc.detail if isinstance(exc.detail, str) else "request failed"
        if exc.status_code == 404 and message == "Not Found":
            message = f"nothing at {request.url.path}"
        if exc.status_code == 405:
            message = f"{request.method} is not allowed on {request.url.path}"
        code = {404: "not_found", 405: "method_not_allowed"}.get(exc.status_code, "http_error")
        return _render(request, message, exc.status_code, code)

    @app.exception_handler(Exception)
    async def handle_unexpected(request: Request, exc: Exception):
        log.exception("unexpected error on %s %s", request.method, request.url.path)
        return _render(request, "the server hit an unexpected problem; nothing was changed",
                       500, "internal_error")
