"""The workshop report: a readable, self-contained HTML page built from a record bundle.

:func:`report_context` turns a (validated) bundle into plain values for the
template; :func:`render_report` renders ``templates/report.html`` with
autoescaping on, so every name, label and reason a participant typed shows
as text. Figures are SVG drawn here from the bundle's numbers (never copied
from it). The page makes no external request: CSS and SVG are inline.
"""

from __future__ import annotations

import math
from datetime import datetime, timezone
from typing import Any

import jinja2

from .. import __version__
from ..estimation.samples import is_sample_digest
from ..graph.document import Diagram, parse_document
from ..graph.errors import DiagramError
from ..resources import resource_dir
from ..workshop.views import absent_marks_public
from ..workshop.voting import disputed_items
from . import charts
from .bundle import restore_workshop, validate_bundle
from .diagram_svg import diagram_svg, legend_svg

__all__ = ["report_context", "render_report", "plain_estimate", "SECTIONS"]

TEMPLATES_DIR = resource_dir("templates")
SECTIONS = [
    ("question", "The question"),
    ("diagram", "The agreed diagram"),
    ("adjustment", "What was adjusted for, and why"),
    ("estimate", "The estimate"),
    ("disputes", "Does the answer depend on the disputed arrows?"),
    ("implications", "Testing the diagram against the data"),
    ("validation", "Checks that could contradict the diagram"),
    ("sensitivity", "How strong would a hidden common cause have to be?"),
    ("decisions", "The decision record"),
    ("assumptions", "Assumptions in words"),
    ("cautions", "Cautions"),
]
DEFAULT_CAUTIONS = [
    "This is an observational estimate: it is causal only if the diagram is right, in particular "
    "if no unmeasured common cause of treatment and outcome is missing from it.",
    "The statistical model's assumptions (listed with the result) must also hold.",
    "It is not a substitute for a randomised trial or for professional judgement; decisions about "
    "people's health or livelihood need both.",
]

# What the diagram is called follows the stage the session was in: only a locked
# diagram was agreed by the room.
DIAGRAM_WORDS = {
    "drafting": {"heading": "The diagram in draft (not yet agreed)", "as": "the diagram as drafted",
                 "note": "The session was still in drafting: the room had not agreed this diagram."},
    "debating": {"heading": "The diagram under debate (not yet agreed)", "as": "the diagram as it stood",
                 "note": "The session was still debating: the room had not agreed this diagram."},
    "agreed": {"heading": "The agreed diagram", "as": "the diagram as agreed", "note": None},
    "estimation": {"heading": "The agreed diagram", "as": "the diagram as agreed", "note": None},
}


def diagram_words(stage: str | None) -> dict[str, str | None]:
    return DIAGRAM_WORDS.get(stage or "", DIAGRAM_WORDS["drafting"])


_env: jinja2.Environment | None = None


def _environment() -> jinja2.Environment:
    global _env
    if _env is None:
        _env = jinja2.Environment(loader=jinja2.FileSystemLoader(str(TEMPLATES_DIR)),
                                  autoescape=True,
                                  trim_blocks=True, lstrip_blocks=True)
    return _env


def when(at: Any) -> str:
    if not isinstance(at, (int, float)) or isinstance(at, bool) or not math.isfinite(at):
        return "—"
    return datetime.fromtimestamp(at, timezone.utc).strftime("%Y-%m-%d %H:%M UTC")


def num(value: Any, digits: int = 3) -> str:
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
        return "—"
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    decimals = max(0, digits - 1 - magnitude)
    text = f"{value:,.{decimals}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", "−")


def _p(value: Any) -> str:
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return "—"
    return "< 0.001" if value < 0.001 else f"{value:.3f}"


def _pct(value: Any) -> str:
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        return "—"
    return f"{100 * value:.1f}%"


def _names(names: Any) -> str:
    names = [str(n) for n in (names or [])]
    if not names:
        return "nothing"
    if len(names) == 1:
        return names[0]
    return ", ".join(names[:-1]) + " and " + names[-1]


def _label(diagram: Diagram, name: str) -> str:
    v = diagram.variable(name) if diagram.has_variable(name) else None
    if v is not None and v.label and v.label != name:
        return f"{v.label} ({name})"
    return name


def plain_estimate(est: dict, diagram: Diagram) -> str:
    """The estimate and its interval as one sentence a non-specialist can read."""
    value, (low, high) = est["estimate"], est["ci"]
    t, y = est.get("treatment") or "", est.get("outcome") or ""
    t_col = (est.get("columns") or {}).get(t, {})
    binary = t_col.get("kind") == "binary"
    compared = (f"{_label(diagram, t)}, comparing {t} = 1 with {t} = 0," if binary
                else f"one unit more of {_label(diagram, t)}")
    direction = "lower" if value < 0 else "higher"
    level = int(round(100 * (est.get("ci_level") or 0.95)))
    rows = est.get("n_used") or 0
    text = (f"On the {rows:,} rows used, {compared} goes with {_label(diagram, y)} about {num(abs(value))} "
            f"{direction} on average (the {level}% interval runs from {num(low)} to {num(high)}).")
    if low <= 0 <= high:
        text += " The interval includes zero: these data are consistent with no effect at all."
    else:
        text += (" The whole interval lies on one side of zero, so chance alone is an unlikely explanation; "
                 "whether it is an effect rests on the diagram being right.")
    return text


