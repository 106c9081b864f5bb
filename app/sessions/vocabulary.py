"""The words and rules the page shows, in one object served to it.

Each word lives with its rule in the domain (stage titles in
app/workshop/stages.py, vote and proposal words in app/workshop/models.py,
the methods in app/estimation/methods.py); this gathers them for the page,
which reads them from ``window`` data and ``GET /api/vocabulary`` instead of
keeping its own copies.
"""

from __future__ import annotations

from typing import Any

from ..estimation.methods import page_methods
from ..workshop.models import (
    PROPOSAL_KIND_LABELS, PROPOSAL_STATUS_LABELS, ROLE_LABELS, VOTE_LABELS,
)
from ..workshop.rules import permissions
from ..workshop.stages import LOCKED_STAGES, STAGE_TITLES, STAGES

__all__ = ["vocabulary"]


def vocabulary() -> dict[str, Any]:
    """Stages, roles, vote choices, proposal words, permissions and method labels."""
    return {
        "stages": [{"name": s, "title": STAGE_TITLES[s], "locked": s in LOCKED_STAGES} for s in STAGES],
        "stage_titles": dict(STAGE_TITLES),
        "locked_stages": [s for s in STAGES if s in LOCKED_STAGES],
        "roles": dict(ROLE_LABELS),
        "vote_choices": dict(VOTE_LABELS),
        "proposal_kinds": dict(PROPOSAL_KIND_LABELS),
        "proposal_statuses": dict(PROPOSAL_STATUS_LABELS),
        "permissions": permissions(),
        "methods": page_methods(),
    }
