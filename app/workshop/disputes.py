"""What the workshop shows after every edit: the analysis, which disputes matter, and
which left-out arrows would change the answer.

The algorithms live in :mod:`app.graph.disputes` and return data; this module turns
the workshop's disputed items into the engine's :class:`~app.graph.disputes.Dispute`
and builds the panel's JSON, with every English note written here, in one place.
"""

from __future__ import annotations

import json
import time
from typing import Any

from ..graph import disputes as engine
from ..graph.dag import Dag
from ..graph.disputes import (
    COMBINATION_BUDGET_S, EXACT_LIMIT, FULLEST_CAP, SAMPLE_SEED, ABSENT_BUDGET_S, AbsentArrow, AbsentArrows,
    Answer, CombinationCheck, CommonSets, Dispute, DisputeEffects, OptionEffect,
)
from ..graph.errors import DiagramError
from ..graph.identification import SET_CAP
from .models import Workshop
from .voting import disputed_items

__all__ = ["analysis_key", "analyse_workshop", "analyse_state", "dispute_report",
           "absent_arrow_report", "EXACT_LIMIT", "SAMPLE_SEED"]

ABSENT_LIST_CAP = 200
ANSWER_WORDS = {"adjustment": "minimal adjustment sets", "front-door": "front-door sets",
                "instrument": "instruments"}


def _braced(names) -> str:
    return "{" + ", ".join(names) + "}"


# ---------------------------------------------------------------------------
# Disputes
# ---------------------------------------------------------------------------

def _change_text(effect: OptionEffect, base: Answer) -> str:
    answer = effect.answer
    if effect.change == "identified":
        return "the effect becomes identified"
    if effect.change == "lost":
        return "the effect is no longer identified"
    if effect.change == "strategy":
        return f"identified by {answer.strategy} instead of {base.strategy}"
    if effect.change == "sets":
        shown = "; ".join(_braced(s) for s in answer.sets[:3]) or "none"
        return f"the minimal adjustment sets change to {shown}"
    return "same answer"


def _effect_json(effect: OptionEffect, base: Answer) -> dict[str, Any]:
    option = None if effect.option is None else list(effect.option)
    if effect.change == "current":
        return {"option": option, "current": True, "text": "the answer shown now",
                "identifiable": base.identifiable, "cycle": None}
    if effect.change == "cycle":
        cycle = effect.cycle
        return {"option": option, "current": False, "identifiable": None, "cycle": cycle,
                "text": "impossible: it makes a cycle " + " → ".join(cycle + cycle[:1])}
    return {"option": option, "current": False, "identifiable": effect.answer.identifiable,
            "cycle": None, "text": _change_text(effect, base),
            "minimal_adjustment_sets": [list(s) for s in effect.answer.sets],
            "strategy": effect.answer.strategy,
            "sets_still_valid": [list(s) for s in effect.still_valid or ()]}


def _item_json(entry: DisputeEffects, item: dict[str, Any], base: Answer) -> dict[str, Any]:
    return {"pair": item["pair"], "options": item["options"], "why": item["why"],
            "decisive": entry.decisive, "effects": [_effect_json(e, base) for e in entry.effects]}


def _common_note(c: CommonSets) -> str:
    if c.method == "too-many":
        return (f"The disputes' directions combine in more than {FULLEST_CAP} ways that cannot "
                "all be drawn together, too many to intersect; no set is listed as valid "
                "in every combination. Settle some direction disputes to get one.")
    if c.method == "none":
        return "Every combination of the disputed arrows closes a cycle."
    if c.method == "fullest":
        every = c.drawn == c.dispute_count
        if not c.sets:
            return ("Exact: no adjustment set is valid in every combination (none is valid with "
                    + ("every disputed arrow drawn" if every else "the fullest combination")
                    + ", and adding an arrow never makes an invalid set valid).")
        return ("Exact: adding an arrow never makes an invalid adjustment set valid, so a set is valid in "
                "every combination exactly when it is valid with "
                + ("every disputed arrow drawn" if every else
                   f"the {c.drawn} disputed arrows that can be drawn together")
                + ("; these are all its minimal adjustment sets." if not c.more else
                   f"; these are the first {SET_CAP} of its minimal adjustment sets, and there are more."))
    return _search_note(c)


