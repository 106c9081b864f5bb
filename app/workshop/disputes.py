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

Sets valid in every combination: by fact (1) a set valid in a combination is valid
in every combination with fewer arrows, so it suffices to check the fullest
combinations, to which no disputed arrow can be added without a cycle. Disputes over
whether an arrow exists have one fullest combination (all of them drawn, when that
makes no cycle), and its minimal adjustment sets are the answer, exactly and however
many disputes there are. Disputes over direction give several; the sets valid in all
are found by growing, size by size, the minimal unions of one minimal set from each
(every valid set contains a minimal one), stopping when every larger candidate must
contain a set already found, or at a stated time budget.
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

__all__ = ["FastDag", "fullest_combinations", "common_adjustment_sets", "analysis_key", "analyse_workshop", "analyse_state", "slim_for_push", "dispute_report", "absent_arrow_report",
           "EXACT_LIMIT", "SAMPLE_SEED"]

EXACT_LIMIT = 4096
SAMPLE_SEED = 20240611
OTHER_STRATEGY_BUDGET_S = 0.4
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

    def for_engine(self):
        """The engine's question built from these pieces (no document to re-parse)."""
        from ..graph.identification import Question

        return Question(diagram=None, dag=self.dag, xs=frozenset(self.xs), ys=frozenset(self.ys),
                        observed=frozenset(self.observed), cn=frozenset(self.cn),
                        forb=frozenset(self.forb), pbd=self.back_door)

    def canonical(self) -> set[str]:
        return (self.dag.ancestors(self.xs | self.ys) & self.observed) - self.xs - self.ys - self.forb


FULLEST_CAP = 4096           # fullest combinations we are willing to intersect
COMMON_SEARCH_BUDGET_S = 0.5
UNION_CAP = 2000             # minimal unions of one minimal set per diagram, at most
ANCHOR_DIAGRAMS = 256      # fullest diagrams whose minimal sets are listed to guide the search
COMMON_VERIFY_LIMIT = 12     # a set found by shrinking is checked against all its subsets up to this size


def _reaches(children: dict[str, set[str]], start: str, goal: str) -> bool:
    """Is there a directed path start -> ... -> goal?"""
    if start == goal:
        return True
    seen, stack = {start}, [start]
    while stack:
        for c in children[stack.pop()]:
            if c == goal:
                return True
            if c not in seen:
                seen.add(c)
                stack.append(c)
    return False


def fullest_combinations(fixed_dag: FastDag, items: list[dict[str, Any]],
                         cap: int = FULLEST_CAP) -> tuple[list[list[tuple[str, str]]], bool]:
    """The acyclic combinations of the disputed options to which no disputed arrow
    can be added without a cycle (the maximal ones under inclusion of arrows), each as
    the list of arrows it adds to the undisputed ones. The flag is False when more than
    ``cap`` exist (the list is then incomplete).

    A combination that leaves dispute i out is maximal exactly when every arrow that
    dispute offers would close a cycle; if one arrow could be added, that alone gives a
    larger acyclic combination. So "no arrow" is only tried for disputes whose arrow
    could close a cycle at all (in the diagram with every disputed arrow drawn).
    """
    directed = [[(o[0], o[1]) for o in item["options"] if o is not None] for item in items]
    every = [e for options in directed for e in options]
    union_children = {n: set(c) for n, c in fixed_dag.children.items()}
    for a, b in every:
        union_children[a].add(b)
    may_skip = []
    for i, item in enumerate(items):
        if None not in item["options"] or not directed[i]:
            may_skip.append(None in item["options"])
            continue
        own = directed[i]  # disputes are per pair, so no other dispute or fixed arrow is one of these
        for a, b in own:
            union_children[a].discard(b)
        may_skip.append(any(_reaches(union_children, b, a) for a, b in own))
        for a, b in own:
            union_children[a].add(b)

    children = {n: set(c) for n, c in fixed_dag.children.items()}
    found: dict[frozenset, list[tuple[str, str]]] = {}
    chosen: list[tuple[str, str] | None] = []
    complete = True

    def leaf_is_maximal() -> bool:
        return all(all(_reaches(children, b, a) for a, b in directed[i])
                   for i, c in enumerate(chosen) if c is None)

    def walk(i: int) -> bool:
        nonlocal complete
        if i == len(items):
            if leaf_is_maximal():
                edges = [c for c in chosen if c is not None]
                found.setdefault(frozenset(edges), edges)
                if len(found) > cap:
                    complete = False
                    return False
            return True
        for a, b in directed[i]:
            if _reaches(children, b, a):
                continue  # would close a cycle
            fresh = b not in children[a]
            children[a].add(b)
            chosen.append((a, b))
            going = walk(i + 1)
            chosen.pop()
            if fresh:
                children[a].discard(b)
            if not going:
                return False
        if may_skip[i]:
            chosen.append(None)
            going = walk(i + 1)
            chosen.pop()
            if not going:
                return False
        return True

    walk(0)
    out = list(found.values())[:cap]
    return out, complete


