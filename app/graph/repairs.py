"""Single-arrow changes that would reconcile a diagram with what the data show.

Two questions, both answered by trying every single arrow on the diagram:

:func:`arrows_linking`
    The data contradict an independence ``x ⊥ y | given`` that the diagram
    implies. Which one added arrow would make ``x`` and ``y`` d-connected
    given ``given``, so that the diagram no longer implies it? One arrow always
    suffices (an arrow between ``x`` and ``y`` themselves), so the smallest
    sets of added arrows are exactly these single arrows.
:func:`arrows_splitting_sets`
    Two adjustment sets that the diagram calls valid give different
    estimates. Which one added (or reversed) arrow would leave exactly one of
    them valid? Removing an arrow never makes a valid set invalid (it can only
    block paths and shrink the descendants of the treatment), so additions and
    reversals are the only single changes that explain a disagreement.

Only arrows that keep the diagram acyclic are tried. D-separation between
``A`` and ``B`` given ``Z`` depends only on the ancestors of ``A ∪ B ∪ Z``
(Lauritzen, Dawid, Larsen & Leimer 1990, the moral-graph criterion), and
adding ``u → v`` changes that ancestral set only when ``v`` is already in it,
so only arrows into those ancestors are tried. Each trial is one linear-time
separation check (:meth:`~app.graph.dag.Dag.is_d_separated`), so a diagram
with ``n`` variables costs ``O(n² (n + m))``.

Examples
--------
>>> from app.graph.dag import Dag
>>> dag = Dag("atn", [("a", "t"), ("a", "n")])  # t ← a → n: t ⊥ n | a
>>> arrows_linking(dag, "t", "n", {"a"})
[('n', 't'), ('t', 'n')]

References
----------
Lauritzen SL, Dawid AP, Larsen BN, Leimer H-G (1990). Independence properties
  of directed Markov fields. Networks 20(5).
Shpitser I, VanderWeele T, Robins J (2010). On the validity of covariate
  adjustment for estimating causal effects. UAI (the adjustment criterion).
"""

from __future__ import annotations

from dataclasses import replace
from typing import Iterable

from .dag import Dag
from .document import Arrow, Diagram
from .identification import Question, check_adjustment

__all__ = ["arrows_linking", "arrows_splitting_sets"]


def _acyclic_additions(dag: Dag, targets: set[str]) -> list[tuple[str, str]]:
    """Arrows u → v (v in ``targets``) that are not drawn and keep the graph acyclic."""
    out = []
    for v in sorted(targets):
        below = dag.descendants([v])
        for u in sorted(dag.nodes):
            if u != v and u not in below and u not in dag.parents[v]:
                out.append((u, v))
    return out


def _acyclic_reversals(dag: Dag, touching: set[str]) -> list[tuple[str, str]]:
    """Drawn arrows u → v (one end in ``touching``) whose reversal keeps the graph acyclic."""
    out = []
    for u, v in sorted(dag.edges()):
        if u in touching or v in touching:
            if v not in dag.without_edges([(u, v)]).descendants([u]):
                out.append((u, v))
    return out


def arrows_linking(dag: Dag, x: str, y: str, given: Iterable[str]) -> list[tuple[str, str]]:
    """Single added arrows after which ``x`` and ``y`` are d-connected given ``given``.

    Returns the arrows as ``(source, target)`` pairs, sorted, direct arrows
    between ``x`` and ``y`` included. Empty when ``x`` and ``y`` are already
    d-connected.
    """
    given = set(given)
    if not dag.is_d_separated({x}, {y}, given):
        return []
    area = dag.ancestors({x, y} | given)
    return sorted(
        (u, v) for u, v in _acyclic_additions(dag, area)
        if not dag.with_edges([(u, v)]).is_d_separated({x}, {y}, given)
    )


def arrows_splitting_sets(diagram: Diagram, first: Iterable[str], second: Iterable[str]) -> list[dict]:
    """Single arrow changes that leave exactly one of two adjustment sets valid.

    ``diagram`` carries the question (one treatment, one outcome) and marks
    unmeasured variables latent. Returns ``{"arrow": [u, v], "change":
    "added" | "reversed", "still_valid": "first" | "second", "reason": str}``
    for each change; ``reason`` says why the other set fails after it (an open
    non-causal path, or a variable that becomes affected by the treatment).
    """
    first, second = sorted(set(first)), sorted(set(second))
    q = Question.of(diagram)
    area = q.dag.ancestors(q.xs | q.ys | set(first) | set(second))
    trials = [((u, v), "added") for u, v in _acyclic_additions(q.dag, area)]
    trials += [((u, v), "reversed") for u, v in _acyclic_reversals(q.dag, area)]
    out = []
    for (u, v), change in trials:
        arrows = [a for a in diagram.arrows if change == "added" or (a.source, a.target) != (u, v)]
        arrows.append(Arrow(u, v) if change == "added" else Arrow(v, u))
        variant = Question.of(replace(diagram, arrows=tuple(arrows)))
        a, b = check_adjustment(variant, first), check_adjustment(variant, second)
        if a["valid"] != b["valid"]:
            failing = b if a["valid"] else a
            out.append({"arrow": [u, v] if change == "added" else [v, u], "change": change,
                        "still_valid": "first" if a["valid"] else "second",
                        "reason": failing["reasons"][0]})
    return out