def _search_note(c: CommonSets) -> str:
    if c.reason == "none-allowed":
        return ("Exact: in at least one combination of the disputed directions no adjustment "
                "set can be formed from the variables allowed in all of them, so none is "
                "valid in every combination.")
    if c.reason == "none-somewhere":
        return ("Exact: in at least one combination of the disputed directions no adjustment set "
                "exists, so none is valid in every combination.")
    base = (f"Adding an arrow never makes an invalid adjustment set valid, so a set is valid in every "
            f"combination exactly when it is valid in each of the {c.fullest_count} fullest ones (the "
            f"disputed directions combined). ")
    if c.reason == "verified":
        if not c.sets:
            return base + (f"Exact: no set is valid even in {c.consulted} of them, so none is valid in all.")
        return base + (f"Exact: these are the minimal sets valid in {c.consulted} of them, chosen where "
                       "earlier candidates failed, and each is valid in all of them; any set valid in all "
                       "contains one of these.")
    if c.complete:
        return base + ("The search reached every candidate among the "
                       f"{c.pool_size} variables allowed in all of them: the list is exact.")
    reach = (f"every set of at most {c.checked_size} variable(s)" if c.checked_size >= 0
             else "no size completely")
    why = "its time budget" if c.reason == "time" else f"{SET_CAP} sets"
    note = (base + f"The search stopped at {why} after checking {reach} of the {c.pool_size} "
            "allowed; larger minimal sets may exist.")
    if c.shrunk:
        note += (f" {_braced(c.shrunk)} was found beyond that by dropping variables from the largest "
                 "set allowed everywhere; none of its subsets is valid everywhere.")
    return note


def _combination_note(count: int, check: CombinationCheck) -> str:
    if check.stopped_early:
        return (f"{count} disputed arrow(s) give {check.total} combinations; the check stopped after "
                f"{COMBINATION_BUDGET_S:.0f} s with {check.checked} checked, so results cover those only.")
    if check.sampled:
        return (f"{count} disputed arrow(s) give {check.total} combinations; a random sample of "
                f"{check.checked} was checked (seed {check.seed}).")
    return f"{count} disputed arrow(s) give {check.total} combination(s); all were checked."


def dispute_report(diagram, items: list[dict[str, Any]], base_result: dict,
                   *, exact_limit: int = EXACT_LIMIT, seed: int = SAMPLE_SEED) -> dict[str, Any]:
    """Which disputed arrows change the answer, and what holds across every combination
    (:func:`app.graph.disputes.analyse_disputes`), as the panel shows it."""
    disputes = [Dispute.of(i["pair"], i["options"], i.get("current", 0)) for i in items]
    base = Answer.of(base_result)
    found = engine.analyse_disputes(Dag.from_diagram(diagram), disputes, diagram.treatment,
                                    diagram.outcome, diagram.observed, base,
                                    exact_limit=exact_limit, seed=seed)
    check, common = found.combinations, found.common
    robust = sorted(common.sets, key=lambda s: (len(s), s))
    return {
        "count": len(items),
        "combinations_total": check.total,
        "combinations_checked": check.checked,
        "sampled": check.sampled,
        "stopped_early": check.stopped_early,
        "seed": check.seed,
        "note": _combination_note(len(items), check),
        "items": [_item_json(e, i, base) for e, i in zip(found.items, items)],
        "robust_sets": robust,
        "robust_note": _common_note(common),
        "robust_complete": common.complete,
        "robust_method": common.method,
        "not_identified": [[None if o is None else list(o) for o in choice] for choice in check.not_identified],
        "not_identified_count": check.not_identified_count,
        "cycle_count": check.cycle_count,
        "cycle_examples": check.cycle_examples,
        "other_strategies_unchecked": check.other_unchecked,
        "elapsed_ms": found.elapsed_ms,
    }


# ---------------------------------------------------------------------------
# Absent arrows
# ---------------------------------------------------------------------------

def _instrument_text(item: list[str]) -> str:
    return item[0] + (f" given {_braced(item[1:])}" if item[1:] else "")


def _after_text(arrow: AbsentArrow) -> str:
    """What the engine would answer instead, once nothing of the current strategy is left."""
    if arrow.after == "front-door":
        return f"the effect would be identified by the front door through {_braced(arrow.after_items[0])} instead"
    if arrow.after == "instrument":
        return (f"{_instrument_text(arrow.after_items[0])} would identify it as an instrument instead "
                "(under extra assumptions)")
    return "the effect would not be identified"


def _instrument_changes(arrow: AbsentArrow) -> str:
    parts = [f"{_instrument_text(b)} would stop being an instrument" for b in arrow.breaks
             if b[0] not in {z for z, _, _ in arrow.regiven}]
    parts += [f"{z} would stay an instrument only given {_braced(new)} instead of {_braced(old)}"
              for z, old, new in arrow.regiven]
    parts += [f"{_instrument_text(g)} would become an instrument" for g in arrow.gained]
    return "; ".join(parts)


