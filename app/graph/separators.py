"""Listing minimal separators with polynomial delay.

Minimal adjustment sets are minimal d-separators in the proper back-door
graph, restricted to allowed variables (van der Zander, Liskiewicz & Textor
2019, Theorem 5 and the ListMinSep framework). For sets inside an(X u Y),
d-separation equals vertex separation in the moral graph of that ancestral
set (Lauritzen et al. 1990), and every minimal d-separator lies inside
an(X u Y) (van der Zander et al. 2019, Lemma 2). So the work reduces to
listing minimal a-b vertex separators in an undirected graph in which

* the treatment set is contracted to one vertex ``a`` and the outcome set to ``b``;
* vertices that may not be used (unmeasured, forbidden) are eliminated: each
  connected group of them is replaced by a clique on its neighbourhood, which
  keeps exactly the separations by allowed vertices.

The listing is a flashlight search over the a-side component. ``close(I)``
gives the minimal separator nearest to a connected set ``I`` containing a
(the neighbourhood of b's component after removing N(I)); every minimal
separator whose a-side contains I has an a-side containing close(I)'s. A
branch either keeps a vertex v of that separator out of the a-side (always
feasible) or pulls it in (feasible iff the new nearest a-side avoids the
vertices kept out), so every branch ends in an answer and the delay between
answers is O(n (n + m)).
"""

from __future__ import annotations

from typing import Iterable, Iterator

from .dag import Dag

__all__ = ["moral_graph", "reduce_graph", "iter_minimal_separators"]

Adjacency = dict[str, set[str]]


def moral_graph(dag: Dag, nodes: set[str]) -> Adjacency:
    """The moral graph of the subgraph induced by an ancestral set ``nodes``."""
    adj: Adjacency = {v: set() for v in nodes}
    for v in nodes:
        parents = [p for p in dag.parents[v] if p in nodes]
        for p in parents:
            adj[v].add(p)
            adj[p].add(v)
        for i, p in enumerate(parents):
            for q in parents[i + 1:]:
                adj[p].add(q)
                adj[q].add(p)
    return adj


def reduce_graph(
    adj: Adjacency, xs: set[str], ys: set[str], allowed: set[str], a: str = "\0a", b: str = "\0b"
) -> Adjacency:
    """Contract ``xs`` to ``a`` and ``ys`` to ``b``; eliminate what is not allowed."""
    rep = {}
    for v in adj:
        rep[v] = a if v in xs else b if v in ys else v
    out: Adjacency = {a: set(), b: set()}
    for v in adj:
        if rep[v] in (a, b) or v in allowed:
            out.setdefault(rep[v], set())
    for v, nbrs in adj.items():
        rv = rep[v]
        if rv not in out:
            continue
        for w in nbrs:
            rw = rep[w]
            if rw in out and rw != rv:
                out[rv].add(rw)
    # Eliminate each connected group of disallowed vertices.
    hidden = {v for v in adj if rep[v] not in out}
    seen: set[str] = set()
    for start in hidden:
        if start in seen:
            continue
        group, stack, boundary = {start}, [start], set()
        seen.add(start)
        while stack:
            v = stack.pop()
            for w in adj[v]:
                if w in hidden:
                    if w not in seen:
                        seen.add(w)
                        group.add(w)
                        stack.append(w)
                else:
                    boundary.add(rep[w])
        members = list(boundary)
        for i, p in enumerate(members):
            for q in members[i + 1:]:
                if p != q:
                    out[p].add(q)
                    out[q].add(p)
    return out


def _component(adj: Adjacency, start: str, blocked: set[str]) -> set[str]:
    seen = {start}
    stack = [start]
    while stack:
        v = stack.pop()
        for w in adj[v]:
            if w not in seen and w not in blocked:
                seen.add(w)
                stack.append(w)
    return seen


def iter_minimal_separators(adj: Adjacency, a: str, b: str) -> Iterator[frozenset[str]]:
    """Yield every minimal a-b separator of ``adj`` once (none if a, b adjacent)."""
    if b in adj[a]:
        return
    near_b = adj[b]

    def close(inner: set[str]) -> tuple[set[str], set[str]]:
        boundary: set[str] = set()
        for v in inner:
            boundary |= adj[v]
        boundary -= inner
        b_side = _component(adj, b, boundary)
        separator = {v for v in boundary if adj[v] & b_side}
        a_side = _component(adj, a, separator)
        return a_side, separator

    # Explicit stack of (a_side, separator, kept_out) to avoid deep recursion.
    a_side, separator = close({a})
    stack: list[tuple[set[str], set[str], frozenset[str]]] = [(a_side, separator, frozenset())]
    while stack:
        a_side, separator, kept_out = stack.pop()
        free = sorted(v for v in separator if v not in kept_out and v not in near_b)
        if not free:
            yield frozenset(separator)
            continue
        v = free[0]
        # Branch 1 (pushed first, explored second): v stays out of the a-side.
        stack.append((a_side, separator, kept_out | {v}))
        # Branch 2: v joins the a-side, if that keeps the kept-out vertices out.
        grown_a, grown_sep = close(a_side | {v})
        if not (grown_a & kept_out):
            stack.append((grown_a, grown_sep, kept_out))


def minimal_separators(
    adj: Adjacency, a: str, b: str, cap: int
) -> tuple[list[frozenset[str]], bool]:
    """Up to ``cap`` minimal separators, and whether more exist."""
    found: list[frozenset[str]] = []
    for sep in iter_minimal_separators(adj, a, b):
        if len(found) == cap:
            return found, True
        found.append(sep)
    return found, False


def nodes_of(sets: Iterable[frozenset[str]]) -> set[str]:
    out: set[str] = set()
    for s in sets:
        out |= s
    return out
