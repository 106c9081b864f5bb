"""The one web handler for every error, and the one table from an error's kind to its HTTP status.

Every error reaches the client in one shape. API callers (paths under ``/api``
or ``/ws``, or anyone who asks for JSON) get::

    {"ok": false, "error": "<message for a person>", "status": 422, "code": "<machine code>"}

(plus ``"cycle"`` when a diagram has one). Browsers asking for a page get
``templates/error.html`` with the same message. The codes are catalogued in
docs/errors.md.
"""

from __future__ import annotations

import logging
from typing import Any

from ..errors import AppError

__all__ = ["HTTP_STATUS", "status_of", "error_body", "error_extra", "install_error_handlers"]

log = logging.getLogger("arrowmoot")

# The one table: each family of error (AppError.kind) and its HTTP status.
HTTP_STATUS: dict[str, int] = {
    "bad_request": 400,
    "not_signed_in": 401,
    "forbidden": 403,
    "not_found": 404,
    "method_not_allowed": 405,
    "conflict": 409,
    "too_large": 413,
    "invalid": 422,
    "too_many": 429,
    "unavailable": 503,
    "internal": 500,
}


def status_of(exc: AppError) -> int:
    return HTTP_STATUS[exc.kind]


def error_body(message: str, status: int, code: str, **extra: Any) -> dict[str, Any]:
    body = {"ok": False, "error": message, "status": status, "code": code}
    body.update(extra)
    return body


def error_extra(exc: AppError) -> dict[str, Any]:
    """What an error adds to the body: the cycle of a diagram that has one, how long to wait."""
    return {k: getattr(exc, k) for k in ("cycle", "retry_after") if getattr(exc, k, None)}


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
        return _render(request, exc.message, status_of(exc), exc.code, **error_extra(exc))

    @app.exception_handler(RequestValidationError)
    async def handle_validation(request: Request, exc: RequestValidationError):
        return _render(request, _describe_validation(exc), HTTP_STATUS["invalid"], "invalid_request")

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
        # The last resort, so that even a bug answers in the one shape; it is logged in full.
        log.exception("unexpected error on %s %s", request.method, request.url.path)
        return _render(request, "the server hit an unexpected problem; nothing was changed",
                       HTTP_STATUS["internal"], "internal_error")
