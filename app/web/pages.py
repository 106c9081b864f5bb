"""HTML pages. Each page's data also has a JSON twin under /api."""

from __future__ import annotations

from fastapi import APIRouter, Request

from ..sessions.vocabulary import vocabulary
from .deps import SessionsDep
from .guards import guarded_join_lookup

router = APIRouter(include_in_schema=False)


def _render(request: Request, name: str, **context):
    return request.app.state.templates.TemplateResponse(request, name, context)


@router.get("/")
def home_page(request: Request):
    """Open a session or join one."""
    return _render(request, "home.html", page_data={"page": "home"})


@router.get("/join")
def join_form_page(request: Request):
    return _render(request, "join.html", page_data={"page": "join", "code": None, "title": None})


@router.get("/join/{code}")
async def join_page(code: str, request: Request, sessions: SessionsDep):
    """The join form for one session (the code is checked again on submit)."""
    w = await guarded_join_lookup(request, sessions, code)
    return _render(request, "join.html", title=w.title,
                   page_data={"page": "join", "code": w.join_code, "title": w.title})


@router.get("/s/{session_id}")
def session_page(session_id: str, request: Request, sessions: SessionsDep):
    """The live workshop page; the key comes from the URL fragment or this browser's storage."""
    w = sessions.workshop(session_id)
    static_dir = request.app.state.static_dir
    has_estimation = (static_dir / "js" / "estimation.js").is_file()
    return _render(request, "session.html", title=w.title,
                   page_data={"page": "session", "session_id": w.id, "title": w.title,
                              "vocabulary": vocabulary(),
                              "estimation_module": "/static/js/estimation.js" if has_estimation else None})
