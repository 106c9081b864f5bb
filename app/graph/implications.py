"""Implied independencies: what a diagram says measured data could contradict.

Unmeasured variables are first projected out (the latent projection of
Verma 1993): measured a -> b when a reaches b through unmeasured variables
only, and a <-> b when some unmeasured variable reaches both that way. The
implications are then the ordered local Markov statements of Richardson
(2003, Section 3): walking the measured variables in a topological order,
each variable u is independent of every earlier variable outside its Markov
blanket given that blanket,

    mb(u, A) = (district of u in A, minus u)  u  parents of that district,

where A is the set of variables up to and including u (an ancestral set) and
a district is a component of the <-> edges. With nothing unmeasured this is
the familiar local Markov basis: u is independent of earlier non-parents
given its parents.

An earlier variable v that is in the blanket but not adjacent to u may still
be separable from u: it is exactly when v is outside mb(u, an({u, v})), the
blanket in the smaller ancestral set (otherwise an inducing path joins them;
Richardson & Spirtes 2002, Theorem 4.2). Those pairs get that smaller
blanket. So every non-adjacent measured pair that some measured set
separates appears once, with a separating set, and no other pair does.

Cost: O(n + m) for the projection's directed part per measured variable
reached through unmeasured ones, near-linear union-find for districts, and
one statement per listed pair.
"""

from __future__ import annotations

from .dag import Dag

__all__ = ["implied_independencies", "latent_projection", "independence_text"]


def latent_projection(dag: Dag, observed: frozenset[str] | set[str]):
    """Return (parents, siblings): projected directed parents and bidirected neighbours."""
    parents: dict[str, set[str]] = {v: set() for v in observed}
    for a in observed:
        stack = list(dag.children[a])
        seen = set(stack)
        while stack:
            w = stack.pop()
            if w in observed:
                parents[w].add(a)
                continue
            for c in dag.children[w]:
                if c not in seen:
                    seen.add(c)
                    stack.append(c)
    reach: dict[str, set[str]] = {}  # latent -> measured variables it reaches via latents
    for hidden in dag.nodes:
        if hidden in observed:
            continue
        stack, seen, hit = list(dag.children[hidden]), set(dag.children[hidden]), set()
        while stack:
            w = stack.pop()
            if w in observed:
                hit.add(w)
                continue
            for c in dag.children[w]:
                if c not in seen:
                    seen.add(c)
                    stack.append(c)
        if len(hit) > 1:
            reach[hidden] = hit
    siblings: dict[str, set[str]] = {v: set() for v in observed}
    for hit in reach.values():
        for a in hit:
            siblings[a] |= hit - {a}
    return parents, siblings


def _blanket(u: str, area: set[str], parents, siblings) -> set[str]:
    district, stack = {u}, [u]
    while stack:
        v = stack.pop()
        for w in siblings[v]:
            if w in area and w not in district:
                district.add(w)
                stack.append(w)
    blanket = district - {u}
    for d in district:
        blanket |= parents[d]
    blanket.discard(u)
    return blanket


def independence_text(x: str, y: str, given) -> str:
    """How an independence is written for people: ``a and b independent given {c, d}``.

    >>> independence_text("a", "b", ["c", "d"])
    'a and b independent given {c, d}'
    >>> independence_text("a", "b", [])
    'a and b independent'
    """
    tail = f" given {{{', '.join(given)}}}" if given else ""
    return f"{x} and {y} independent{tail}"


def implied_independencies(dag: Dag, observed: frozenset[str], cap: int):
    """Return (listed, total): up to ``cap`` statements {x, y, given, text}, sorted."""
    parents, siblings = latent_projection(dag, observed)
    order = [v for v in dag.topological_order() if v in observed]
    projected_children: dict[str, set[str]] = {v: set() for v in observed}
    for v, ps in parents.items():
        for p in ps:
            projected_children[p].add(v)
    area: set[str] = set()
    listed: list[dict] = []
    total = 0
    for u in order:
        area.add(u)
        adjacent = parents[u] | siblings[u] | projected_children[u]
        blanket = _blanket(u, area, parents, siblings) if siblings[u] else set(parents[u])
        given = sorted(blanket)
        for v in order:
            if v == u:
                break
            if v in adjacent:
                continue
            if v in blanket:
                small_area = _projected_ancestors({u, v}, parents)
                smaller = _blanket(u, small_area, parents, siblings)
                if v in smaller:
                    continue  # an inducing path: no measured set separates them
                statement_given = sorted(smaller)
            else:
                statement_given = given
            total += 1
            if len(listed) < cap:
                x, y = sorted((u, v))
                listed.append({"x": x, "y": y, "given": statement_given,
                               "text": independence_text(x, y, statement_given)})
    listed.sort(key=lambda s: (s["x"], s["y"]))
    return listed, total


def _projected_ancestors(nodes: set[str], parents) -> set[str]:
    seen, stack = set(nodes), list(nodes)
    while stack:
        for p in parents[stack.pop()]:
            if p not in seen:
                seen.add(p)
                stack.append(p)
    return seen
