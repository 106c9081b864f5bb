"""Dispute and absent-arrow analysis, checked against networkx d-separation and textbook cases."""

from __future__ import annotations

import itertools

import networkx as nx
from hypothesis import given, settings, strategies as st

from app.graph.document import parse_document
from app.graph.identification import analyze
from app.workshop.commands import apply_command
from app.graph.dag import Dag
from app.workshop.disputes import absent_arrow_report, analyse_workshop, dispute_report
from tests.helpers.disputes import dispute_document, dispute_workshop, nx_valid_adjustment


@st.composite
def dags(draw, max_nodes=8):
    n = draw(st.integers(min_value=2, max_value=max_nodes))
    names = [f"v{i}" for i in range(n)]
    pairs = [(names[i], names[j]) for i in range(n) for j in range(i + 1, n)]
    chosen = draw(st.lists(st.sampled_from(pairs), unique=True, max_size=len(pairs))) if pairs else []
    return names, chosen


@settings(max_examples=150, deadline=None)
@given(data=st.data(), graph=dags())
def test_d_separation_matches_networkx(data, graph):
    """Reference: networkx.is_d_separator (networkx 3.x)."""
    names, edges = graph
    x = data.draw(st.sampled_from(names))
    y = data.draw(st.sampled_from([n for n in names if n != x]))
    rest = [n for n in names if n not in (x, y)]
    z = set(data.draw(st.lists(st.sampled_from(rest), unique=True))) if rest else set()
    g = nx.DiGraph()
    g.add_nodes_from(names)
    g.add_edges_from(edges)
    assert Dag(names, edges).is_d_separated({x}, {y}, z) == nx.is_d_separator(g, {x}, {y}, z)


