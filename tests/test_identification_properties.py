"""Property-based checks of the engine with hypothesis.

The reference for the adjustment properties is the criterion itself
(Shpitser, VanderWeele & Robins 2010), evaluated through networkx's
``is_d_separator`` in the proper back-door graph (van der Zander et al. 2019,
Theorem 5), independently of how the engine lists the sets.
"""

from __future__ import annotations

import networkx as nx
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from app.graph.document import parse_document
from app.graph.errors import DiagramError
from app.graph.identification import Question, analyze, minimal_adjustment_sets

json_values = st.recursive(
    st.none() | st.booleans() | st.integers() | st.floats(allow_nan=True) | st.text(max_size=8),
    lambda children: st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=8), children, max_size=4),
    max_leaves=20,
)


@st.composite
def documents(draw):
    """Documents that are mostly well-formed, with plausible mistakes mixed in."""
    names = draw(st.lists(st.sampled_from(["a", "b", "c", "d", "", "a\x00", "e" * 70]), max_size=6))
    arrows = draw(st.lists(st.tuples(st.sampled_from(names or ["a"]), st.sampled_from(names or ["a"])), max_size=8))
    doc = {
        "variables": [{"name": n, "latent": draw(st.booleans())} for n in names],
        "arrows": [{"from": u, "to": v} for u, v in arrows],
        "treatment": draw(st.sampled_from(names or ["a"])),
        "outcome": draw(st.sampled_from(names or ["b"])),
    }
    if draw(st.booleans()):
        doc[draw(st.sampled_from(["variables", "arrows", "treatment", "version", "format"]))] = draw(json_values)
    return doc


@settings(max_examples=300, deadline=None)
@given(st.one_of(json_values, documents()))
def test_any_json_is_a_diagram_or_a_clear_error(value):
    try:
        diagram = parse_document(value)
    except DiagramError as err:
        assert err.message and "Traceback" not in err.message
        return
    try:
        analyze(diagram)
    except DiagramError as err:
        assert "treatment" in err.message or "outcome" in err.message


@st.composite
def questions(draw):
    n = draw(st.integers(4, 14))
    order = [f"v{i}" for i in range(n)]
    arrows = [(order[i], order[j]) for i in range(n) for j in range(i + 1, n) if draw(st.booleans()) and draw(st.booleans())]
    latent = {v for v in order if draw(st.integers(0, 9)) == 0}
    observed = [v for v in order if v not in latent]
    if len(observed) < 2:
        observed, latent = order, set()
    x = draw(st.sampled_from(observed))
    y = draw(st.sampled_from([v for v in observed if v != x]))
    return {
        "variables": [{"name": v, "latent": v in latent} for v in order],
        "arrows": [{"from": u, "to": v} for u, v in arrows],
        "treatment": x,
        "outcome": y,
    }


def _valid(graph, q, zs):
    if zs & q.forb or zs - q.observed:
        return False
    cut = graph.copy()
    cut.remove_edges_from([(x, w) for x in q.xs for w in list(graph.successors(x)) if w in q.cn])
    return nx.is_d_separator(cut, set(q.xs), set(q.ys), zs)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(questions())
def test_listed_sets_are_valid_and_minimal(doc):
    diagram = parse_document(doc)
    q = Question.of(diagram)
    graph = diagram.to_networkx()
    sets, _ = minimal_adjustment_sets(q)
    assert len({tuple(s) for s in sets}) == len(sets)
    for listed in sets:
        zs = set(listed)
        assert _valid(graph, q, zs)
        for z in zs:
            assert not _valid(graph, q, zs - {z})
    result = analyze(diagram)
    if result["optimal_adjustment_set"] is not None:
        assert _valid(graph, q, set(result["optimal_adjustment_set"]))
    assert bool(sets) == (result["strategy"] == "adjustment")
