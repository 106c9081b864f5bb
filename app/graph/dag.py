"""A small, fast DAG structure for the identification engine.

The engine re-analyses the whole diagram after every workshop edit, so the
graph operations here avoid networkx's per-call overhead: parents and
children are plain dicts of sets, and d-separation is a linear-time
reachability search ("Bayes-ball", Shachter 1998; Koller & Friedman 2009,
Algorithm 3.1). The tests check it against ``networkx.is_d_separator``.

Glossary
--------
an(S)  ancestors of S, S included.    de(S)  descendants of S, S included.
G_pbd  the proper back-door graph: G without the first arrow of every proper
       causal path from X to Y (van der Zander, Liskiewicz & Textor 2019).
"""

from __future__ import annotations

from collections import deque
from typing import AbstractSet, Iterable

__all__ = ["Dag"]


class Dag:
    """Directed acyclic graph with set-valued adjacency; nodes are strings."""

    __slots__ = ("nodes", "parents", "children")

    def __init__(self, nodes: Iterable[str], edges: Iterable[tuple[str, str]]):
        self.nodes: list[str] = list(nodes)
        self.parents: dict[str, set[str]] = {v: set() for v in self.nodes}
        self.children: dict[str, set[str]] = {v: set() for v in self.nodes}
        for u, v in edges:
            self.children[u].add(v)
            self.parents[v].add(u)

    @classmethod
    def from_diagram(cls, diagram) -> "Dag":
        return cls(diagram.names, ((a.source, a.target) for a in diagram.arrows))

    def edges(self) -> list[tuple[str, str]]:
        return [(u, v) for u in self.nodes for v in self.children[u]]

    def _sharing(self) -> "Dag":
        """A shallow copy whose adjacency sets are shared until replaced (never mutated)."""
        dag = Dag.__new__(Dag)
        dag.nodes = self.nodes
        dag.parents = dict(self.parents)
        dag.children = dict(self.children)
        return dag

    def with_edges(self, added: Iterable[tuple[str, str]]) -> "Dag":
        """This graph plus some arrows; only the touched adjacency sets are copied."""
        dag = self._sharing()
        for u, v in added:
            dag.parents[v] = dag.parents[v] | {u}
            dag.children[u] = dag.children[u] | {v}
        return dag

    def without_edges(self, removed: Iterable[tuple[str, str]]) -> "Dag":
        """This graph minus some arrows; only the touched adjacency sets are copied."""
        dag = self._sharing()
        for u, v in removed:
            dag.parents[v] = dag.parents[v] - {u}
            dag.children[u] = dag.children[u] - {v}
        return dag

    def without_edges_out_of(self, sources: Iterable[str]) -> "Dag":
        """G with every arrow leaving ``sources`` removed (G underline-S)."""
        sources = set(sources)
        return Dag(self.nodes, ((u, v) for u, v in self.edges() if u not in sources))

    def neighbours(self, v: str) -> set[str]:
        return self.parents[v] | self.children[v]

    # -- ancestry ---------------------------------------------------------
    def ancestors(self, sources: Iterable[str], avoid: Iterable[str] = ()) -> set[str]:
        """an(sources), walking only through nodes not in ``avoid``."""
        return _closure(sources, self.parents, set(avoid))

    def descendants(self, sources: Iterable[str], avoid: Iterable[str] = ()) -> set[str]:
        """de(sources), walking only through nodes not in ``avoid``."""
        return _closure(sources, self.children, set(avoid))

    def causal_nodes(self, xs: AbstractSet[str], ys: AbstractSet[str]) -> set[str]:
        """cn(X, Y): nodes other than X on proper causal paths from X to Y."""
        down = self.descendants([c for x in xs for c in self.children[x] if c not in xs], avoid=xs)
        up = self.ancestors(ys, avoid=xs)
        return (down & up) - set(xs)

    def find_cycle(self) -> list[str] | None:
        """The nodes of one directed cycle, or None when the graph is acyclic."""
        from .document import find_cycle

        return find_cycle(self.nodes, self.edges())

    def topological_order(self) -> list[str]:
        indegree = {v: len(self.parents[v]) for v in self.nodes}
        queue = deque(v for v in self.nodes if indegree[v] == 0)
        order = []
        while queue:
            v = queue.popleft()
            order.append(v)
            for c in self.children[v]:
                indegree[c] -= 1
                if indegree[c] == 0:
                    queue.append(c)
        return order

    # -- d-separation -----------------------------------------------------
    def d_connected(self, sources: Iterable[str], given: Iterable[str] = ()) -> set[str]:
        """Nodes outside ``given`` that are d-connected to ``sources`` given ``given``.

        Linear in the size of the graph. Sources themselves are included.
        """
        given = set(given)
        opened = self.ancestors(given)  # colliders in an(Z) are open
        reached: set[str] = set()
        # direction True: arrived from a child (moving up); False: from a parent.
        stack = [(s, True) for s in sources]
        seen: set[tuple[str, bool]] = set()
        while stack:
            state = stack.pop()
            if state in seen:
                continue
            seen.add(state)
            v, upward = state
            if v not in given:
                reached.add(v)
            if upward:
                if v in given:
                    continue
                for p in self.parents[v]:
                    stack.append((p, True))
                for c in self.children[v]:
                    stack.append((c, False))
            else:
                if v not in given:
                    for c in self.children[v]:
                        stack.append((c, False))
                if v in opened:
                    for p in self.parents[v]:
                        stack.append((p, True))
        return reached

    def is_d_separated(self, xs: Iterable[str], ys: Iterable[str], given: Iterable[str] = ()) -> bool:
        """The same search as :meth:`d_connected`, stopping at the first node of ``ys``."""
        ys, given = set(ys), set(given)
        opened = self.ancestors(given)
        stack = [(s, True) for s in xs]
        seen: set[tuple[str, bool]] = set()
        while stack:
            state = stack.pop()
            if state in seen:
                continue
            seen.add(state)
            v, upward = state
            if v not in given and v in ys:
                return False
            if upward:
                if v in given:
                    continue
                stack.extend((p, True) for p in self.parents[v])
                stack.extend((c, False) for c in self.children[v])
            else:
                if v not in given:
                    stack.extend((c, False) for c in self.children[v])
                if v in opened:
                    stack.extend((p, True) for p in self.parents[v])
        return True


def _closure(sources: Iterable[str], step: dict[str, set[str]], avoid: set[str]) -> set[str]:
    seen = set(sources)
    stack = list(seen)
    while stack:
        v = stack.pop()
        if v in avoid:
            continue
        for w in step[v]:
            if w not in seen:
                seen.add(w)
                stack.append(w)
    return seen