def _absent_text(answer: str, arrow: AbsentArrow) -> str:
    broken = arrow.breaks
    if arrow.consequence == "identified":
        return (f"{_instrument_text(arrow.gained[0])} would become an instrument, which identifies the "
                "effect under extra assumptions (for example a linear, homogeneous effect)")
    if answer == "instrument":
        tail = "; other instruments remain" if arrow.consequence == "instruments" else (
            "; no instrument would remain: the effect would not be identified")
        return _instrument_changes(arrow) + tail
    kind = "minimal adjustment set" if answer == "adjustment" else "front-door set"
    if arrow.consequence == "some":
        if answer == "adjustment":
            return "breaks " + ", ".join(_braced(s) for s in broken) + "; other minimal sets still work"
        return "breaks the front-door set(s) " + ", ".join(_braced(s) for s in broken) + "; others still work"
    if arrow.consequence == "new-set":
        return f"every current {kind} stops working; a different set would be needed"
    lead = "no adjustment set would remain" if answer == "adjustment" else "no front-door set would remain"
    return f"{lead}: {_after_text(arrow)}"


def _absent_note(found: AbsentArrows, what: str) -> str:
    if found.answer is None:
        note = (f"The effect is not identified. Checked {found.checked} arrow(s) that could be added "
                f"without a cycle; {len(found.arrows)} would make it identified, each by making a variable "
                "an instrument (no arrow can create an adjustment or front-door set). Confirm each on "
                "purpose: leaving an arrow out is an assumption.")
        if found.stopped_early:
            note += f" The check stopped after {ABSENT_BUDGET_S:.0f} s; arrows into later variables were not checked."
        return note
    note = (f"Checked {found.checked} arrow(s) that could be added without a cycle; {len(found.arrows)} "
            f"would change the {what}. Confirm each on purpose: leaving an arrow out is an assumption.")
    if found.answer in ("front-door", "instrument"):
        note += (" No adjustment set exists, and adding an arrow can never create one, so only the "
                 f"{what} are at stake.")
    if found.more_sets_exist:
        note += " Only the listed minimal sets were checked."
    if found.stopped_early:
        note += f" The check stopped after {ABSENT_BUDGET_S:.0f} s; arrows into later variables were not checked."
    return note


def absent_arrow_report(diagram, base_result: dict) -> dict[str, Any]:
    """Arrows not drawn whose addition would change the answer
    (:func:`app.graph.disputes.find_absent_arrows`), as the panel shows it."""
    found = engine.find_absent_arrows(Dag.from_diagram(diagram), diagram.treatment, diagram.outcome,
                                      diagram.observed, base_result)
    what = ANSWER_WORDS.get(found.answer, "")
    arrows = sorted(found.arrows, key=lambda a: (-a.severity, a.source, a.target))
    listed = [{"from": a.source, "to": a.target, "text": _absent_text(found.answer, a),
               "severity": a.severity, "breaks": a.breaks} for a in arrows[:ABSENT_LIST_CAP]]
    return {"arrows": listed, "capped": len(arrows) > ABSENT_LIST_CAP, "total": len(arrows),
            "answer": what if found.answer else None, "checked": found.checked,
            "stopped_early": found.stopped_early, "note": _absent_note(found, what)}


# ---------------------------------------------------------------------------
# The whole panel
# ---------------------------------------------------------------------------

def analysis_key(w: Workshop) -> str:
    """Everything the analysis depends on (positions and labels do not count)."""
    return json.dumps([
        sorted((v["name"], bool(v.get("latent"))) for v in w.variables),
        sorted(w.arrows), list(w.treatment), list(w.outcome),
        [[i["pair"], i["options"], i["why"]] for i in disputed_items(w)],
    ])


def analyse_state(state: dict[str, Any]) -> dict[str, Any]:
    """:func:`analyse_workshop` for a workshop's stored state (for a worker process)."""
    return analyse_workshop(Workshop.from_state(state))


def analyse_workshop(w: Workshop) -> dict[str, Any]:
    """Everything the side panel shows for the workshop's current diagram."""
    from ..graph.identification import analyze

    empty = {"analysis": None, "disputes": None, "absent": None}
    if not w.variables:
        return {**empty, "problem": "Add variables and arrows to see what the diagram implies."}
    if not w.treatment or not w.outcome:
        return {**empty, "problem": "Choose a treatment and an outcome (select a variable; the "
                                    "facilitator sets the question) to see what the diagram implies."}
    timings = {}
    try:
        diagram = w.diagram()
        t0 = time.perf_counter()
        result = analyze(diagram)
        timings["analysis_ms"] = round((time.perf_counter() - t0) * 1000, 1)
    except DiagramError as exc:
        return {**empty, "problem": exc.message}
    items = disputed_items(w)
    disputes = None
    if items:
        t0 = time.perf_counter()
        disputes = dispute_report(diagram, items, result)
        timings["disputes_ms"] = round((time.perf_counter() - t0) * 1000, 1)
    t0 = time.perf_counter()
    absent = absent_arrow_report(diagram, result)
    timings["absent_ms"] = round((time.perf_counter() - t0) * 1000, 1)
    return {"analysis": result, "problem": None, "disputes": disputes, "absent": absent,
            "timings": timings}
