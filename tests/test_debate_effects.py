"""What settling a dispute the other way does to the adjustment sets listed now.

Each dispute's alternatives carry the sets of today's list that stay valid with that
alternative; they are held to the adjustment criterion written out with networkx calls
(Shpitser, VanderWeele & Robins 2010; Perkovic et al. 2018, Definition 3.3).
"""

from __future__ import annotations

from hypothesis import given, settings, strategies as st

from app.graph.identification import analyze
from app.workshop.commands import apply_command
from app.workshop.disputes import analyse_workshop
from tests.helpers.disputes import dispute_document, dispute_workshop, nx_valid_adjustment


def test_removing_a_confounders_second_arrow_keeps_its_set_valid():
    """Confounding triangle z -> x -> y, z -> y (Pearl 2009, Sec. 3.3.1): without z -> y,
    { } becomes the minimal set and { z } is no longer minimal, yet still valid."""
    names, edges = ["x", "y", "z"], [("z", "x"), ("x", "y"), ("z", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    apply_command(w, fac, {"type": "flag_arrow", "from": "z", "to": "y", "flag": "disputed"}, now=1)
    item = analyse_workshop(w)["disputes"]["items"][0]
    without = next(e for e in item["effects"] if e["option"] is None)
    assert item["decisive"] is True
    assert without["minimal_adjustment_sets"] == [[]]
    assert without["sets_still_valid"] == [["z"]]
    assert without["strategy"] == "adjustment"


def test_an_arrow_that_makes_a_set_member_a_mediator_breaks_that_set():
    """Back door x <- u -> z -> y is blocked by { u } or { z }; the proposed x -> z puts z on
    a causal path, so { z } stops being valid while { u } still blocks the back door."""
    names, edges = ["x", "y", "u", "z"], [("x", "y"), ("u", "x"), ("u", "z"), ("z", "y")]
    w, fac = dispute_workshop(dispute_document(names, edges))
    apply_command(w, fac, {"type": "set_stage", "stage": "debating"}, now=1)
    apply_command(w, fac, {"type": "propose", "kind": "add", "from": "x", "to": "z"}, now=2)
    item = analyse_workshop(w)["disputes"]["items"][0]
    added = next(e for e in item["effects"] if e["option"] == ["x", "z"])
    with_arrow = edges + [("x", "z")]
    assert nx_valid_adjustment(names, with_arrow, "x", "y", ["z"]) is False
    assert nx_valid_adjustment(names, with_arrow, "x", "y", ["u"]) is True
    assert sorted(analyze(w.diagram())["minimal_adjustment_sets"]) == [["u"], ["z"]]
    assert added["sets_still_valid"] == [["u"]]


@st.composite
def disputed_diagrams(draw):
    n = draw(st.integers(min_value=3, max_value=7))
    names = [f"v{i}" for i in range(n)]
    pairs = [(names[i], names[j]) for i in range(n) for j in range(i + 1, n)]
    edges = draw(st.lists(st.sampled_from(pairs), unique=True, min_size=1, max_size=len(pairs)))
    x, y = draw(st.sampled_from([(a, b) for a, b in pairs]))
    disputed = draw(st.lists(st.sampled_from(edges), unique=True, min_size=1, max_size=min(3, len(edges))))
    return names, edges, x, y, disputed


@settings(max_examples=60, deadline=None)
@given(case=disputed_diagrams())
def test_sets_still_valid_match_networkx(case):
    names, edges, x, y, disputed = case
    w, fac = dispute_workshop(dispute_document(names, edges, x=x, y=y))
    for a, b in disputed:
        apply_command(w, fac, {"type": "flag_arrow", "from": a, "to": b, "flag": "disputed"}, now=1)
    result = analyse_workshop(w)
    if not result["disputes"]:
        return
    base = analyze(w.diagram())["minimal_adjustment_sets"]
    for item in result["disputes"]["items"]:
        for effect in item["effects"]:
            if effect["current"] or "sets_still_valid" not in effect:
                continue
            # this alternative, every other dispute as drawn
            pair = set(item["pair"])
            option_edges = [e for e in edges if set(e) != pair] + ([tuple(effect["option"])] if effect["option"] else [])
            expected = [list(s) for s in base if nx_valid_adjustment(names, option_edges, x, y, s)]
            assert effect["sets_still_valid"] == expected
