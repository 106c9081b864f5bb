"""Build the Arrowmoot web application."""

from __future__ import annotations

import importlib
import logging
import os
import sys
from contextlib import asynccontextmanager
from pathlib import Path

from fastapi import FastAPI
from fastapi.staticfiles import StaticFiles
from fastapi.templating import Jinja2Templates

from .demo import open_demo_session
from .resources import resource_dir
from .settings import Settings
from .storage import open_store
from .web import joining, pages, ws
from .web.errors import install_error_handlers
from .web.guards import BodyLimit, JoinLimiter, OriginGuard
from .sessions import Sessions
from .web.live import Hub
from .web.routes import health, identify
from .web.routes import sessions as session_routes

__all__ = ["create_app"]

log = logging.getLogger("arrowmoot")

STATIC_DIR = resource_dir("static")
TEMPLATES_DIR = resource_dir("templates")

CSP = ("default-src 'self'; script-src 'self'; style-src 'self'; img-src 'self' data:; "
       "connect-src 'self' ws: wss:; frame-ancestors 'none'; base-uri 'none'; form-action 'self'")


def create_app(db_path: str | Path | None = None, *, data_dir: str | Path | None = None,
               settings: Settings | None = None) -> FastAPI:
    """The FastAPI app over one database (``settings.db_path`` unless ``db_path`` is given):
    an SQLite file, or PostgreSQL for a ``postgresql://`` URL.

    Raises app.storage.StorageError when the database cannot be opened or is at a
    newer schema version than this code knows."""
    settings = settings or Settings()
    if db_path is not None:
        settings.db_path = db_path  # type: ignore[assignment]
    if data_dir is not None:
        settings.data_dir = Path(data_dir)
    settings.__post_init__()

    store = open_store(settings.db_path, data_dir=settings.shared_data_dir())
    sessions = Sessions(store, use_processes=settings.analysis_in_process,
                        key_lifetime=settings.key_lifetime_days * 86400.0)
    hub = Hub(sessions)

    @asynccontextmanager
    async def lifespan(app: FastAPI):
        sessions.follow_other_processes()
        if settings.demo_session:
            await _create_demo_session(sessions, settings)
        yield
        await hub.close()
        await sessions.close()
        store.release()

    app = FastAPI(title="Arrowmoot", version="0.1.0", lifespan=lifespan)
    app.state.settings = settings
    app.state.store = store
    app.state.sessions = sessions
    app.state.hub = hub
    app.state.join_limiter = JoinLimiter(limit=settings.join_attempts_per_minute, window=60.0)
    app.state.static_dir = STATIC_DIR
    templates = Jinja2Templates(directory=str(TEMPLATES_DIR))
    app.state.templates = templates
    install_error_handlers(app)

    @app.middleware("http")
    async def security_headers(request, call_next):
        response = await call_next(request)
        response.headers.setdefault("Content-Security-Policy", CSP)
        response.headers.setdefault("X-Content-Type-Options", "nosniff")
        response.headers.setdefault("Referrer-Policy", "no-referrer")
        return response

    # Added last, so they run first: refuse foreign origins and oversized bodies up front.
    app.add_middleware(BodyLimit, limit=settings.request_limit_bytes)
    app.add_middleware(OriginGuard, allowed=settings.allowed_origins)

    app.include_router(health.router)
    app.include_router(identify.router)
    app.include_router(session_routes.router)
    app.include_router(ws.router)
    app.include_router(joining.router)
    app.include_router(pages.router)
    try:
        # built by the estimation stage; absent until then
        estimation = importlib.import_module("app.web.routes.estimation")
    except ModuleNotFoundError as exc:
        if exc.name != "app.web.routes.estimation":
            raise
    else:
        app.include_router(estimation.router)
    from .web.routes import records  # exports, record bundle, report

    app.include_router(records.router)
    app.mount("/static", StaticFiles(directory=str(STATIC_DIR)), name="static")
    return app


async def _create_demo_session(sessions: Sessions, settings: Settings) -> None:
    """With an empty database, open the bike-lease demo (in debate, data attached) and print its links once."""
    if sessions.store.count_sessions() > 0:
        return
    path = settings.demo_document
    if not path.is_file():
        return
    try:
        w, token = await open_demo_session(sessions, path)
    except Exception as exc:  # a broken demo file must not stop the server
        log.warning("demo session not created: %s", exc)
        return
    # The only place a key is ever printed: the console of whoever started the server.
    # ``arrowmoot serve`` sets ARROWMOOT_PUBLIC_URL to the address it binds.
    base = os.environ.get("ARROWMOOT_PUBLIC_URL", "").rstrip("/")
    hint = "" if base else "  Prefix the links with this server's address, e.g. http://127.0.0.1:8000\n"
    print(
        f"\nArrowmoot demo session ready ({w.stage} stage; invented people, votes and data).\n"
        f"  Facilitator link (keep it private): {base}/s/{w.id}#key={token}\n"
        f"  Join code for participants: {w.join_code}   (join link: {base}/join/{w.join_code})\n"
        + hint,
        file=sys.stderr, flush=True,
    )
