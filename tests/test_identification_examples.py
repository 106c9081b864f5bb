"""Worked examples from textbooks and papers; each test names its source."""

from __future__ import annotations


from app.graph.document import parse_document
from app.graph.identification import analyze

from tests.helpers.graph_cases import (
    bow_graph,
    butterfly_graph,
    conditional_instrument_graph,
    confounding_graph,
    document,
    front_door_graph,
    instrument_graph,
    m_bias_graph,
    pearl_figure_3_4,
)


def run(doc, adjust=None):
    return analyze(parse_document(doc), adjust=adjust)


def test_single_confounder_must_be_adjusted():
    """Pearl 2009, Section 3.3.1: the back-door path x <- c -> y is closed by {c}."""
    result = run(confounding_graph())
    assert result["identifiable"] and result["strategy"] == "adjustment"
    assert result["minimal_adjustment_sets"] == [["c"]]
    assert result["optimal_adjustment_set"] == ["c"]
    assert result["roles"]["c"] == ["confounder"]
    back_door = next(p for p in result["paths"] if not p["causal"])
    assert back_door == {**back_door, "nodes": ["x", "c", "y"], "open": True}
    unadjusted = run(confounding_graph(), adjust=[])
    assert unadjusted["adjustment_check"]["valid"] is False
    assert "x ← c → y" in unadjusted["adjustment_check"]["reasons"][0]


def test_m_bias_adjusting_for_the_collider_opens_a_path():
    """Greenland, Pearl & Robins 1999, Figure 6 (M-structure): the empty set is
    sufficient, and adjusting for the collider m alone opens x <- a -> m <- b -> y."""
    result = run(m_bias_graph(), adjust=["m"])
    assert result["minimal_adjustment_sets"] == [[]]
    assert result["adjustment_check"]["valid"] is False
    assert any("x ← a → m ← b → y" in r for r in result["adjustment_check"]["reasons"])
    assert "collider" in result["roles"]["m"]
    path = next(p for p in result["paths"] if p["nodes"] == ["x", "a", "m", "b", "y"])
    assert path["open"] and "collider m is adjusted for" in path["why"]
    plain = run(m_bias_graph())
    path = next(p for p in plain["paths"] if p["nodes"] == ["x", "a", "m", "b", "y"])
    assert not path["open"] and path["blocked_at"] == {"node": "m", "reason": "collider_not_conditioned"}
    assert run(m_bias_graph(), adjust=["m", "a"])["adjustment_check"]["valid"]


def test_butterfly_variable_is_collider_and_confounder():
    """Ding & Miratrix 2015, Figure 2: m must be adjusted for, together with a or b."""
    result = run(butterfly_graph())
    assert result["minimal_adjustment_sets"] == [["a", "m"], ["b", "m"]]
    assert {"collider", "confounder"} <= set(result["roles"]["m"])
    check = run(butterfly_graph(), adjust=["m"])["adjustment_check"]
    assert not check["valid"]


def test_pearl_figure_3_4_back_door_sets():
    """Pearl 2009, Figure 3.4 (edges from memory): {X3, X4} and {X4, X5} meet the
    back-door criterion, {X4} does not."""
    result = run(pearl_figure_3_4())
    sets = result["minimal_adjustment_sets"]
    assert ["X3", "X4"] in sets and ["X4", "X5"] in sets
    assert all(s != ["X4"] for s in sets)
    assert not run(pearl_figure_3_4(), adjust=["X4"])["adjustment_check"]["valid"]
    assert run(pearl_figure_3_4(), adjust=["X3", "X4"])["adjustment_check"]["valid"]
    # X6 is a mediator: forbidden in any adjustment set.
    check = run(pearl_figure_3_4(), adjust=["X3", "X4", "X6"])["adjustment_check"]
    assert not check["valid"] and any("X6 lies on a causal path" in r for r in check["reasons"])


def test_front_door_smoking_tar_cancer():
    """Pearl 1995 / Pearl 2009 Figure 3.5: no adjustment set over measured variables,
    identified through tar by the front-door criterion."""
    result = run(front_door_graph())
    assert result["minimal_adjustment_sets"] == []
    assert result["optimal_adjustment_set"] is None
    assert result["strategy"] == "front-door"
    assert result["front_door_sets"] == [["tar"]]
    check = run(front_door_graph(), adjust=["genotype"])["adjustment_check"]
    assert any("genotype is unmeasured" in r for r in check["reasons"])