def _minimal_unions(lists: list[list[frozenset]], cap: int) -> list[frozenset] | None:
    """The inclusion-minimal sets formed by taking one set from each list and joining
    them (None when more than ``cap`` would have to be kept)."""
    unions = [frozenset()]
    for options in lists:
        joined = {u | m for u in unions for m in options}
        ordered = sorted(joined, key=len)
        unions = []
        for u in ordered:
            if not any(v <= u for v in unions):
                unions.append(u)
                if len(unions) > cap:
                    return None
    return unions


def common_adjustment_sets(doc: dict[str, Any], fixed_dag: FastDag, items: list[dict[str, Any]],
                           xs: set[str], ys: set[str], observed: set[str]) -> dict[str, Any]:
    """The minimal adjustment sets that are valid in every combination of the disputes.

    Adding an arrow never turns an invalid set into a valid one (see the module notes),
    so a set valid in a combination is valid in every combination with fewer arrows.
    The sets valid everywhere are therefore exactly those valid in each of the fullest
    combinations (:func:`fullest_combinations`). With one fullest combination (disputes
    over whether an arrow exists, whose arrows together make no cycle) they are the
    minimal adjustment sets of that one diagram, listed by the engine. With several
    (disputes over an arrow's direction) the sets valid in all of them are searched
    by size, every set of each size in turn, within a time budget that the note states.
    """
    from ..graph.identification import Question, SET_CAP, minimal_adjustment_sets

    fullest, all_found = fullest_combinations(fixed_dag, items)
    if not all_found:
        return {"sets": [], "complete": False, "method": "too-many",
                "note": (f"The disputes' directions combine in more than {FULLEST_CAP} ways that cannot "
                         "all be drawn together, too many to intersect; no set is listed as valid "
                         "in every combination. Settle some direction disputes to get one.")}
    if not fullest:
        return {"sets": [], "complete": True, "method": "none",
                "note": "Every combination of the disputed arrows closes a cycle."}
    fixed_edges = [(a, b) for a in fixed_dag.children for b in fixed_dag.children[a]]

    def engine_sets(added: list[tuple[str, str]]) -> tuple[list[list[str]], bool]:
        d = dict(doc, arrows=[{"from": a, "to": b} for a, b in fixed_edges + added])
        return minimal_adjustment_sets(Question.of(parse_document(d)))

    if len(fullest) == 1:
        try:
            sets, more = engine_sets(fullest[0])
        except DiagramError as exc:  # not expected: the combination is acyclic
            return {"sets": [], "complete": False, "method": "error", "note": exc.message}
        drawn = len(fullest[0])
        note = ("Exact: adding an arrow never makes an invalid adjustment set valid, so a set is valid in "
                "every combination exactly when it is valid with "
                + ("every disputed arrow drawn" if drawn == len(items) else
                   f"the {drawn} disputed arrows that can be drawn together")
                + ("; these are all its minimal adjustment sets." if not more else
                   f"; these are the first {SET_CAP} of its minimal adjustment sets, and there are more."))
        if not sets:
            note = ("Exact: no adjustment set is valid in every combination (none is valid with "
                    + ("every disputed arrow drawn" if drawn == len(items) else "the fullest combination")
                    + ", and adding an arrow never makes an invalid set valid).")
        return {"sets": sets, "complete": not more, "method": "fullest", "note": note}

    questions = [_Question(fixed_dag.with_edges(edges), xs, ys, observed) for edges in fullest]
    forbidden = set().union(*(q.forb for q in questions))
    neighbours: dict[str, set[str]] = {n: set() for n in fixed_dag.children}
    for q in questions:
        for a, cs in q.dag.children.items():
            for b in cs:
                neighbours[a].add(b)
                neighbours[b].add(a)
    reach, stack = set(xs | ys), list(xs | ys)
    while stack:
        for m in neighbours[stack.pop()]:
            if m not in reach:
                reach.add(m)
                stack.append(m)
    pool = sorted((reach & observed) - xs - ys - forbidden)

    def valid_everywhere(zs: set[str]) -> bool:
        # Most sets fail somewhere; ask the diagram that refused the last one first.
        for i, q in enumerate(questions):
            if not q.is_valid(zs):
                if i:
                    questions.insert(0, questions.pop(i))
                return False
        return True

    # Within the variables allowed everywhere, a diagram has a valid set only if its
    # ancestors of X u Y among them form one (van der Zander et al. 2019, with the
    # allowed variables restricted): if one diagram has none, no set is valid everywhere.
    for q in questions:
        if not q.is_valid(q.dag.ancestors(xs | ys) & set(pool)):
            return {"sets": [], "complete": True, "method": "search",
                    "note": ("Exact: in at least one combination of the disputed directions no adjustment "
                             "set can be formed from the variables allowed in all of them, so none is "
                             "valid in every combination.")}

    # Every set valid in a diagram contains one of that diagram's minimal adjustment sets.
    # So a set valid everywhere contains one minimal set of each fullest diagram: the
    # search grows the minimal sets of one diagram (the anchor) and skips any set that
    # misses every minimal set of some other diagram whose list is complete.
    started = time.perf_counter()
    lists: list[list[frozenset]] = []
    for q in questions[:ANCHOR_DIAGRAMS]:
        if time.perf_counter() - started > COMMON_SEARCH_BUDGET_S / 2:
            break
        sets, more = minimal_adjustment_sets(q.for_engine())
        if not more:
            lists.append([frozenset(x) for x in sets])
    if any(not m for m in lists):
        return {"sets": [], "complete": True, "method": "search",
                "note": ("Exact: in at least one combination of the disputed directions no adjustment set "
                         "exists, so none is valid in every combination.")}
    lists.sort(key=len)
    pool_set = set(pool)
    lists = [[m for m in ms if m <= pool_set] for ms in lists]
    anchors = lists[0] if lists else [frozenset()]
    others = lists[1:]
    if len(lists) == len(fullest):
        # Every diagram's list is known: a set valid everywhere contains a union of one
        # minimal set from each, so grow the minimal such unions instead.
        unions = _minimal_unions(lists, UNION_CAP)
        if unions is not None:
            anchors, others = unions, []
    lowest = min((len(m) for m in anchors), default=0)

    found: list[frozenset] = []
    checked_size = lowest - 1  # every set of at most this many variables was checked
    out_of_time = False
    checks = 0
    exhaustive = False
    for size in range(lowest, len(pool) + 1):
        seen: set[frozenset] = set()
        covered = True  # does every set of this size (around an anchor) contain a found one?
        for anchor in anchors:
            if len(anchor) > size:
                continue
            for extra in itertools.combinations(sorted(pool_set - anchor), size - len(anchor)):
                checks += 1
                if checks % 128 == 0 and time.perf_counter() - started > COMMON_SEARCH_BUDGET_S:
                    out_of_time = True
                    break
                zs = anchor.union(extra)
                if zs in seen:
                    continue
                seen.add(zs)
                if any(f <= zs for f in found):
                    continue  # contains a valid set, so not minimal
                covered = False
                if not all(any(m <= zs for m in ms) for ms in others):
                    continue  # invalid in a diagram that has none of its minimal sets inside
                if valid_everywhere(set(zs)):
                    found.append(zs)
            if out_of_time:
                break
        if out_of_time or len(found) >= SET_CAP:
            break
        checked_size = size
        if covered:
            # Each larger set around an anchor contains one of this size, hence a found set.
            exhaustive = True
            break
    exhaustive = exhaustive or checked_size >= len(pool) or not anchors
    shrunk_note = ""
    if not exhaustive:
        # Beyond the searched sizes: shrink the largest set allowed everywhere, if it is valid.
        ancestors = set().union(*(q.dag.ancestors(xs | ys) for q in questions))
        big = set(pool) & ancestors
        if len(big) > checked_size and not any(f <= big for f in found) and valid_everywhere(big):
            small = set(big)
            for name in sorted(big):
                if valid_everywhere(small - {name}):
                    small -= {name}
            if len(small) <= COMMON_VERIFY_LIMIT and not any(f <= small for f in found):
                proper = (set(c) for k in range(checked_size + 1, len(small))
                          for c in itertools.combinations(sorted(small), k))
                if not any(valid_everywhere(c) for c in proper):
                    found.append(frozenset(small))
                    shrunk_note = (f" {{{', '.join(sorted(small))}}} was found beyond that by dropping "
                                   "variables from the largest set allowed everywhere; none of its "
                                   "subsets is valid everywhere.")
    sets = sorted((sorted(f) for f in found), key=lambda s: (len(s), s))
    k = len(questions)
    base = (f"Adding an arrow never makes an invalid adjustment set valid, so a set is valid in every "
            f"combination exactly when it is valid in each of the {k} fullest ones (the disputed directions "
            f"combined). ")
    if exhaustive:
        note = base + ("The search reached every candidate among the "
                       f"{len(pool)} variables allowed in all of them: the list is exact.")
        complete = True
    else:
        reach_text = (f"every set of at most {checked_size} variable(s)" if checked_size >= 0
                      else "no size completely")
        why = "its time budget" if out_of_time else f"{SET_CAP} sets"
        note = (base + f"The search stopped at {why} after checking {reach_text} of the {len(pool)} "
                "allowed; larger minimal sets may exist." + shrunk_note)
        complete = False
    return {"sets": sets, "complete": complete, "method": "search", "note": note}


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
        shown = "; ".join(_braced(s) for s in o_sets[:3]) or "none"
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

    not_identified: list[list] = []
    not_identified_count = 0
    cycle_count = 0
    cycle_examples: list[list[str]] = []
    other_unchecked = 0
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

    common = common_adjustment_sets(doc, fixed_dag, items, xs, ys, observed)
    robust = common["sets"]
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
        "robust_note": common["note"],
        "robust_complete": common["complete"],
        "robust_method": common["method"],
        "not_identified": not_identified,
        "not_identified_count": not_identified_count,
        "cycle_count": cycle_count,
        "cycle_examples": cycle_examples,
        "other_strategies_unchecked": other_unchecked,
        "elapsed_ms": round((time.perf_counter() - started) * 1000, 1),
    }


