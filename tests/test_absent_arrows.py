"""Left-out arrows: the list follows the engine's own answer, checked by adding every addable
arrow and asking the engine again; instrument validity by networkx."""

from __future__ import annotations

import itertools

import networkx as nx
from hypothesis import given, settings, strategies as st

from app.graph.document import parse_document
from app.graph.identification import Question, answer_question
from app.workshop.disputes import absent_arrow_report


def _doc(names, edges, x, y, latent):
    return {"variables": [{"name": n, "latent": n in latent} for n in names],
            "arrows": [{"from": a, "to": b} for a, b in edges], "treatment": [x], "outcome": [y]}


def _answer(names, edges, x, y, latent):
    return answer_question(Question.of(parse_document(_doc(names, edges, x, y, latent))))


def _nx_is_instrument(names, edges, x, y, z, w):
    """Brito & Pearl (2002) conditional instrument with networkx calls only: W free of
    descendants of x, z d-separated from y given W once the causal arrows out of x are
    removed, z d-connected to x given W."""
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    if set(w) & (nx.descendants(g, x) | {x}) or z in nx.descendants(g, x):
        return False
    no_in = g.copy()
    no_in.remove_edges_from(list(g.in_edges(x)))
    no_out = g.copy()
    no_out.remove_edges_from(list(g.out_edges(x)))
    cn = nx.descendants(no_in, x) & (nx.ancestors(no_out, y) | {y})
    pbd = g.copy()
    pbd.remove_edges_from([(x, c) for c in g.successors(x) if c in cn])
    return nx.is_d_separator(pbd, {z}, {y}, set(w)) and not nx.is_d_separator(g, {z}, {x}, set(w))


def _changes(names, edges, new_edges, x, y, latent, base, after):
    """Does the engine's answer differ after adding an arrow? Its identification and
    strategy; for adjustment and front door the listed sets; for instruments the names,
    and whether each listed conditioning set still works (by networkx)."""
    if (base["identifiable"], base["strategy"]) != (after["identifiable"], after["strategy"]):
        return True
    if base["strategy"] == "adjustment":
        return base["minimal_adjustment_sets"] != after["minimal_adjustment_sets"]
    if base["strategy"] == "front-door":
        return base["front_door_sets"] != after["front_door_sets"]
    if base["strategy"] == "instrument":
        if {i["instrument"] for i in base["instruments"]} != {i["instrument"] for i in after["instruments"]}:
            return True
        return any(not _nx_is_instrument(names, new_edges, x, y, i["instrument"], i["given"])
                   for i in base["instruments"])
    return False


def _addable(names, edges):
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    linked = {frozenset(e) for e in edges}
    return [(u, v) for u, v in itertools.permutations(names, 2)
            if frozenset((u, v)) not in linked and not nx.has_path(g, v, u)]


@st.composite
def planted_dags(draw):
    """x -> y with one planted structure (a hidden confounder u of x and y alone, with a
    mediator m for a front door, or with a cause z of x for an instrument, or none), plus
    random arrows among up to four more variables in a fixed order (acyclic), some hidden."""
    kind = draw(st.sampled_from(["plain", "confounded", "front-door", "instrument"]))
    extra = [f"w{i}" for i in range(draw(st.integers(0, 4)))]
    core = {"plain": ["x", "y"], "confounded": ["u", "x", "y"], "front-door": ["u", "x", "m", "y"],
            "instrument": ["z", "u", "x", "y"]}[kind]
    base = {"plain": [("x", "y")], "confounded": [("u", "x"), ("u", "y"), ("x", "y")],
            "front-door": [("u", "x"), ("u", "y"), ("x", "m"), ("m", "y")],
            "instrument": [("z", "x"), ("u", "x"), ("u", "y"), ("x", "y")]}[kind]
    names = core[:-1] + extra + core[-1:]
    if kind == "front-door":
        names = ["u", "x"] + extra[:2] + ["m"] + extra[2:] + ["y"]
    pairs = [(names[i], names[j]) for i in range(len(names)) for j in range(i + 1, len(names))
             if (names[i], names[j]) not in base and {names[i], names[j]} & set(extra)]
    more = draw(st.lists(st.sampled_from(pairs), unique=True, max_size=6)) if pairs else []
    latent = {"u"} & set(names)
    latent |= set(draw(st.lists(st.sampled_from(extra), unique=True, max_size=1))) if extra else set()
    return names, base + more, latent


@settings(max_examples=250, deadline=None)
@given(case=planted_dags())
def test_absent_arrows_follow_the_engine_answer_for_every_addable_arrow(case):
    """Listed arrows are exactly the addable arrows after which the engine answers differently,
    whatever the answer: adjustment, front door, instrument, or not identified."""
    names, edges, latent = case
    base = _answer(names, edges, "x", "y", latent)
    report = absent_arrow_report(parse_document(_doc(names, edges, "x", "y", latent)), base)
    listed = {(a["from"], a["to"]) for a in report["arrows"]}
    for u, v in _addable(names, edges):
        new_edges = edges + [(u, v)]
        after = _answer(names, new_edges, "x", "y", latent)
        assert ((u, v) in listed) == _changes(names, edges, new_edges, "x", "y", latent, base, after), \
            (u, v, base["strategy"], after["strategy"])


def test_unconnected_variable_becomes_an_instrument():
    """A hidden u confounds x and y and w is unconnected: not identified, but w -> x would
    make w an instrument (relevance and exclusion; Pearl 2009, Sec. 7.4.5), and the engine
    then says so; the list includes it."""
    names, edges, latent = ["u", "w", "x", "y"], [("u", "x"), ("u", "y"), ("x", "y")], {"u"}
    diagram = parse_document(_doc(names, edges, "x", "y", latent))
    base = _answer(names, edges, "x", "y", latent)
    assert base["identifiable"] is False
    report = absent_arrow_report(diagram, base)
    by_arrow = {(a["from"], a["to"]): a for a in report["arrows"]}
    assert ("w", "x") in by_arrow
    assert _answer(names, edges + [("w", "x")], "x", "y", latent)["strategy"] == "instrument"
    assert by_arrow[("w", "x")]["text"].startswith("w would become an instrument")
    assert "can never make it identified" not in report["note"]


def test_instrument_that_needs_another_conditioning_set_is_described_as_such():
    """z -> x -> y with hidden u -> x, u -> y; z -> a -> y and b -> y, a and b measured: z is an
    instrument given {a}. Adding b -> a makes a a collider on z -> a <- b -> y, so {a} fails
    and {a, b} works (d-separation, checked with networkx): z stays an instrument with another
    conditioning set, and the text says that rather than that no instrument would remain."""
    names = ["z", "a", "b", "u", "x", "y"]
    edges = [("z", "x"), ("x", "y"), ("u", "x"), ("u", "y"), ("z", "a"), ("a", "y"), ("b", "y")]
    latent = {"u"}
    base = _answer(names, edges, "x", "y", latent)
    assert base["strategy"] == "instrument"
    assert {"instrument": "z", "given": ["a"]} in base["instruments"]
    assert not _nx_is_instrument(names, edges + [("b", "a")], "x", "y", "z", ["a"])
    assert _nx_is_instrument(names, edges + [("b", "a")], "x", "y", "z", ["a", "b"])
    report = absent_arrow_report(parse_document(_doc(names, edges, "x", "y", latent)), base)
    text = {(a["from"], a["to"]): a["text"] for a in report["arrows"]}[("b", "a")]
    assert "z would stay an instrument only given {a, b} instead of {a}" in text
    assert "no instrument would remain" not in text
