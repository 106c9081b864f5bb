"""What the workshop shows after every edit: the analysis, which disputes matter, and
which left-out arrows would change the answer.

Terms (for treatment set X and outcome set Y in a DAG G)

cn(X, Y)    nodes other than X on proper causal paths: de(X) in G without arrows
            into X, minus X, intersected with an(Y) in G without arrows out of X.
forb(X, Y)  de(cn) u X; an adjustment set may not contain these
            (Perkovic, Textor, Kalisch & Maathuis 2018, Definition 3.3).
valid Z     Z n forb = {} and Z d-separates X and Y in the proper back-door graph
            (G without the first arrow of every proper causal path)
            (van der Zander, Liskiewicz & Textor 2019, Theorem 5).
Z0          (an(X u Y) n observed) minus (X u Y u forb). Some adjustment set exists
            iff Z0 is valid (van der Zander et al. 2019, the constructive set
            "Adjust(X, Y)" with the restriction to measured variables).

Two facts make the checks cheap. (1) Adding an arrow only adds paths, opens
more colliders and forbids more variables; it never blocks an open path. So a
set that is invalid stays invalid, and hence the minimal adjustment sets change after adding an
arrow exactly when one of them becomes invalid. (2) For d-separation given Z
only the ancestors of X u Y u Z matter (Lauritzen, Dawid, Larsen & Leimer 1990),
so an arrow u -> v with v outside an(X u Y u Z) cannot change whether Z is valid.

Dispute combinations: up to 4096 exactly (12 two-way disputes); beyond that a
random sample of 4096 with a fixed, stated seed.
"""

from __future__ import annotations

import itertools
import json
import random
import time
from typing import Any, Iterable

from ..graph.document import parse_document
from ..graph.errors import DiagramError
from .models import Workshop
from .voting import disputed_items
from ..graph.dag import Dag

__all__ = ["FastDag", "analysis_key", "analyse_workshop", "analyse_state", "slim_for_push", "dispute_report", "absent_arrow_report",
           "EXACT_LIMIT", "SAMPLE_SEED"]

EXACT_LIMIT = 4096
SAMPLE_SEED = 20240611
OTHER_STRATEGY_BUDGET_S = 1.5
ABSENT_LIST_CAP = 200
COMBINATION_BUDGET_S = 8.0   # a huge diagram stops here and says how far it got
ABSENT_BUDGET_S = 4.0
MINIMISE_BUDGET = 4000  # combinations x variables we are willing to re-check to shrink a set


# The engine's DAG: adjacency sets shared between the graphs of the combinations.
FastDag = Dag


class _Question:
    """Per-graph pieces of the adjustment criterion for one question."""

    def __init__(self, dag: FastDag, xs: set[str], ys: set[str], observed: set[str]):
        self.dag, self.xs, self.ys = dag, xs, ys
        self.cn = dag.causal_nodes(xs, ys)
        self.forb = dag.descendants(self.cn) | xs
        removed = [(x, c) for x in xs for c in dag.children[x] if c in self.cn]
        self.back_door = dag.without_edges(removed)  # the proper back-door graph
        self.observed = observed

    def is_valid(self, zs: set[str]) -> bool:
        if zs & self.forb or not zs <= self.observed:
            return False
        return self.back_door.is_d_separated(self.xs, self.ys, zs)

    def canonical(self) -> set[str]:
        return (self.dag.ancestors(self.xs | self.ys) & self.observed) - self.xs - self.ys - self.forb


def analysis_key(w: Workshop) -> str:
    """Everything the analysis depends on (positions and labels do not count)."""
    return json.dumps([
        sorted((v["name"], bool(v.get("latent"))) for v in w.variables),
        sorted(w.arrows), list(w.treatment), list(w.outcome),
        [[i["pair"], i["options"], i["why"]] for i in disputed_items(w)],
    ])


def _identify(diagram) -> dict:
    """The engine's identification answer (the lighter call when the engine has one)."""
    from ..graph import identification

    light = getattr(identification, "identify_effect", None)
    if light is not None:
        return light(diagram)
    return identification.analyze(diagram)


