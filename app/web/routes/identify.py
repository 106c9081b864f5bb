"""POST /api/identify: analyse a graph document without a session."""

from __future__ import annotations

from typing import Any

from fastapi import APIRouter, Body

from ...errors import BadRequest
from ...graph.document import parse_document

router = APIRouter(prefix="/api", tags=["identify"])


@router.post("/identify")
def identify_document(body: Any = Body(...)) -> dict:
    """Analyse a graph document; ``adjust`` (optional) is a set to check."""
    from ...graph.identification import analyze

    if not isinstance(body, dict):
        raise BadRequest("send a graph document (a JSON object)", code="malformed_document")
    document = dict(body)
    adjust = document.pop("adjust", None)
    if adjust is not None and (not isinstance(adjust, list)
                               or not all(isinstance(n, str) for n in adjust)):
        raise BadRequest("'adjust' must be a list of variable names", code="invalid_field")
    diagram = parse_document(document)
    return analyze(diagram, adjust)
