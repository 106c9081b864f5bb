"""The record bundle: one versioned JSON file holding everything a workshop decided and found.

Layout (``format`` ``"arrowmoot-record"``, ``version`` 1)::

    software        {"name": "arrowmoot", "version": app.__version__}
    exported_at     seconds since the epoch (UTC)
    session         id, title, stage, revision, created
    graph           the graph document (positions, labels, latent flags, question)
    variables       each variable with its description and the column that measures it
    members         who took part (names and roles; never keys)
    proposals       every proposal with its votes (name, time, reason) and who settled it
    arrow_votes     votes cast on drawn arrows, and the facilitator's marks
    decisions       each facilitator decision (settling, marks, stages, question, undo)
    stages          the stage history (from, to, when, who, reason)
    history         every logged event, in order
    identification  the engine's analysis of the agreed diagram
    disputes        which disputed arrows change the answer
    absent_arrows   left-out arrows that would change the answer
    hidden_causes   each member's stated strongest hidden common cause ("twice as strong as age")
    data            the attached file: name, rows, columns, mapping, SHA-256 fingerprint
    estimation      estimate, implication tests, checks against the data and their verdict, sensitivity, disputed-arrow estimates
    workshop        the exact session state and event log, so an import reopens it as it was

Charts are never stored: they are drawn again from the numbers, so a bundle
from elsewhere cannot smuggle markup into a page. :func:`validate_bundle`
checks an imported bundle and names the first thing wrong.
"""

from __future__ import annotations

import copy
import hashlib
import math
from pathlib import Path
from typing import Any

from .. import __version__
from ..errors import Unprocessable
from ..graph.document import parse_document
from ..graph.errors import DiagramError
from ..workshop.hidden_causes import statements_public
from ..workshop.models import Workshop, parse_arrow_key
from ..workshop.voting import proposal_public, tally, votes_public

__all__ = [
    "BUNDLE_FORMAT", "BUNDLE_VERSION", "BundleError", "build_bundle", "validate_bundle",
    "file_sha256", "restore_workshop", "attachments_from_bundle", "ESTIMATION_KEYS", "DECISION_KINDS",
]

BUNDLE_FORMAT = "arrowmoot-record"
BUNDLE_VERSION = 1
ESTIMATION_KEYS = {"estimate": "estimation.estimate", "validation": "estimation.validation",
                   "sensitivity": "estimation.sensitivity", "disputes": "estimation.disputes"}
DATA_KEY = "estimation.data"
DECISION_KINDS = frozenset({"settle", "flag_arrow", "mark_absent", "set_stage", "set_question", "undo", "grant_role",
                            "import_document", "withdraw_proposal", "rename_session"})
REQUIRED_PARTS = ("software", "session", "graph", "workshop")


class BundleError(Unprocessable):
    """A bundle that cannot be read; ``message`` says what is wrong, ``code`` for machines."""

    def __init__(self, message: str, code: str = "bad_bundle"):
        super().__init__(message, code=code)