def _adjustment(diagram: Diagram, ident: dict | None, est: dict | None) -> dict:
    """The adjustment set used and the paths it blocks (recomputed by the engine)."""
    from ..graph.identification import analyze

    out: dict[str, Any] = {"set": None, "strategy": None, "blocked": [], "already": [], "causal": [],
                           "open": [], "note": None, "other_sets": [], "problem": None}
    strategy = (est or {}).get("strategy") or (ident or {}).get("strategy")
    out["strategy"] = strategy
    if est and est.get("strategy") == "adjustment":
        chosen = list(est.get("adjustment_set") or [])
    elif not est and ident and ident.get("strategy") == "adjustment" and ident.get("minimal_adjustment_sets"):
        chosen = list(ident["minimal_adjustment_sets"][0])
    else:
        chosen = None
    if est and est.get("strategy") in ("instrument", "front-door"):
        if est["strategy"] == "instrument":
            how = (f"with {est.get('instrument')} as an instrument"
                   + (f", given {_names(est.get('given'))}" if est.get("given") else ""))
        else:
            how = f"through the mediators {_names(est.get('mediators'))} (front-door)"
        note = f"No adjustment set works with the measured variables, so the effect was estimated {how}."
        if est.get("fixes"):
            note += (" Measuring one of these groups would allow adjustment: "
                     + "; ".join("{" + ", ".join(g) + "}" for g in est["fixes"]) + ".")
        out["note"] = note
    elif ident and ident.get("strategy") in ("instrument", "front-door") and not est:
        out["note"] = ident.get("summary")
    if ident:
        out["other_sets"] = [s for s in ident.get("minimal_adjustment_sets", []) if chosen is None or s != sorted(chosen)]
    if chosen is None or not diagram.treatment or not diagram.outcome:
        return out
    out["set"] = sorted(chosen)
    try:
        result = analyze(diagram, adjust=chosen)
    except DiagramError as exc:
        out["problem"] = exc.message
        return out
    check = result.get("adjustment_check") or {}
    out["valid"] = check.get("valid")
    out["reasons"] = check.get("reasons") or []
    for path in result.get("paths", []):
        item = {"text": path.get("text") or " – ".join(path["nodes"]), "why": path.get("why", "")}
        at = (path.get("blocked_at") or {})
        if path.get("causal"):
            out["causal"].append(item)
        elif path.get("open"):
            out["open"].append(item)
        elif at.get("reason") == "conditioned_non_collider":
            out["blocked"].append(item)
        else:
            out["already"].append(item)
    out["paths_total"] = result.get("paths_total")
    out["paths_capped"] = result.get("paths_capped")
    return out


def _safe_chart(build, *args, **kwargs) -> str | None:
    try:
        return build(*args, **kwargs)
    except Exception:  # a damaged number must not stop the report
        return None


def _forest(disputes: dict | None) -> str | None:
    rows_in = (disputes or {}).get("rows") or []
    if not rows_in:
        return None
    rows = []
    for r in rows_in:
        ci = r.get("ci") or [None, None]
        ok = all(isinstance(v, (int, float)) for v in (r.get("estimate"), ci[0], ci[1]))
        rows.append({"label": str(r.get("label", "")), "estimate": r.get("estimate") if ok else None,
                     "low": ci[0] if ok else None, "high": ci[1] if ok else None,
                     "problem": r.get("problem")})
    drawn = next((i for i, r in enumerate(rows_in) if r.get("as_drawn")), None)
    return _safe_chart(charts.forest_plot, rows, highlight=drawn)


def _shift_chart(sens: dict | None) -> str | None:
    reg = (sens or {}).get("regression")
    if not reg or not reg.get("path"):
        return None
    return _safe_chart(charts.hidden_cause_chart, reg)


