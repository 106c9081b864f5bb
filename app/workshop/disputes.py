"""The analysis a workshop shows after every edit (filled in below)."""

from __future__ import annotations

import json
from typing import Any

from ..graph.errors import DiagramError
from .models import Workshop
from .voting import disputed_items


def analysis_key(w: Workshop) -> str:
    """Everything the analysis depends on (positions and labels do not count)."""
    return json.dumps([
        sorted((v["name"], bool(v.get("latent"))) for v in w.variables),
        sorted(w.arrows), list(w.treatment), list(w.outcome),
        [[i["pair"], i["options"]] for i in disputed_items(w)],
    ])


def analyse_workshop(w: Workshop) -> dict[str, Any]:
    from ..graph.identification import analyze

    if not w.variables:
        return {"analysis": None, "problem": "add variables and arrows to see what the diagram implies",
                "disputes": None, "absent": None}
    if not w.treatment or not w.outcome:
        return {"analysis": None,
                "problem": "choose a treatment and an outcome to see what the diagram implies",
                "disputes": None, "absent": None}
    try:
        diagram = w.diagram()
        result = analyze(diagram)
    except DiagramError as exc:
        return {"analysis": None, "problem": exc.message, "disputes": None, "absent": None}
    return {"analysis": result, "problem": None, "disputes": None, "absent": None}