def file_sha256(path: str | Path) -> str:
    """The SHA-256 digest of a file, read in chunks."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def _without_charts(value: Any) -> Any:
    if isinstance(value, dict):
        return {k: _without_charts(v) for k, v in value.items() if k != "charts"}
    if isinstance(value, list):
        return [_without_charts(v) for v in value]
    return value


def _without_timings(value: Any) -> Any:
    """Drop how long a computation took: it is not part of what was found."""
    if isinstance(value, dict):
        return {k: v for k, v in value.items() if k not in ("elapsed_ms", "timings")}
    return value


def _public_event(event: dict) -> dict:
    return {k: v for k, v in event.items() if k != "before"}


def build_bundle(workshop: Workshop, *, analysis: dict | None, attachments: dict[str, Any],
                 data_sha256: str | None, exported_at: float) -> dict[str, Any]:
    """The record of one session. ``analysis`` is the hub's analysis payload
    (``{"analysis", "disputes", "absent", "problem"}``); ``attachments`` maps
    attachment keys (``estimation.*``) to their values."""
    w = workshop
    analysis = analysis or {}
    data_info = attachments.get(DATA_KEY) or None
    mapping = (data_info or {}).get("mapping") or {}
    variables = []
    for v in w.variables:
        variables.append({
            "name": v["name"], "label": v.get("label"), "description": v.get("description"),
            "latent": bool(v.get("latent")), "column": mapping.get(v["name"]),
            "role": "treatment" if v["name"] in w.treatment else "outcome" if v["name"] in w.outcome else None,
        })
    arrow_votes = []
    for subject in sorted(w.votes):
        if not subject.startswith("arrow:"):
            continue
        a, b = parse_arrow_key(subject[len("arrow:"):])
        key = subject[len("arrow:"):]
        arrow_votes.append({"from": a, "to": b, "drawn": (a, b) in w.arrows, "flag": w.arrow_flags.get(key),
                            "tally": tally(w.votes.get(subject)), "votes": votes_public(w, subject)})
    for key, flag in sorted(w.arrow_flags.items()):
        a, b = parse_arrow_key(key)
        if f"arrow:{key}" not in w.votes:
            arrow_votes.append({"from": a, "to": b, "drawn": (a, b) in w.arrows, "flag": flag,
                                "tally": tally(None), "votes": []})
    facilitators = {m.id for m in w.facilitators()}
    decisions, stages = [], []
    for e in w.log:
        if e.get("kind") == "set_stage":
            stages.append({"from": e.get("stage_from"), "to": e.get("stage_to"), "at": e.get("at"),
                           "by": e.get("actor_name"), "reason": e.get("reason") or "",
                           "revision": e.get("revision")})
        if e.get("kind") in DECISION_KINDS and e.get("actor") in facilitators:
            decisions.append({"revision": e.get("revision"), "at": e.get("at"), "by": e.get("actor_name"),
                              "kind": e.get("kind"), "summary": e.get("summary"),
                              "undone": bool(e.get("undone"))})
    data = None
    if data_info:
        data = {k: data_info.get(k) for k in ("name", "rows", "columns", "bytes", "mapping", "uploaded_at",
                                               "profile")}
        data["sha256"] = data_sha256
    estimation = {name: _without_charts(attachments.get(key)) for name, key in ESTIMATION_KEYS.items()}
    state = w.to_state()
    state.pop("join_code", None)
    return {
        "format": BUNDLE_FORMAT,
        "version": BUNDLE_VERSION,
        "software": {"name": "arrowmoot", "version": __version__},
        "exported_at": exported_at,
        "session": {"id": w.id, "title": w.title, "stage": w.stage, "revision": w.revision,
                    "created": w.created},
        "graph": w.document(),
        "variables": variables,
        "members": [m.to_public() for m in w.members.values()],
        "proposals": [proposal_public(w, p) for p in sorted(w.proposals.values(), key=lambda p: p.id)],
        "arrow_votes": arrow_votes,
        "decisions": decisions,
        "stages": stages,
        "history": [_public_event(e) for e in w.log],
        "identification": analysis.get("analysis"),
        "identification_problem": analysis.get("problem"),
        "disputes": _without_timings(analysis.get("disputes")),
        "absent_arrows": analysis.get("absent"),
        "hidden_causes": statements_public(w)["statements"],
        "data": data,
        "estimation": estimation,
        "implication_tests": (estimation.get("estimate") or {}).get("checks"),
        "workshop": {"state": state, "events": copy.deepcopy(w.log)},
    }


# -- validation -----------------------------------------------------------------------------
def _need(obj: dict, key: str, kind: type | tuple, where: str, *, optional: bool = False) -> Any:
    if key not in obj or obj[key] is None:
        if optional:
            return None
        raise BundleError(f"the bundle is missing {where}'{key}'", code="bundle_missing_part")
    value = obj[key]
    if not isinstance(value, kind) or isinstance(value, bool) and kind in (int, float, (int, float)):
        names = {dict: "an object", list: "a list", str: "text", int: "a whole number",
                 (int, float): "a number", float: "a number"}
        raise BundleError(f"{where}'{key}' in the bundle must be {names.get(kind, 'valid')}",
                          code="bundle_bad_part")
    return value


def validate_bundle(obj: Any) -> dict[str, Any]:
    """Check a decoded bundle; return it unchanged or raise :class:`BundleError`."""
    if not isinstance(obj, dict):
        raise BundleError("a record bundle is a JSON object; this file holds something else",
                          code="bundle_not_object")
    fmt = obj.get("format")
    if fmt != BUNDLE_FORMAT:
        if fmt == "arrowmoot-graph":
            raise BundleError("this is a graph document, not a record bundle; import it as a diagram instead",
                              code="bundle_wrong_format")
        raise BundleError(f"this is not an Arrowmoot record bundle: 'format' is {fmt!r}, expected "
                          f"{BUNDLE_FORMAT!r}", code="bundle_wrong_format")
    version = obj.get("version")
    if isinstance(version, bool) or not isinstance(version, int):
        raise BundleError("the bundle has no whole-number 'version'", code="bundle_wrong_version")
    if version != BUNDLE_VERSION:
        if version > BUNDLE_VERSION:
            advice = "open it with a newer Arrowmoot"
        else:
            advice = "this version of Arrowmoot cannot convert it"
        raise BundleError(f"bundle version {version} is not the version this software reads "
                          f"({BUNDLE_VERSION}, Arrowmoot {__version__}); {advice}",
                          code="bundle_wrong_version")
    for part in REQUIRED_PARTS:
        _need(obj, part, dict, "")
    _need(obj["session"], "title", str, "session.")
    try:
        diagram = parse_document(obj["graph"])
    except DiagramError as exc:
        raise BundleError(f"the bundle's graph is not valid: {exc.message}", code="bundle_bad_graph") from None
    workshop = obj["workshop"]
    state = _need(workshop, "state", dict, "workshop.")
    events = _need(workshop, "events", list, "workshop.")
    for i, e in enumerate(events):
        if not isinstance(e, dict):
            raise BundleError(f"event {i + 1} in the bundle's history is not an object", code="bundle_bad_part")
        _need(e, "revision", int, f"event {i + 1}: ")
        _need(e, "at", (int, float), f"event {i + 1}: ")
        _need(e, "kind", str, f"event {i + 1}: ")
        _need(e, "summary", str, f"event {i + 1}: ")
    try:
        restored = Workshop.from_state({**state, "join_code": "CHECK1", "id": state.get("id") or "check"})
    except (KeyError, TypeError, ValueError, AttributeError) as exc:
        raise BundleError(f"the bundle's workshop state is damaged ({type(exc).__name__}: {exc})",
                          code="bundle_bad_state") from None
    try:
        restored_diagram = restored.diagram()
    except DiagramError as exc:
        raise BundleError(f"the bundle's workshop state holds an invalid diagram: {exc.message}",
                          code="bundle_bad_state") from None
    if restored_diagram.to_document() != diagram.to_document():
        raise BundleError("the bundle's graph and its workshop state disagree; the file was edited by hand",
                          code="bundle_inconsistent")
    from ..workshop.models import PROPOSAL_KINDS, PROPOSAL_STATUSES, ROLES, VOTE_CHOICES
    for m in restored.members.values():
        if not isinstance(m.id, str) or not isinstance(m.name, str) or m.role not in ROLES:
            raise BundleError("a member in the bundle's workshop has no valid id, name or role",
                              code="bundle_bad_state")
    for p in restored.proposals.values():
        if p.kind not in PROPOSAL_KINDS or p.status not in PROPOSAL_STATUSES or not isinstance(p.id, int):
            raise BundleError(f"proposal {p.id!r} in the bundle has an unknown kind or status",
                              code="bundle_bad_state")
    for subject, by in restored.votes.items():
        if any(v.choice not in VOTE_CHOICES for v in by.values()):
            raise BundleError(f"a vote on {subject} in the bundle is not one of {', '.join(VOTE_CHOICES)}",
                              code="bundle_bad_state")
    if not restored.members or not restored.facilitators():
        raise BundleError("the bundle's workshop has no facilitator", code="bundle_bad_state")
    from ..workshop.stages import STAGES
    if restored.stage not in STAGES:
        raise BundleError(f"the bundle's stage {restored.stage!r} is not one of {', '.join(STAGES)}",
                          code="bundle_bad_state")
    for key in ("estimation", "data"):
        if obj.get(key) is not None and not isinstance(obj[key], dict):
            raise BundleError(f"'{key}' in the bundle must be an object", code="bundle_bad_part")
    for name, value in (obj.get("estimation") or {}).items():
        if value is not None and not isinstance(value, dict):
            raise BundleError(f"estimation.{name} in the bundle must be an object", code="bundle_bad_part")
    est = (obj.get("estimation") or {}).get("estimate")
    if est:
        for key in ("estimate", "std_error"):
            value = est.get(key)
            if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
                raise BundleError(f"estimation.estimate.{key} in the bundle must be a number",
                                  code="bundle_bad_part")
        ci = est.get("ci")
        if not (isinstance(ci, list) and len(ci) == 2 and all(isinstance(c, (int, float)) for c in ci)):
            raise BundleError("estimation.estimate.ci in the bundle must be two numbers", code="bundle_bad_part")
    return obj


def restore_workshop(bundle: dict[str, Any], *, session_id: str, join_code: str) -> Workshop:
    """The bundle's workshop under a new id and join code, with its full event log."""
    state = dict(bundle["workshop"]["state"])
    state["id"], state["join_code"] = session_id, join_code
    return Workshop.from_state(copy.deepcopy(state), copy.deepcopy(bundle["workshop"]["events"]))


