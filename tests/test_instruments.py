"""Conditional instruments: the engine's polynomial search against brute force with networkx."""

from __future__ import annotations

import itertools

import networkx as nx
from hypothesis import given, settings, strategies as st

from app.graph.document import parse_document
from app.graph.identification import Question, instruments


@st.composite
def hidden_dags(draw, max_nodes=8):
    """A random DAG over v0..vn in topological order with x = v1, y = the last node, a causal
    arrow x -> y drawn, and up to two hidden variables among the others."""
    n = draw(st.integers(min_value=3, max_value=max_nodes))
    names = [f"v{i}" for i in range(n)]
    x, y = names[1], names[-1]
    pairs = [(names[i], names[j]) for i in range(n) for j in range(i + 1, n) if (names[i], names[j]) != (x, y)]
    chosen = draw(st.lists(st.sampled_from(pairs), unique=True, max_size=len(pairs)))
    others = [v for v in names if v not in (x, y)]
    latent = draw(st.lists(st.sampled_from(others), unique=True, max_size=min(2, len(others))))
    return names, [(x, y)] + chosen, x, y, set(latent)


def _graphs(names, edges, x, y):
    """G and its proper back-door graph (G without the first arrow of every proper causal
    path; van der Zander, Liskiewicz & Textor 2019), with networkx calls only."""
    g = nx.DiGraph(edges)
    g.add_nodes_from(names)
    no_in = g.copy()
    no_in.remove_edges_from(list(g.in_edges(x)))
    no_out = g.copy()
    no_out.remove_edges_from(list(g.out_edges(x)))
    cn = nx.descendants(no_in, x) & (nx.ancestors(no_out, y) | {y})
    pbd = g.copy()
    pbd.remove_edges_from([(x, c) for c in g.successors(x) if c in cn])
    return g, pbd


def _nx_is_instrument(g, pbd, x, y, z, w):
    """Brito & Pearl (2002) conditional instrument, as in the engine's definition: W free of
    descendants of x, z d-separated from y given W once the causal arrows out of x are
    removed, and z d-connected to x given W (networkx.is_d_separator)."""
    return nx.is_d_separator(pbd, {z}, {y}, set(w)) and not nx.is_d_separator(g, {z}, {x}, set(w))


def _candidates(g, names, x, y, z, latent):
    de_x = nx.descendants(g, x) | {x}
    return [v for v in names if v not in (z, y) and v not in de_x and v not in latent]


def _doc(names, edges, x, y, latent):
    return {"variables": [{"name": n, "latent": n in latent} for n in names],
            "arrows": [{"from": a, "to": b} for a, b in edges], "treatment": [x], "outcome": [y]}


@settings(max_examples=200, deadline=None)
@given(case=hidden_dags())
def test_instruments_are_exactly_the_ancestral_ones_found_by_brute_force(case):
    """A variable is listed exactly when some conditioning set inside an(z u y) of the proper
    back-door graph makes it an instrument (every subset tried with networkx), and each listed
    conditioning set passes the definition."""
    names, edges, x, y, latent = case
    g, pbd = _graphs(names, edges, x, y)
    q = Question.of(parse_document(_doc(names, edges, x, y, latent)))
    listed = {i["instrument"]: i["given"] for i in instruments(q)}
    de_x = nx.descendants(g, x) | {x}
    for z in names:
        if z in (x, y) or z in latent or z in de_x:
            assert z not in listed
            continue
        area = nx.ancestors(pbd, z) | nx.ancestors(pbd, y) | {z, y}
        pool = [v for v in _candidates(g, names, x, y, z, latent) if v in area]
        ancestral = any(_nx_is_instrument(g, pbd, x, y, z, w)
                        for k in range(len(pool) + 1) for w in itertools.combinations(pool, k))
        assert (z in listed) == ancestral, (z, listed)
        if z in listed:
            assert _nx_is_instrument(g, pbd, x, y, z, listed[z])
            assert not set(listed[z]) & (de_x | latent | {y, z})


@settings(max_examples=200, deadline=None)
@given(case=hidden_dags(max_nodes=7))
def test_some_instrument_is_found_whenever_any_conditional_instrument_exists(case):
    """If any variable is an instrument given any allowed set (brute force over every subset),
    the engine lists at least one instrument: conditional instruments exist exactly when
    ancestral ones do (van der Zander, Textor & Liskiewicz 2015, recalled from memory)."""
    names, edges, x, y, latent = case
    g, pbd = _graphs(names, edges, x, y)
    q = Question.of(parse_document(_doc(names, edges, x, y, latent)))
    de_x = nx.descendants(g, x) | {x}
    exists = False
    for z in names:
        if z in (x, y) or z in latent or z in de_x:
            continue
        pool = _candidates(g, names, x, y, z, latent)
        if any(_nx_is_instrument(g, pbd, x, y, z, w)
               for k in range(len(pool) + 1) for w in itertools.combinations(pool, k)):
            exists = True
            break
    assert bool(instruments(q)) == exists
