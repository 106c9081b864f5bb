"""What the analysis push carries: long lists cut to what the panel shows.

The full analysis stays at GET /api/sessions/{id}/analysis; the WebSocket push to
every client of a room carries at most a screenful of each long list, so a big
diagram does not send hundreds of kilobytes to each participant after every edit.
"""

from __future__ import annotations

from typing import Any

__all__ = ["slim_for_push", "PUSH_PATHS_PER_KIND", "PUSH_IMPLICATIONS", "PUSH_ABSENT"]

PUSH_PATHS_PER_KIND = 60
PUSH_IMPLICATIONS = 60
PUSH_ABSENT = 40


def _slim_analysis(analysis: dict[str, Any]) -> tuple[dict[str, Any], bool]:
    """Paths (at most PUSH_PATHS_PER_KIND of each causal/open kind) and implications cut."""
    analysis = dict(analysis)
    trimmed = False
    paths = analysis.get("paths", [])
    kinds: dict[tuple, int] = {}
    kept = []
    for p in paths:
        kind = (p.get("causal"), p.get("open"))
        kinds[kind] = kinds.get(kind, 0) + 1
        if kinds[kind] <= PUSH_PATHS_PER_KIND:
            kept.append(p)
    if len(kept) < len(paths):
        analysis["paths"], analysis["paths_capped"], trimmed = kept, True, True
    imps = analysis.get("implications", [])
    if len(imps) > PUSH_IMPLICATIONS:
        analysis["implications"], analysis["implications_capped"] = imps[:PUSH_IMPLICATIONS], True
        trimmed = True
    return analysis, trimmed


def slim_for_push(payload: dict[str, Any]) -> dict[str, Any]:
    """The analysis as pushed to every client: long lists cut to what the panel shows.

    Totals stay, and ``"trimmed": true`` tells the page the full lists are at
    GET /api/sessions/{id}/analysis.
    """
    out = dict(payload)
    trimmed = False
    if payload.get("analysis"):
        out["analysis"], trimmed = _slim_analysis(payload["analysis"])
    absent = payload.get("absent")
    if absent and len(absent.get("arrows", [])) > PUSH_ABSENT:
        out["absent"] = dict(absent, arrows=absent["arrows"][:PUSH_ABSENT], capped=True)
        trimmed = True
    out["trimmed"] = trimmed
    return out