def test_instrument():
    """Pearl 2009, Figure 5.9(a) (from memory): z affects y only through x."""
    result = run(instrument_graph())
    assert result["strategy"] == "instrument"
    assert result["instruments"] == [{"instrument": "z", "given": []}]
    assert "instrument" in result["roles"]["z"]


def test_conditional_instrument():
    """Brito & Pearl 2002 (conditional instrument, from memory): z is an instrument only given w."""
    result = run(conditional_instrument_graph())
    assert result["strategy"] == "instrument"
    assert {"instrument": "z", "given": ["w"]} in result["instruments"]


def test_bow_pattern_is_not_identified():
    """Pearl 2009, Section 3.5 (the bow pattern): not identifiable."""
    result = run(bow_graph())
    assert result["identifiable"] is False and result["strategy"] is None
    assert result["minimal_adjustment_sets"] == [] and result["front_door_sets"] == []
    assert result["instruments"] == []
    assert "not identified" in result["summary"]


def test_optimal_set_adds_a_precision_variable():
    """Henckel, Perkovic & Maathuis 2022, Section 3 (idea illustrated from memory): a
    parent of the outcome that the treatment does not affect belongs in the O-set."""
    doc = document([("c", "x"), ("c", "y"), ("x", "y"), ("p", "y"), ("i", "x")], "x", "y")
    result = run(doc)
    assert result["minimal_adjustment_sets"] == [["c"]]
    assert result["optimal_adjustment_set"] == ["c", "p"]


def test_descendant_of_mediator_is_forbidden():
    """Shpitser, VanderWeele & Robins 2010, Section 3: descendants of nodes on causal
    paths may not be adjusted for, even when they block nothing."""
    doc = document([("x", "m"), ("m", "y"), ("m", "d")], "x", "y")
    check = run(doc, adjust=["d"])["adjustment_check"]
    assert not check["valid"]
    assert any("d is a descendant of m" in r for r in check["reasons"])


def test_paths_classification_and_count():
    result = run(butterfly_graph(), adjust=["m"])
    assert result["paths_total"] == len(result["paths"]) == 5
    by_nodes = {tuple(p["nodes"]): p for p in result["paths"]}
    assert by_nodes[("x", "y")]["causal"] and by_nodes[("x", "y")]["open"]
    assert by_nodes[("x", "m", "y")]["blocked_at"]["reason"] == "conditioned_non_collider"
    opened = by_nodes[("x", "a", "m", "b", "y")]
    assert opened["open"] and opened["opened_colliders"] == [{"node": "m", "via": "m"}]


def test_collider_opened_by_descendant():
    doc = document([("x", "c"), ("y", "c"), ("c", "d")], "x", "y")
    result = run(doc, adjust=["d"])
    (path,) = result["paths"]
    assert path["open"] and "opened by adjusting for its descendant d" in path["why"]


def test_sets_of_treatments_and_outcomes():
    """Perkovic et al. 2018: the criterion applies to sets of treatments and outcomes."""
    doc = document([("c", "x1"), ("c", "y1"), ("x1", "y1"), ("x2", "y2"), ("d", "x2"), ("d", "y1")],
                   ["x1", "x2"], ["y1", "y2"])
    result = run(doc)
    assert result["minimal_adjustment_sets"] == [["c", "d"]]


def test_implications_are_local_markov_statements():
    """Pearl 2009, Theorem 1.2.7 (local Markov): a chain a -> b -> c implies a and c
    are independent given b."""
    result = run(document([("a", "b"), ("b", "c")], "a", "c"))
    assert result["implications"] == [
        {"x": "a", "y": "c", "given": ["b"], "text": "a and c independent given {b}"}]


def test_implications_with_unmeasured_parent_use_measured_separator():
    doc = document([("u", "a"), ("u", "b"), ("a", "c"), ("b", "d"), ("c", "d")], "a", "d", latent=["u"])
    listed = run(doc)["implications"]
    assert ("b", "c", ["a"]) in [(i["x"], i["y"], i["given"]) for i in listed]
    assert all("u" not in i["given"] for i in listed)
    assert not any({i["x"], i["y"]} == {"a", "b"} for i in listed)  # dependent through u