def report_context(bundle: dict[str, Any]) -> dict[str, Any]:
    """Everything the report template shows, from a bundle (validated here)."""
    bundle = validate_bundle(bundle)
    diagram = parse_document(bundle["graph"])
    ident = bundle.get("identification") or None
    estimation = bundle.get("estimation") or {}
    est = estimation.get("estimate") or None
    workshop = restore_workshop(bundle, session_id=str(bundle["session"].get("id") or "record"),
                                join_code="RECORD")
    items = disputed_items(workshop)
    disputed_arrows = set()
    proposed = []
    for item in items:
        for opt in item["options"]:
            if opt is not None and diagram.has_arrow(*opt):
                disputed_arrows.add(tuple(opt))
    for p in bundle.get("proposals") or []:
        if p.get("kind") == "add" and p.get("status") in ("open", "disputed"):
            proposed.append((p.get("from"), p.get("to")))
    badges: dict[tuple, list[str]] = {}

    def tally_text(t: dict) -> str:
        return f"+{t.get('agree', 0)} −{t.get('disagree', 0)} ?{t.get('unsure', 0)}"

    for p in bundle.get("proposals") or []:
        if p.get("status") not in ("open", "disputed"):
            continue
        key = (p.get("from"), p.get("to"))
        word = {"add": "add?", "remove": "drop?", "reverse": "flip?"}.get(p.get("kind"), "?")
        text = f"#{p.get('id')} {word}"
        if (p.get("tally") or {}).get("total"):
            text += " " + tally_text(p["tally"])
        badges.setdefault(key, []).append(text)
    for av in bundle.get("arrow_votes") or []:
        if (av.get("tally") or {}).get("total"):
            badges.setdefault((av.get("from"), av.get("to")), []).append(tally_text(av["tally"]))
    badges = {key: "  ".join(texts) for key, texts in badges.items()}
    adjustment = _adjustment(diagram, ident, est)
    roles = (ident or {}).get("roles") or {}
    figure = diagram_svg(diagram, adjusted=adjustment["set"] or (), roles=roles, disputed=disputed_arrows,
                         proposed=proposed, badges=badges,
                         title=diagram_words(bundle["session"].get("stage"))["heading"])
    mapping = ((bundle.get("data") or {}).get("mapping") or (est or {}).get("mapping") or {})
    unmeasured = []
    for v in diagram.variables:
        if v.latent:
            unmeasured.append({"name": v.name, "label": v.label, "why": "drawn as unmeasured: nobody measured it"})
        elif bundle.get("data") and v.name not in mapping:
            unmeasured.append({"name": v.name, "label": v.label, "why": "no column of the data measures it"})
    absent = bundle.get("absent_arrows") or {}
    validation = estimation.get("validation") or None
    sensitivity = estimation.get("sensitivity") or None
    checks = (est or {}).get("checks") or bundle.get("implication_tests") or None
    members = {m.get("id"): m for m in bundle.get("members") or []}
    disputes_report = bundle.get("disputes") or None
    question = {
        "treatment": [_label(diagram, n) for n in diagram.treatment],
        "outcome": [_label(diagram, n) for n in diagram.outcome],
    }
    return {
        "title": bundle["session"]["title"],
        "session": bundle["session"],
        "software": bundle.get("software") or {},
        "rendered_with": __version__,
        "exported": when(bundle.get("exported_at")),
        "sections": [(key, diagram_words(bundle["session"].get("stage"))["heading"] if key == "diagram" else text)
                     for key, text in SECTIONS],
        "diagram_words": diagram_words(bundle["session"].get("stage")),
        "question": question,
        "diagram": diagram,
        "variables": bundle.get("variables") or [],
        "figure": figure,
        "legend": legend_svg(),
        "ident": ident,
        "ident_problem": bundle.get("identification_problem"),
        "adjustment": adjustment,
        "est": est,
        "plain": plain_estimate(est, diagram) if est else None,
        "forest": _forest(estimation.get("disputes")),
        "dispute_rows": (estimation.get("disputes") or {}).get("rows") or [],
        "disputes_report": disputes_report,
        "checks": checks,
        "validation": validation,
        "sample_data": is_sample_digest((bundle.get("data") or {}).get("sha256")),
        "sensitivity": sensitivity,
        "shift_chart": _shift_chart(sensitivity),
        "overlap": _safe_chart(charts.overlap_histogram, est["details"]["overlap"],
                               treated_label=f"{est['treatment']} = 1", untreated_label=f"{est['treatment']} = 0")
        if est and isinstance(est.get("details"), dict) and est["details"].get("overlap") else None,
        "proposals": bundle.get("proposals") or [],
        "arrow_votes": bundle.get("arrow_votes") or [],
        "decisions": bundle.get("decisions") or [],
        "stages": bundle.get("stages") or [],
        "members": list(members.values()),
        "absent": absent,
        "absent_marks": {(m["from"], m["to"]): m for m in absent_marks_public(workshop)},
        "unmeasured": unmeasured,
        "data": bundle.get("data"),
        "cautions": (est or {}).get("cautions") or DEFAULT_CAUTIONS,
        "when": when, "num": num, "p": _p, "pct": _pct, "names": _names,
        "label": lambda n: _label(diagram, n),
    }


def render_report(bundle: dict[str, Any]) -> str:
    """The report as one HTML string."""
    return _environment().get_template("report.html").render(**report_context(bundle))
