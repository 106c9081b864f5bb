"""The record of a workshop over HTTP: graph exports, the record bundle, the report, imports.

    GET  /api/sessions/{id}/export/graph?format=json|graphml|dot   the agreed graph (download)
    GET  /api/sessions/{id}/export/bundle                          the full record bundle (download)
    GET  /api/sessions/{id}/report                                 the report as one HTML page
    POST /api/sessions/{id}/report/link                            a short-lived link to open it in a tab
    POST /api/records/import?mode=new|read-only&name=...           reopen a bundle as a session
    POST /api/records/report                                       the report of an uploaded bundle
    GET  /records, POST /records/report, POST /records/import      the same as plain HTML forms

Exports and the report need the analyst or facilitator key. An import opens
a fresh session (new id, join code and key): ``new`` makes the importer its
facilitator, so the analysis can continue; ``read-only`` gives the importer
a reader's key only. A refused bundle gets a 422 naming what is wrong.
"""

from __future__ import annotations

import json
import re
import secrets
import time
from typing import Any

from fastapi import APIRouter, File, Form, Request, UploadFile
from fastapi.responses import HTMLResponse, Response

from ...errors import AppError, BadRequest, LinkExpired, PayloadTooLarge
from ...reporting.bundle import BundleError, build_bundle, file_sha256, validate_bundle
from ...reporting.report import render_report
from ...sessions import IMPORT_MODES
from ...workshop.views import public_state
from ..deps import RecordDep, SessionAccess, SessionsDep
from ..errors import status_of

router = APIRouter(tags=["records"])

MAX_BUNDLE_BYTES = 50 * 1024 * 1024
# The report is a standalone document: inline styles, inline SVG, nothing else.
REPORT_CSP = ("default-src 'none'; style-src 'unsafe-inline'; img-src data:; base-uri 'none'; "
              "form-action 'none'; frame-ancestors 'self'")
GRAPH_FORMATS = {
    "json": ("application/json", "json"),
    "graphml": ("application/graphml+xml", "graphml"),
    "dot": ("text/vnd.graphviz", "dot"),
}


def _slug(title: str) -> str:
    slug = re.sub(r"[^A-Za-z0-9]+", "-", title).strip("-").lower()[:60]
    return slug or "session"


def _download(body: str, media_type: str, filename: str) -> Response:
    return Response(body, media_type=f"{media_type}; charset=utf-8",
                    headers={"Content-Disposition": f'attachment; filename="{filename}"'})


def session_bundle(access: SessionAccess) -> dict[str, Any]:
    """The record bundle of the session behind ``access``."""
    keys = [k for k in access.list_attachment_keys() if k.startswith("estimation.")]
    attachments = {k: access.get_attachment(k) for k in keys}
    info = attachments.get("estimation.data") or {}
    digest = None
    if info.get("stored"):
        path = access.data_dir() / info["stored"]
        digest = file_sha256(path) if path.is_file() else info.get("sha256")
    return build_bundle(access.workshop, analysis=access.analysis_now(),
                        attachments=attachments, data_sha256=digest, exported_at=time.time())


@router.get("/api/sessions/{session_id}/export/graph")
def export_graph(access: RecordDep, format: str = "json") -> Response:
    """The agreed graph as a graph document (json), GraphML or Graphviz DOT."""
    if format not in GRAPH_FORMATS:
        raise BadRequest(f"unknown format {format!r}; use one of {', '.join(GRAPH_FORMATS)}",
                         code="unknown_format")
    media, ext = GRAPH_FORMATS[format]
    diagram = access.diagram()
    if format == "json":
        body = json.dumps(diagram.to_document(), indent=2, ensure_ascii=False)
    else:
        from ...graph.formats import to_dot, to_graphml

        body = to_graphml(diagram) if format == "graphml" else to_dot(diagram)
    return _download(body, media, f"{_slug(access.title)}.{ext}")


@router.get("/api/sessions/{session_id}/export/bundle")
def export_bundle(access: RecordDep) -> Response:
    """Everything the session decided and found, as one versioned JSON file."""
    bundle = session_bundle(access)
    return _download(json.dumps(bundle, indent=1, ensure_ascii=False), "application/json",
                     f"{_slug(access.title)}.record.json")


def _report_response(html: str) -> HTMLResponse:
    return HTMLResponse(html, headers={"Content-Security-Policy": REPORT_CSP})


@router.get("/api/sessions/{session_id}/report")
def read_report(access: RecordDep) -> HTMLResponse:
    """The workshop report: one self-contained HTML page (print it to PDF from the browser)."""
    return _report_response(render_report(session_bundle(access)))


REPORT_LINK_SECONDS = 120
_links: dict[str, tuple[str, float]] = {}


@router.post("/api/sessions/{session_id}/report/link")
def create_report_link(access: RecordDep) -> dict:
    """A link that opens the report in a browser tab without the key (valid for two minutes).

    A page cannot send the key header when it opens a tab, and a report made
    into a blob would inherit the session page's stylesheet rules; this link
    shows the session's current report to whoever holds it, until it expires.
    """
    now = time.time()
    for ticket, (_, until) in list(_links.items()):
        if until < now:
            del _links[ticket]
    ticket = secrets.token_urlsafe(24)
    _links[ticket] = (access.session_id, now + REPORT_LINK_SECONDS)
    return {"ok": True, "url": f"/records/view/{ticket}", "expires_in": REPORT_LINK_SECONDS}


@router.get("/records/view/{ticket}", include_in_schema=False)
def read_report_by_link(ticket: str, sessions: SessionsDep) -> HTMLResponse:
    found = _links.get(ticket)
    if found is None or found[1] < time.time():
        _links.pop(ticket, None)
        raise LinkExpired("this report link has expired; open the report again from the session page")
    return _report_response(render_report(session_bundle(SessionAccess(session_id=found[0], sessions=sessions))))