def _braced(names) -> str:
    return "{" + ", ".join(names) + "}"


def absent_arrow_report(diagram, base_result: dict) -> dict[str, Any]:
    """Arrows not drawn whose addition would change the answer: the minimal adjustment
    sets when adjustment works; the front-door sets or instruments when the effect is
    identified that way instead.

    Adding an arrow never makes an invalid adjustment set valid (module notes), so when
    no adjustment set exists none can appear; and a diagram with more arrows allows more
    distributions, so an effect that is not identified stays so.
    """
    from ..graph.identification import is_front_door_set, is_instrument

    xs, ys = set(diagram.treatment), set(diagram.outcome)
    observed = set(diagram.observed)
    names = [v.name for v in diagram.variables]
    edges = [(a.source, a.target) for a in diagram.arrows]
    strategy = base_result.get("strategy")
    sets = [set(s) for s in base_result.get("minimal_adjustment_sets", [])]
    front = [set(s) for s in base_result.get("front_door_sets", [])] if strategy == "front-door" else []
    ivs = [i for i in base_result.get("instruments", [])] if strategy == "instrument" else []
    if strategy == "adjustment" and sets:
        what, listed = "minimal adjustment sets", [sorted(s) for s in sets]
        relevant_extra = set().union(*sets)
    elif front:
        what, listed = "front-door sets", [sorted(s) for s in front]
        relevant_extra = set().union(*front)
    elif ivs:
        what = "instruments"
        listed = [[i["instrument"], *i["given"]] for i in ivs]
        relevant_extra = set().union(*(set(x) for x in listed))
    else:
        return {"arrows": [], "checked": 0, "answer": None,
                "note": "The effect is not identified, and adding arrows can never make it identified, "
                        "so no left-out arrow is listed."}
    dag = FastDag(names, edges)
    relevant = dag.ancestors(xs | ys | relevant_extra)
    linked = {frozenset(e) for e in edges}
    found = []
    checked = 0
    started = time.perf_counter()
    stopped_early = False

    def broken_by_arrow() -> list[list[str]]:
        if what == "minimal adjustment sets":
            q = _Question(dag, xs, ys, observed)
            return [sorted(s) for s in sets if not q.is_valid(s)]
        q = _Question(dag, xs, ys, observed).for_engine()
        if what == "front-door sets":
            return [sorted(s) for s in front if not is_front_door_set(q, s)]
        return [[i["instrument"], *i["given"]] for i in ivs
                if not is_instrument(q, i["instrument"], i["given"])]

    def describe(broken: list[list[str]]) -> tuple[str, int]:
        if what == "minimal adjustment sets":
            if len(broken) < len(sets):
                return ("breaks " + ", ".join(_braced(s) for s in broken) + "; other minimal sets still work", 1)
            q = _Question(dag, xs, ys, observed)
            if q.is_valid(q.canonical()):
                return "every current minimal set stops working; a different set would be needed", 2
            return "no adjustment set would remain: the effect would not be identified by adjustment", 3
        if what == "front-door sets":
            if len(broken) < len(front):
                return ("breaks the front-door set(s) " + ", ".join(_braced(s) for s in broken)
                        + "; others still work", 1)
            return "no listed front-door set would remain: the effect would lose its identification", 3
        shown = ", ".join(b[0] + (f" given {_braced(b[1:])}" if b[1:] else "") for b in broken)
        if len(broken) < len(ivs):
            return f"{shown} would stop being an instrument; others remain", 1
        return f"{shown} would stop being an instrument, and no listed instrument would remain", 3

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
            try:
                broken = broken_by_arrow()
                if broken:
                    text, severity = describe(broken)
                    found.append({"from": u, "to": v, "text": text, "severity": severity, "breaks": broken})
            finally:
                dag.parents[v].discard(u)
                dag.children[u].discard(v)
    found.sort(key=lambda f: (-f["severity"], f["from"], f["to"]))
    capped = len(found) > ABSENT_LIST_CAP
    note = (f"Checked {checked} arrow(s) that could be added without a cycle; {len(found)} would change "
            f"the {what}. Confirm each on purpose: leaving an arrow out is an assumption.")
    if what != "minimal adjustment sets":
        note += (" No adjustment set exists, and adding an arrow can never create one, so only the "
                 f"{what} are at stake.")
    if what == "minimal adjustment sets" and base_result.get("more_sets_exist"):
        note += " Only the listed minimal sets were checked."
    if stopped_early:
        note += f" The check stopped after {ABSENT_BUDGET_S:.0f} s; arrows into later variables were not checked."
    return {"arrows": found[:ABSENT_LIST_CAP], "capped": capped, "total": len(found), "answer": what,
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