def _summary_of(result: dict) -> tuple[bool, str | None, list[list[str]]]:
    return (bool(result.get("identifiable")), result.get("strategy"),
            [list(s) for s in result.get("minimal_adjustment_sets", [])])


def _option_edges(option) -> list[tuple[str, str]]:
    return [] if option is None else [(option[0], option[1])]


def _describe_change(base: tuple, other: tuple) -> str:
    b_id, b_strategy, b_sets = base
    o_id, o_strategy, o_sets = other
    if b_id != o_id:
        return "the effect becomes identified" if o_id else "the effect is no longer identified"
    if b_strategy != o_strategy:
        return f"identified by {o_strategy} instead of {b_strategy}"
    if b_sets != o_sets:
        shown = "; ".join("{" + ", ".join(s) + "}" for s in o_sets[:3]) or "none"
        return f"the minimal adjustment sets change to {shown}"
    return "same answer"


def dispute_report(diagram, items: list[dict[str, Any]], base_result: dict,
                   *, exact_limit: int = EXACT_LIMIT, seed: int = SAMPLE_SEED) -> dict[str, Any]:
    """Which disputed arrows change the answer, and what holds across every combination."""
    xs, ys = set(diagram.treatment), set(diagram.outcome)
    observed = set(diagram.observed)
    pairs = [frozenset(i["pair"]) for i in items]
    fixed = [(a.source, a.target) for a in diagram.arrows
             if frozenset((a.source, a.target)) not in pairs]
    names = [v.name for v in diagram.variables]
    base = _summary_of(base_result)
    doc = diagram.to_document()

    def build(choice: list) -> tuple[list[tuple[str, str]], Any]:
        edges = list(fixed)
        for option in choice:
            edges.extend(_option_edges(option))
        return edges, None

    engine_cache: dict[frozenset, tuple] = {}

    def engine(edges: list[tuple[str, str]]):
        key = frozenset(edges)
        if key not in engine_cache:
            d = dict(doc, arrows=[{"from": a, "to": b} for a, b in edges])
            try:
                engine_cache[key] = ("ok", _summary_of(_identify(parse_document(d))))
            except DiagramError as exc:
                engine_cache[key] = ("error", getattr(exc, "cycle", None) or exc.message)
        return engine_cache[key]

    # One dispute at a time, the others as drawn.
    current = [i["options"][i.get("current", 0)] for i in items]
    report_items = []
    candidates: list[frozenset] = [frozenset(s) for s in base[2]]
    if base_result.get("optimal_adjustment_set"):
        candidates.append(frozenset(base_result["optimal_adjustment_set"]))
    for index, item in enumerate(items):
        effects = []
        decisive = False
        for o_index, option in enumerate(item["options"]):
            choice = list(current)
            choice[index] = option
            is_current = o_index == item.get("current", 0)
            if is_current:
                effects.append({"option": option, "current": True, "text": "the answer shown now",
                                "identifiable": base[0], "cycle": None})
                continue
            status, value = engine(build(choice)[0])
            if status == "error":
                cycle = value if isinstance(value, list) else None
                effects.append({"option": option, "current": False, "identifiable": None,
                                "cycle": cycle,
                                "text": "impossible: it makes a cycle " + " → ".join((cycle or []) + (cycle or [])[:1])
                                if cycle else f"not a valid diagram: {value}"})
                decisive = True
                continue
            candidates.extend(frozenset(s) for s in value[2])
            change = _describe_change(base, value)
            if change != "same answer":
                decisive = True
            effects.append({"option": option, "current": False, "identifiable": value[0],
                            "cycle": None, "text": change, "minimal_adjustment_sets": value[2]})
        report_items.append({"pair": item["pair"], "options": item["options"], "why": item["why"],
                             "decisive": decisive, "effects": effects})

    # Every combination (or a stated sample).
    sizes = [len(i["options"]) for i in items]
    total = 1
    for s in sizes:
        total *= s
    if total <= exact_limit:
        combos: Iterable[tuple[int, ...]] = itertools.product(*(range(s) for s in sizes))
        sampled = False
        checked_total = total
    else:
        rng = random.Random(seed)
        picked = {tuple(rng.randrange(s) for s in sizes) for _ in range(exact_limit * 2)}
        combos = sorted(picked)[:exact_limit]
        sampled = True
        checked_total = len(combos)

    unique_candidates = list(dict.fromkeys(candidates))
    survivors = {c: True for c in unique_candidates}
    not_identified: list[list] = []
    not_identified_count = 0
    cycle_count = 0
    cycle_examples: list[list[str]] = []
    other_unchecked = 0
    acyclic_graphs: list[tuple[FastDag, _Question]] = []
    started = time.perf_counter()
    engine_time = 0.0
    fixed_dag = FastDag(names, fixed)
    done = 0
    stopped_early = False
    for combo in combos:
        if done and time.perf_counter() - started > COMBINATION_BUDGET_S:
            stopped_early = True
            break
        done += 1
        choice = [items[i]["options"][k] for i, k in enumerate(combo)]
        added = [e for option in choice for e in _option_edges(option)]
        dag = fixed_dag.with_edges(added)
        cycle = dag.find_cycle()
        if cycle:
            cycle_count += 1
            if len(cycle_examples) < 3 and cycle not in cycle_examples:
                cycle_examples.append(cycle)
            continue
        q = _Question(dag, xs, ys, observed)
        acyclic_graphs.append((dag, q))
        for c in unique_candidates:
            if survivors[c] and not q.is_valid(set(c)):
                survivors[c] = False
        if q.is_valid(q.canonical()):
            continue
        # No adjustment set here; ask the engine about the other strategies, within a budget.
        identified = None
        if engine_time < OTHER_STRATEGY_BUDGET_S:
            t0 = time.perf_counter()
            status, value = engine(fixed + added)
            engine_time += time.perf_counter() - t0
            if status == "ok":
                identified = value[0]
        else:
            other_unchecked += 1
        if identified:
            continue
        not_identified_count += 1
        if len(not_identified) < 50:
            not_identified.append(choice)

    robust = [sorted(c) for c in unique_candidates if survivors[c]]
    note_extra = ""
    if not robust and acyclic_graphs:
        # Try the largest set that avoids every combination's forbidden variables.
        common = set(observed) - xs - ys
        for _, q in acyclic_graphs:
            common -= q.forb
        ancestors = set()
        for dag, _ in acyclic_graphs:
            ancestors |= dag.ancestors(xs | ys)
        common &= ancestors
        if all(q.is_valid(common) for _, q in acyclic_graphs):
            robust = [sorted(common)]
            note_extra = (" The set shown is the largest one allowed in every combination;"
                          " smaller ones may exist.")
            if len(acyclic_graphs) * len(common) <= MINIMISE_BUDGET:
                smaller = set(common)
                for name in sorted(common):
                    trial = smaller - {name}
                    if all(q.is_valid(trial) for _, q in acyclic_graphs):
                        smaller = trial
                if smaller != common:
                    robust.insert(0, sorted(smaller))
                    note_extra = (" The first set was found by dropping variables one at a time from"
                                  " the largest set allowed in every combination, while it stayed valid"
                                  " in all of them; other sets may exist.")
    robust.sort(key=lambda s: (len(s), s))
    count = len(items)
    if stopped_early:
        checked_total = done
    if sampled:
        note = (f"{count} disputed arrow(s) give {total} combinations; a random sample of "
                f"{checked_total} was checked (seed {seed}).")
    else:
        note = f"{count} disputed arrow(s) give {total} combination(s); all were checked."
    if stopped_early:
        note = (f"{count} disputed arrow(s) give {total} combinations; the check stopped after "
                f"{COMBINATION_BUDGET_S:.0f} s with {done} checked, so results cover those only.")
    return {
        "count": count,
        "combinations_total": total,
        "combinations_checked": checked_total,
        "sampled": sampled,
        "stopped_early": stopped_early,
        "seed": seed if sampled else None,
        "note": note,
        "items": report_items,
        "robust_sets": robust,
        "robust_note": (f"Checked {len(unique_candidates)} candidate set(s): the minimal and optimal sets "
                        "of the diagram as drawn and of each single change." + note_extra),
        "not_identified": not_identified,
        "not_identified_count": not_identified_count,
        "cycle_count": cycle_count,
        "cycle_examples": cycle_examples,
        "other_strategies_unchecked": other_unchecked,
        "elapsed_ms": round((time.perf_counter() - started) * 1000, 1),
    }