async def _read_bundle(request: Request) -> dict[str, Any]:
    declared = request.headers.get("content-length")
    if declared and declared.isdigit() and int(declared) > MAX_BUNDLE_BYTES:
        raise PayloadTooLarge(f"the bundle is {int(declared) / 1048576:.1f} MB; the limit is "
                              f"{MAX_BUNDLE_BYTES / 1048576:.0f} MB", code="bundle_too_large")
    chunks, size = [], 0
    async for chunk in request.stream():
        size += len(chunk)
        if size > MAX_BUNDLE_BYTES:
            raise PayloadTooLarge(f"the bundle is over the limit of {MAX_BUNDLE_BYTES / 1048576:.0f} MB",
                                  code="bundle_too_large")
        chunks.append(chunk)
    return _decode_bundle(b"".join(chunks))


def _decode_bundle(raw: bytes) -> dict[str, Any]:
    if not raw.strip():
        raise BadRequest("send the record bundle (a .record.json file) as the request body", code="no_bundle")
    try:
        obj = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise BadRequest("the bundle is not UTF-8 text", code="bundle_not_json") from None
    except json.JSONDecodeError as err:
        raise BadRequest(f"the bundle is not valid JSON (line {err.lineno}, column {err.colno}: {err.msg})",
                         code="bundle_not_json") from None
    return validate_bundle(obj)


def _bundle_report(bundle: dict[str, Any]) -> str:
    """The report of a validated bundle; a part that cannot be shown is a BundleError."""
    try:
        return render_report(bundle)
    except AppError:
        raise
    except (KeyError, TypeError, ValueError, AttributeError, IndexError) as err:
        raise BundleError(f"part of the bundle is damaged and cannot be shown ({type(err).__name__}: {err})",
                          code="bundle_bad_part") from None


def _clean_name(name: str | None, default: str) -> str:
    name = (name or "").strip()
    if len(name) > 40:
        raise BadRequest(f"your name is {len(name)} characters long; the limit is 40", code="too_long")
    if any(ord(ch) < 32 for ch in name):
        raise BadRequest("your name holds a control character", code="invalid_field")
    return name or default


@router.post("/api/records/import", status_code=201)
async def create_session_from_bundle(request: Request, sessions: SessionsDep, mode: str = "new",
                                     name: str | None = None) -> dict:
    """Reopen a record bundle as a session, with its diagram, votes, history and results."""
    if mode not in IMPORT_MODES:
        raise BadRequest("'mode' must be new or read-only", code="invalid_field")
    who = _clean_name(name, "Facilitator" if mode == "new" else "Reader")
    bundle = await _read_bundle(request)
    w, member, token = sessions.import_record(bundle, mode=mode, name=who)
    return {"ok": True, "session_id": w.id, "join_code": w.join_code, "token": token, "mode": mode,
            "read_only": mode == "read-only", "member": member.to_public(),
            "session_page": f"/s/{w.id}", "key_link": f"/s/{w.id}#key={token}",
            "state": public_state(w)}


@router.post("/api/records/report")
async def create_report_from_bundle(request: Request) -> HTMLResponse:
    """The report of an uploaded bundle, without opening a session."""
    return _report_response(_bundle_report(await _read_bundle(request)))


# -- plain HTML forms (no script needed) ---------------------------------------------------
def _page(request: Request, status: int = 200, **context) -> HTMLResponse:
    response = request.app.state.templates.TemplateResponse(
        request, "report_records.html", {"title": "Workshop records", "page_data": {"page": "records"},
                                         "opened": None, "error": None, **context}, status_code=status)
    # With "no-referrer" browsers send "Origin: null" on a form post, which the
    # cross-origin guard refuses; "same-origin" lets the forms name this server.
    response.headers["Referrer-Policy"] = "same-origin"
    return response


@router.get("/records", include_in_schema=False)
def records_page(request: Request) -> HTMLResponse:
    """Forms to show the report of a record bundle or reopen it as a session."""
    return _page(request)


async def _form_bundle(upload: UploadFile) -> dict[str, Any]:
    raw = await upload.read(MAX_BUNDLE_BYTES + 1)
    if len(raw) > MAX_BUNDLE_BYTES:
        raise PayloadTooLarge(f"the bundle is over the limit of {MAX_BUNDLE_BYTES / 1048576:.0f} MB",
                              code="bundle_too_large")
    return _decode_bundle(raw)


@router.post("/records/report", include_in_schema=False)
async def records_form_report(request: Request, bundle: UploadFile = File(...)) -> HTMLResponse:
    try:
        html = _bundle_report(await _form_bundle(bundle))
    except AppError as err:
        return _page(request, status=status_of(err), error=err.message)
    return _report_response(html)


@router.post("/records/import", include_in_schema=False)
async def records_form_import(request: Request, sessions: SessionsDep, bundle: UploadFile = File(...),
                              mode: str = Form("new"), name: str = Form("")) -> HTMLResponse:
    try:
        if mode not in IMPORT_MODES:
            raise BadRequest("choose to reopen it as a new session or read-only", code="invalid_field")
        who = _clean_name(name, "Facilitator" if mode == "new" else "Reader")
        data = await _form_bundle(bundle)
        w, member, token = sessions.import_record(data, mode=mode, name=who)
    except AppError as err:
        return _page(request, status=status_of(err), error=err.message)
    opened = {"title": w.title, "read_only": mode == "read-only", "join_code": w.join_code,
              "key_link": f"/s/{w.id}#key={token}"}
    return _page(request, status=201, opened=opened)
