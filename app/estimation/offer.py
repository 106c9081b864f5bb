"""Which estimators apply to this diagram and these columns, and why the others do not.

Read from the estimator table (:mod:`app.estimation.methods`): a method applies
when the diagram, over the mapped variables, identifies the effect by its
strategy and the mapped treatment and outcome columns meet its needs (a 0/1
column where it models one). The page offers the methods that apply and says,
for each of the others, what is missing.
"""

from __future__ import annotations

from typing import Mapping

from app.graph.document import Diagram
from app.graph.identification import analyze

from .methods import METHODS
from .planning import _observed_except

__all__ = ["method_offer"]

STRATEGY_WORDS = {
    "adjustment": "the diagram, with the variables measured, has no valid adjustment set",
    "instrument": "the diagram, with the variables measured, has no instrument for the treatment",
    "front-door": "the diagram, with the variables measured, has no front-door set of mediators",
}


def _strategies(diagram: Diagram, mapping: Mapping[str, str]) -> set[str]:
    unmeasured = set(diagram.names) - set(mapping)
    analysis = analyze(_observed_except(diagram, unmeasured))
    found = set()
    if analysis["strategy"] == "adjustment":
        found.add("adjustment")
    if analysis.get("instruments"):
        found.add("instrument")
    if analysis.get("front_door_sets"):
        found.add("front-door")
    return found


def method_offer(diagram: Diagram, mapping: Mapping[str, str], profile: list[dict]) -> list[dict]:
    """One entry per method: ``{"name", "label", "applies", "why"}`` (``why`` is None when it applies)."""
    kinds = {p["name"]: p.get("kind") for p in profile}
    if len(diagram.treatment) != 1 or len(diagram.outcome) != 1:
        return [{"name": m.name, "label": m.label, "applies": False,
                 "why": "the question needs one treatment and one outcome"} for m in METHODS]
    t, y = diagram.treatment[0], diagram.outcome[0]
    if t not in mapping or y not in mapping:
        missing = t if t not in mapping else y
        return [{"name": m.name, "label": m.label, "applies": False,
                 "why": f"{missing!r} has no column yet"} for m in METHODS]
    t_binary, y_binary = kinds.get(mapping[t]) == "binary", kinds.get(mapping[y]) == "binary"
    strategies = _strategies(diagram, mapping)
    out = []
    for m in METHODS:
        reasons = [] if m.strategy in strategies else [STRATEGY_WORDS[m.strategy]]
        needs = m.unmet_needs(t_binary=t_binary, y_binary=y_binary)
        if needs:
            reasons.append("it needs " + " and ".join(needs))
        out.append({"name": m.name, "label": m.label, "applies": not reasons,
                    "why": "; ".join(reasons) or None})
    return out