def absent_arrow_report(diagram, base_result: dict) -> dict[str, Any]:
    """Arrows not drawn whose addition would change the adjustment answer."""
    xs, ys = set(diagram.treatment), set(diagram.outcome)
    observed = set(diagram.observed)
    names = [v.name for v in diagram.variables]
    edges = [(a.source, a.target) for a in diagram.arrows]
    sets = [set(s) for s in base_result.get("minimal_adjustment_sets", [])]
    if base_result.get("strategy") != "adjustment" or not sets:
        return {"arrows": [], "checked": 0,
                "note": "The effect is not identified by adjustment, and adding arrows can never make an "
                        "adjustment set work, so no left-out arrow is listed."}
    dag = FastDag(names, edges)
    relevant = dag.ancestors(xs | ys | set().union(*sets))
    linked = {frozenset(e) for e in edges}
    found = []
    checked = 0
    started = time.perf_counter()
    stopped_early = False
    for v in sorted(relevant):
        if time.perf_counter() - started > ABSENT_BUDGET_S:
            stopped_early = True
            break
        descendants_of_v = dag.descendants([v])
        for u in names:
            if u == v or frozenset((u, v)) in linked or u in descendants_of_v:
                continue  # drawn already, or the new arrow would close a cycle
            checked += 1
            if checked % 64 == 0 and time.perf_counter() - started > ABSENT_BUDGET_S:
                stopped_early = True
                break
            dag.parents[v].add(u)
            dag.children[u].add(v)
            q = _Question(dag, xs, ys, observed)
            broken = [sorted(s) for s in sets if not q.is_valid(s)]
            if broken:
                if len(broken) < len(sets):
                    text = ("breaks " + ", ".join("{" + ", ".join(s) + "}" for s in broken)
                            + "; other minimal sets still work")
                    severity = 1
                elif q.is_valid(q.canonical()):
                    text = "every current minimal set stops working; a different set would be needed"
                    severity = 2
                else:
                    text = "no adjustment set would remain: the effect would not be identified by adjustment"
                    severity = 3
                found.append({"from": u, "to": v, "text": text, "severity": severity, "breaks": broken})
            dag.parents[v].discard(u)
            dag.children[u].discard(v)
    found.sort(key=lambda f: (-f["severity"], f["from"], f["to"]))
    capped = len(found) > ABSENT_LIST_CAP
    note = (f"Checked {checked} arrow(s) that could be added without a cycle; {len(found)} would change "
            "the minimal adjustment sets. Confirm each on purpose: leaving an arrow out is an assumption.")
    if base_result.get("more_sets_exist"):
        note += " Only the listed minimal sets were checked."
    if stopped_early:
        note += f" The check stopped after {ABSENT_BUDGET_S:.0f} s; arrows into later variables were not checked."
    return {"arrows": found[:ABSENT_LIST_CAP], "capped": capped, "total": len(found),
            "checked": checked, "stopped_early": stopped_early, "note": note}


PUSH_PATHS_PER_KIND = 60
PUSH_IMPLICATIONS = 60
PUSH_ABSENT = 40


def slim_for_push(payload: dict[str, Any]) -> dict[str, Any]:
    """The analysis as pushed to every client: long lists cut to what the panel shows.

    Totals stay, and ``"trimmed": true`` tells the page the full lists are at
    GET /api/sessions/{id}/analysis.
    """
    analysis = payload.get("analysis")
    out = dict(payload)
    trimmed = False
    if analysis:
        analysis = dict(analysis)
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
            analysis["implications"], analysis["implications_capped"], trimmed = imps[:PUSH_IMPLICATIONS], True, True
        out["analysis"] = analysis
    absent = payload.get("absent")
    if absent and len(absent.get("arrows", [])) > PUSH_ABSENT:
        out["absent"] = dict(absent, arrows=absent["arrows"][:PUSH_ABSENT], capped=True)
        trimmed = True
    out["trimmed"] = trimmed
    return out


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