def test_confounder_arrow_is_decisive_and_robust_set_found():
    """The confounding triangle z -> x -> y, z -> y (Pearl 2009, Sec. 3.3.1, back-door criterion).

    Whether z -> y exists decides whether {} suffices; {z} is valid either way.
    """
    names, edges = ["x", "y", "z", "w"], [("z", "x"), ("x", "y"), ("z", "y"), ("w", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    apply_command(w, fac, {"type": "flag_arrow", "from": "z", "to": "y", "flag": "disputed"}, now=1)
    apply_command(w, fac, {"type": "flag_arrow", "from": "w", "to": "y", "flag": "disputed"}, now=1)
    report = analyse_workshop(w)["disputes"]
    by_pair = {tuple(i["pair"]): i for i in report["items"]}
    assert by_pair[("y", "z")]["decisive"] is True
    assert by_pair[("w", "y")]["decisive"] is False
    assert report["combinations_total"] == 4 and not report["sampled"]
    assert ["z"] in report["robust_sets"]
    assert [] not in report["robust_sets"]
    # every robust set is valid in every combination, by networkx
    for keep_zy, keep_wy in itertools.product([True, False], repeat=2):
        e = [("z", "x"), ("x", "y")] + ([("z", "y")] if keep_zy else []) + ([("w", "y")] if keep_wy else [])
        for s in report["robust_sets"]:
            assert nx_valid_adjustment(names, e, "x", "y", s)
    assert report["not_identified_count"] == 0


def test_combination_with_a_cycle_is_reported_not_crashed():
    names, edges = ["x", "y", "z"], [("z", "x"), ("x", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    apply_command(w, fac, {"type": "set_stage", "stage": "debating"}, now=1)
    apply_command(w, fac, {"type": "propose", "kind": "add", "from": "y", "to": "z"}, now=1)
    report = analyse_workshop(w)["disputes"]
    assert report["cycle_count"] == 1
    assert sorted(report["cycle_examples"][0]) == ["x", "y", "z"]
    item = report["items"][0]
    assert item["decisive"] is True
    assert "cycle" in item["effects"][1]["text"]


def test_unidentified_combinations_are_listed():
    """A latent confounder u of x and y: with u -> y drawn there is no adjustment set
    (and no front-door or instrument in this small graph)."""
    names, edges = ["x", "y", "u"], [("u", "x"), ("x", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges, latent=("u",)))
    apply_command(w, fac, {"type": "set_stage", "stage": "debating"}, now=1)
    apply_command(w, fac, {"type": "propose", "kind": "add", "from": "u", "to": "y"}, now=1)
    report = analyse_workshop(w)["disputes"]
    assert report["not_identified_count"] == 1
    assert report["not_identified"] == [[["u", "y"]]]
    assert report["robust_sets"] == []


def test_more_than_twelve_disputes_are_sampled_with_a_stated_seed():
    names = ["x", "y"] + [f"c{i}" for i in range(13)]
    edges = [("x", "y")] + [(f"c{i}", "y") for i in range(13)]
    diagram = parse_document(dispute_document(names, edges))
    items = [{"pair": sorted([f"c{i}", "y"]), "options": [[f"c{i}", "y"], None], "why": [], "current": 0}
             for i in range(13)]
    report = dispute_report(diagram, items, analyze(diagram))
    assert report["combinations_total"] == 2 ** 13
    assert report["sampled"] is True
    assert report["combinations_checked"] == 4096
    assert str(report["seed"]) in report["note"]
    assert all(not i["decisive"] for i in report["items"])


def _addable_arrows(names, edges):
    """Every arrow not drawn (either way) whose addition keeps the diagram acyclic, by networkx."""
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    linked = {frozenset(e) for e in edges}
    return [(u, v) for u, v in itertools.permutations(names, 2)
            if frozenset((u, v)) not in linked and not nx.has_path(g, v, u)]


@settings(max_examples=40, deadline=None)
@given(graph=dags(max_nodes=7))
def test_absent_arrows_match_networkx(graph):
    """Every arrow the report lists breaks a minimal set, and every unlisted one breaks none
    (each addition checked with the networkx adjustment criterion above)."""
    names, edges = graph
    x, y = names[0], names[-1]
    doc = dispute_document(names, edges, x=x, y=y)
    diagram = parse_document(doc)
    base = analyze(diagram)
    report = absent_arrow_report(diagram, base)
    if base["strategy"] != "adjustment" or not base["minimal_adjustment_sets"]:
        assert report["arrows"] == []
        return
    listed = {(a["from"], a["to"]) for a in report["arrows"]}
    for u, v in _addable_arrows(names, edges):
        new_edges = edges + [(u, v)]
        breaks = any(not nx_valid_adjustment(names, new_edges, x, y, s)
                     for s in base["minimal_adjustment_sets"])
        assert ((u, v) in listed) == breaks, (u, v)


def test_demo_diagram_disputes_run_on_the_engine_answer(demo_document):
    w, fac = dispute_workshop(demo_document)
    apply_command(w, fac, {"type": "vote", "from": "age", "to": "bike_lease", "choice": "disagree"}, now=1)
    result = analyse_workshop(w)
    assert result["disputes"]["count"] == 1
    assert result["disputes"]["items"][0]["pair"] == ["age", "bike_lease"]
    assert result["absent"]["checked"] > 0


def test_robust_set_found_beyond_the_candidates():
    """Two disputed confounder arrows that each change the minimal sets: c1 -> y and c2 -> y
    with c1 -> x, c2 -> x. As drawn the minimal set is {c1, c2}; dropping either arrow
    gives a smaller set. {c1, c2} is valid in all four combinations (back-door criterion,
    Pearl 2009, Sec. 3.3.1), checked here with networkx."""
    names = ["x", "y", "c1", "c2"]
    edges = [("x", "y"), ("c1", "x"), ("c2", "x"), ("c1", "y"), ("c2", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    for c in ("c1", "c2"):
        apply_command(w, fac, {"type": "flag_arrow", "from": c, "to": "y", "flag": "disputed"}, now=1)
    report = analyse_workshop(w)["disputes"]
    assert ["c1", "c2"] in report["robust_sets"]
    for keep1, keep2 in itertools.product([True, False], repeat=2):
        e = [("x", "y"), ("c1", "x"), ("c2", "x")] + ([("c1", "y")] if keep1 else []) + ([("c2", "y")] if keep2 else [])
        for s in report["robust_sets"]:
            assert nx_valid_adjustment(names, e, "x", "y", s)


def test_every_reported_robust_set_is_valid_in_every_combination():
    """x <- a -> m -> y, x <- b -> y, x -> y, with a -> y and b -> m disputed: whatever sets
    the report calls robust must pass the adjustment criterion in all four combinations
    (checked with networkx, not with the project's own code)."""
    names = ["x", "y", "a", "b", "m"]
    edges = [("a", "x"), ("a", "m"), ("m", "y"), ("b", "x"), ("b", "y"), ("x", "y"),
             ("a", "y"), ("b", "m")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    for a, b in (("a", "y"), ("b", "m")):
        apply_command(w, fac, {"type": "flag_arrow", "from": a, "to": b, "flag": "disputed"}, now=1)
    report = analyse_workshop(w)["disputes"]
    assert report["robust_sets"]
    for keep1, keep2 in itertools.product([True, False], repeat=2):
        e = [("a", "x"), ("a", "m"), ("m", "y"), ("b", "x"), ("b", "y"), ("x", "y")]
        e += ([("a", "y")] if keep1 else []) + ([("b", "m")] if keep2 else [])
        for s in report["robust_sets"]:
            assert nx_valid_adjustment(names, e, "x", "y", s), (s, e)


def _brute_common_minimal_sets(names, fixed, items, x, y, latent=()):
    """Every combination of the dispute options, every subset of the other variables, each
    checked with the networkx adjustment criterion above: the minimal sets valid in every
    acyclic combination. Exponential; small graphs only."""
    graphs = []
    for choice in itertools.product(*(i["options"] for i in items)):
        e = list(fixed) + [tuple(o) for o in choice if o is not None]
        g = nx.DiGraph(e)
        g.add_nodes_from(names)
        if nx.is_directed_acyclic_graph(g):
            graphs.append(e)
    rest = [n for n in names if n not in (x, y) and n not in latent]
    valid = [set(z) for k in range(len(rest) + 1) for z in itertools.combinations(rest, k)
             if graphs and all(nx_valid_adjustment(names, e, x, y, z, latent) for e in graphs)]
    return sorted((sorted(z) for z in valid if not any(o < z for o in valid)), key=lambda s: (len(s), s))


@st.composite
def disputed_dags(draw):
    names, edges = draw(dags(max_nodes=7))
    pairs = [(a, b) for i, a in enumerate(names) for b in names[i + 1:]]
    picked = draw(st.lists(st.sampled_from(pairs), unique=True, max_size=min(4, len(pairs))))
    drawn = set(edges)
    items = []
    for a, b in picked:
        current = [a, b] if (a, b) in drawn else None
        kind = draw(st.sampled_from(["presence", "direction", "three-way"]))
        options = {"presence": [[a, b], None], "direction": [[a, b], [b, a]],
                   "three-way": [[a, b], [b, a], None]}[kind]
        if current is None:
            options = [None] + [o for o in options if o is not None]
        items.append({"pair": [a, b], "options": options, "why": [], "current": 0})
    fixed = [e for e in edges if (e[0], e[1]) not in set(picked)]
    latent = draw(st.lists(st.sampled_from(names[1:-1]), unique=True, max_size=1)) if len(names) > 2 else []
    return names, fixed, items, latent


@settings(max_examples=120, deadline=None)
@given(case=disputed_dags())
def test_sets_valid_in_every_combination_are_exactly_the_brute_force_ones(case):
    """The listed sets equal, as a list, the minimal sets valid in every acyclic combination,
    found by brute force with networkx (both combinations and subsets enumerated), with
    disputes over presence, direction, or both."""
    names, fixed, items, latent = case
    x, y = names[0], names[-1]
    doc = dispute_document(names, fixed, x=x, y=y, latent=latent)
    diagram = parse_document(doc)
    report = dispute_report(diagram, items, analyze(diagram))
    expected = _brute_common_minimal_sets(names, fixed, items, x, y, latent)
    assert report["robust_complete"] is True
    assert report["robust_sets"] == expected, report["robust_note"]


def test_presence_disputes_beyond_the_exact_limit_still_get_exact_sets():
    """Thirteen disputed confounders c_i with c_i -> x and c_i -> y disputed: sampled for the
    unidentified combinations, yet the sets valid everywhere follow from the one diagram with
    every disputed arrow drawn: {c0..c12} (back-door criterion, Pearl 2009, Sec. 3.3.1)."""
    cs = [f"c{i}" for i in range(13)]
    names = ["x", "y"] + cs
    fixed = [("x", "y")] + [(c, "x") for c in cs]
    diagram = parse_document(dispute_document(names, fixed + [(c, "y") for c in cs]))
    items = [{"pair": sorted([c, "y"]), "options": [[c, "y"], None], "why": [], "current": 0} for c in cs]
    report = dispute_report(diagram, items, analyze(diagram))
    assert report["sampled"] is True
    assert report["robust_sets"] == [sorted(cs)]
    assert report["robust_complete"] and report["robust_method"] == "fullest"
    assert nx_valid_adjustment(names, fixed, "x", "y", cs)


def test_direction_dispute_needs_a_set_that_works_both_ways():
    """x <- m -> y and a -> y drawn, with the arrow between m and a disputed in direction.
    Either way {m} blocks every back-door path (x <- m -> y, and x <- m <- a -> y or
    x <- m -> a -> y), and {a} leaves x <- m -> y open (back-door criterion, Pearl 2009,
    Sec. 3.3.1); the brute-force networkx check agrees."""
    names = ["x", "y", "m", "a"]
    fixed = [("m", "x"), ("m", "y"), ("x", "y"), ("a", "y")]
    items = [{"pair": ["a", "m"], "options": [["a", "m"], ["m", "a"]], "why": [], "current": 0}]
    diagram = parse_document(dispute_document(names, fixed + [("a", "m")]))
    report = dispute_report(diagram, items, analyze(diagram))
    assert report["robust_method"] == "search"
    assert report["robust_sets"] == _brute_common_minimal_sets(names, fixed, items, "x", "y")
    assert report["robust_sets"] == [["m"]]


def _nx_front_door(names, edges, x, y, z, latent):
    """The front-door criterion (Pearl 2009, Definition 3.3.3) with networkx calls only."""
    z = set(z)
    if not z or z & {x, y} or z & set(latent):
        return False
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    cut = g.copy()
    cut.remove_nodes_from(z)
    if nx.has_path(cut, x, y):
        return False                                     # (i) every directed path meets z
    no_out_x = g.copy()
    no_out_x.remove_edges_from(list(g.out_edges(x)))
    if not nx.is_d_separator(no_out_x, {x}, z, set()):
        return False                                     # (ii) no open back-door path x to z
    no_out_z = g.copy()
    no_out_z.remove_edges_from([e for v in z for e in g.out_edges(v)])
    return nx.is_d_separator(no_out_z, z, {y}, {x})      # (iii) x blocks z's back doors to y


def test_front_door_answer_lists_the_arrows_that_would_break_it():
    """x -> m -> y with a hidden u -> x, u -> y (Pearl 2009, Sec. 3.3.2, the front-door
    example). Only two arrows can be added without a cycle, x -> y and u -> m, and each
    breaks the front-door set {m}."""
    names, edges = ["x", "m", "y", "u"], [("x", "m"), ("m", "y"), ("u", "x"), ("u", "y")]
    diagram = parse_document(dispute_document(names, edges, latent=("u",)))
    base = analyze(diagram)
    assert base["strategy"] == "front-door" and base["front_door_sets"] == [["m"]]
    report = absent_arrow_report(diagram, base)
    assert report["answer"] == "front-door sets"
    assert {(a["from"], a["to"]) for a in report["arrows"]} == {("x", "y"), ("u", "m")}
    assert all(a["severity"] == 3 for a in report["arrows"])


@st.composite
def front_door_dags(draw):
    """A planted front-door structure x -> m -> y, hidden u -> x, u -> y, plus random
    arrows among up to four more variables (topological order keeps it acyclic)."""
    extra = [f"w{i}" for i in range(draw(st.integers(0, 4)))]
    names = ["u", "x"] + extra[:2] + ["m"] + extra[2:] + ["y"]
    base = [("x", "m"), ("m", "y"), ("u", "x"), ("u", "y")]
    pairs = [(names[i], names[j]) for i in range(len(names)) for j in range(i + 1, len(names))
             if (names[i], names[j]) not in base and {names[i], names[j]} & set(extra)]
    more = draw(st.lists(st.sampled_from(pairs), unique=True, max_size=5)) if pairs else []
    return names, base + more


@settings(max_examples=60, deadline=None)
@given(graph=front_door_dags())
def test_absent_arrows_against_front_door_sets_match_networkx(graph):
    """When the answer is the front door, an arrow is listed exactly when adding it breaks
    one of the listed front-door sets, by the networkx front-door criterion above."""
    names, edges = graph
    diagram = parse_document(dispute_document(names, edges, latent=("u",)))
    base = analyze(diagram)
    report = absent_arrow_report(diagram, base)
    if base["strategy"] != "front-door":
        return
    listed = {(a["from"], a["to"]) for a in report["arrows"]}
    for u, v in _addable_arrows(names, edges):
        breaks = any(not _nx_front_door(names, edges + [(u, v)], "x", "y", s, ("u",))
                     for s in base["front_door_sets"])
        assert ((u, v) in listed) == breaks, (u, v)


def test_instrument_answer_lists_the_arrows_that_would_break_it():
    """z -> x -> y with a hidden u -> x, u -> y: z is an instrument (relevance, exclusion and
    no shared cause with y; Pearl 2009, Sec. 7.4.5; Hernan & Robins 2020, Ch. 16). The arrows
    that can be added without a cycle are z -> y, u -> z and z -> u; each breaks exclusion
    or independence, so each is listed, and the note says no adjustment set can appear."""
    names, edges = ["z", "x", "y", "u"], [("z", "x"), ("x", "y"), ("u", "x"), ("u", "y")]
    diagram = parse_document(dispute_document(names, edges, latent=("u",)))
    base = analyze(diagram)
    assert base["strategy"] == "instrument"
    report = absent_arrow_report(diagram, base)
    assert report["answer"] == "instruments"
    assert {(a["from"], a["to"]) for a in report["arrows"]} == {("z", "y"), ("u", "z"), ("z", "u")}
    assert "can never create one" in report["note"]
