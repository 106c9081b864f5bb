"""Health checks for a load balancer or process supervisor.

``GET /healthz``  the process is alive and serving (never touches the database)
``GET /readyz``   the database answers, so this process can take requests (503 otherwise)
"""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter
from fastapi.responses import JSONResponse

from ..errors import HTTP_STATUS, error_body
from ..deps import SessionsDep

router = APIRouter(tags=["health"])


@router.get("/healthz")
def read_liveness() -> dict:
    """Alive: answers as long as the process serves requests."""
    return {"ok": True}


@router.get("/readyz")
def read_readiness(sessions: SessionsDep) -> Any:
    """Ready: the database answers; its kind and schema version are given. Always JSON (503 when not)."""
    status = sessions.storage_status()
    if not status["ready"]:
        unavailable = HTTP_STATUS["unavailable"]
        return JSONResponse(error_body(f"the {status['store']} database does not answer", unavailable,
                                       "database_unreachable", store=status["store"]), status_code=unavailable)
    return {"ok": True, "store": status["store"], "schema_version": status["schema_version"]}