def attachments_from_bundle(bundle: dict[str, Any]) -> dict[str, Any]:
    """The session attachments an import restores, with the charts drawn again from the numbers."""
    from . import charts

    out: dict[str, Any] = {}
    data = bundle.get("data")
    if isinstance(data, dict):
        # The data file itself is not in the bundle: the analyst uploads it again
        # (its fingerprint is kept to check it is the same file).
        out[DATA_KEY] = {**{k: data.get(k) for k in ("name", "rows", "columns", "bytes", "mapping",
                                                     "uploaded_at", "profile")},
                         "stored": "data.csv", "sha256": data.get("sha256"), "restored_from_record": True}
    estimation = bundle.get("estimation") or {}
    for name, key in ESTIMATION_KEYS.items():
        value = estimation.get(name)
        if not isinstance(value, dict):
            continue
        value = copy.deepcopy(value)
        drawn: dict[str, str] = {}
        try:
            if name == "estimate" and (value.get("details") or {}).get("overlap"):
                drawn["overlap"] = charts.overlap_histogram(
                    value["details"]["overlap"], treated_label=f"{value.get('treatment')} = 1",
                    untreated_label=f"{value.get('treatment')} = 0")
            elif name == "sensitivity" and (value.get("regression") or {}).get("path"):
                drawn["hidden_cause"] = charts.hidden_cause_chart(value["regression"])
            elif name == "disputes" and value.get("rows"):
                rows = [{"label": r.get("label"), "estimate": r.get("estimate"),
                         "low": (r.get("ci") or [None, None])[0], "high": (r.get("ci") or [None, None])[1],
                         "problem": r.get("problem")} for r in value["rows"]]
                drawn_at = next((i for i, r in enumerate(value["rows"]) if r.get("as_drawn")), None)
                drawn["forest"] = charts.forest_plot(rows, highlight=drawn_at)
        except (KeyError, TypeError, ValueError, IndexError):
            drawn = {}
        value["charts"] = drawn
        out[key] = value
    return out
