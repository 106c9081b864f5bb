"""Paths between treatment and outcome, and whether a conditioning set blocks them.

A path here is a simple path in the diagram's skeleton from a treatment
variable to an outcome variable whose inner nodes are neither treatment nor
outcome (a *proper* path). It is *causal* when every arrow points from the
treatment end towards the outcome end. Given a conditioning set Z, a path is
blocked at an inner node that is a conditioned non-collider, or a collider
that is neither conditioned nor an ancestor of a conditioned node (Pearl
2009, Definition 1.2.3); otherwise it is open.

Enumerating all paths is exponential in the worst case, so the search first
drops every node that lies on no simple treatment-outcome path (such a node
is outside the biconnected component of the skeleton that holds the virtual
edge s-t, after joining a source s to the treatment and a sink t to the
outcome), then walks depth-first under a step budget. The count is exact
when the walk finishes and a lower bound, flagged, when it does not.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import AbstractSet, Iterator

import networkx as nx

from .dag import Dag

__all__ = ["PathReport", "describe_path", "iter_paths", "relevant_nodes", "arrow_text"]

_SOURCE, _SINK = "\0source", "\0sink"


@dataclass
class PathReport:
    nodes: list[str]
    causal: bool
    open: bool
    why: str
    blocked_at: str | None = None
    block_reason: str | None = None
    opened_colliders: list[dict] = field(default_factory=list)

    def to_json(self, dag: Dag) -> dict:
        out = {
            "nodes": self.nodes,
            "causal": self.causal,
            "open": self.open,
            "why": self.why,
            "text": arrow_text(dag, self.nodes),
        }
        if self.blocked_at is not None:
            out["blocked_at"] = {"node": self.blocked_at, "reason": self.block_reason}
        if self.opened_colliders:
            out["opened_colliders"] = self.opened_colliders
        return out


def arrow_text(dag: Dag, nodes: list[str]) -> str:
    parts = [nodes[0]]
    for u, v in zip(nodes, nodes[1:]):
        parts.append("→" if v in dag.children[u] else "←")
        parts.append(v)
    return " ".join(parts)


def relevant_nodes(dag: Dag, xs: set[str], ys: set[str]) -> set[str]:
    """Inner nodes that lie on at least one proper path from xs to ys."""
    skeleton = nx.Graph()
    inner = [v for v in dag.nodes if v not in xs and v not in ys]
    skeleton.add_nodes_from(inner)
    for u in inner:
        for w in dag.children[u]:
            if w not in xs and w not in ys:
                skeleton.add_edge(u, w)
        for w in dag.neighbours(u):
            if w in xs:
                skeleton.add_edge(_SOURCE, u)
            elif w in ys:
                skeleton.add_edge(u, _SINK)
    if _SOURCE not in skeleton or _SINK not in skeleton:
        return set()
    skeleton.add_edge(_SOURCE, _SINK)
    for block in nx.biconnected_components(skeleton):
        if _SOURCE in block and _SINK in block:
            return block - {_SOURCE, _SINK}
    return set()  # pragma: no cover - the s-t edge always lies in one block


def describe_path(dag: Dag, nodes: list[str], given: set[str], opened: set[str]) -> PathReport:
    """Classify one path; ``opened`` must be an(given)."""
    causal = all(v in dag.children[u] for u, v in zip(nodes, nodes[1:]))
    colliders: list[dict] = []
    for i in range(1, len(nodes) - 1):
        prev, v, nxt = nodes[i - 1], nodes[i], nodes[i + 1]
        is_collider = v in dag.children[prev] and v in dag.children[nxt]
        if is_collider:
            if v in given:
                colliders.append({"node": v, "via": v})
            elif v in opened:
                colliders.append({"node": v, "via": _conditioned_descendant(dag, v, given)})
            else:
                return PathReport(
                    nodes, causal, False,
                    f"blocked at {v}: a collider on this path, and neither {v} nor any "
                    "descendant of it is adjusted for",
                    blocked_at=v, block_reason="collider_not_conditioned",
                )
        elif v in given:
            return PathReport(
                nodes, causal, False,
                f"blocked at {v}: adjusted for, and not a collider on this path",
                blocked_at=v, block_reason="conditioned_non_collider",
            )
    if colliders:
        pieces = []
        for c in colliders:
            if c["via"] == c["node"]:
                pieces.append(f"collider {c['node']} is adjusted for")
            else:
                pieces.append(
                    f"collider {c['node']} is opened by adjusting for its descendant {c['via']}"
                )
        why = "open: " + "; ".join(pieces)
    elif causal:
        why = "open: a causal path, nothing on it is adjusted for"
    elif len(nodes) == 2:
        why = "open: a direct arrow into the treatment from the outcome side"
    else:
        forks = [
            nodes[i] for i in range(1, len(nodes) - 1)
            if nodes[i - 1] in dag.children[nodes[i]] and nodes[i + 1] in dag.children[nodes[i]]
        ]
        if forks:
            why = f"open: a non-causal path through common cause {forks[0]}; nothing on it is adjusted for"
        else:
            why = "open: a non-causal path with no collider and nothing on it adjusted for"
    return PathReport(nodes, causal, True, why, opened_colliders=colliders)


def _conditioned_descendant(dag: Dag, v: str, given: set[str]) -> str:
    frontier, seen = [v], {v}
    while frontier:  # breadth-first, so the nearest descendant is named
        nxt = []
        for u in frontier:
            for c in sorted(dag.children[u]):
                if c in given:
                    return c
                if c not in seen:
                    seen.add(c)
                    nxt.append(c)
        frontier = nxt
    raise AssertionError("collider marked open has no conditioned descendant")


def iter_paths(
    dag: Dag,
    xs: set[str],
    ys: set[str],
    *,
    allowed: set[str],
    given: set[str] | None = None,
    opened: set[str] | None = None,
    budget: list[int],
) -> Iterator[list[str]]:
    """Depth-first walk over proper paths through ``allowed`` inner nodes.

    With ``given``/``opened`` set, only open paths are walked (pruning at each
    blocking node). ``budget`` is a one-item list of remaining steps; the walk
    stops when it reaches zero.
    """
    only_open = given is not None
    given_set: set[str] = given if given is not None else set()
    opened_set: set[str] = opened if opened is not None else set()
    neighbours = {v: sorted(dag.neighbours(v)) for v in allowed | xs}
    for x in sorted(xs):
        # Each frame: (node, arrived_with_head_at_node, iterator over neighbours)
        path = [x]
        on_path = {x}
        stack = [(x, False, iter(neighbours[x]))]
        while stack:
            if budget[0] <= 0:
                return
            v, head_at_v, it = stack[-1]
            w = next(it, None)
            if w is None:
                stack.pop()
                on_path.discard(path.pop())
                continue
            budget[0] -= 1
            if w in on_path:
                continue
            head_at_w = w in dag.children[v]
            if only_open and len(path) > 1:
                # v is an inner node: check it with the arrow marks on both sides.
                collider = head_at_v and (v in dag.children[w])
                if collider and v not in opened_set:
                    continue
                if not collider and v in given_set:
                    continue
            if w in ys:
                yield path + [w]
                continue
            if w in xs or w not in allowed:
                continue
            path.append(w)
            on_path.add(w)
            stack.append((w, head_at_w, iter(neighbours[w])))


class _SplitNetwork:
    """The node-split skeleton of the inner nodes as a unit-capacity residual network.

    Node v becomes arcs 2i -> 2i+1; an edge v - w becomes 2i+1 -> 2j; neighbours in
    xs (ys) lead to one side node, and both side nodes lead to the sink.
    """

    def __init__(self, dag: Dag, xs: set[str], ys: set[str], inner: list[str]):
        self.index = {v: i for i, v in enumerate(inner)}
        k = len(inner)
        self.side_x, self.side_y, self.sink, self.source = 2 * k, 2 * k + 1, 2 * k + 2, 2 * k + 3
        self.adjacency: list[list[int]] = [[] for _ in range(2 * k + 4)]
        self.capacity: dict[tuple[int, int], int] = {}
        for v in inner:
            i = self.index[v]
            self._arc(2 * i, 2 * i + 1)
            for w in dag.neighbours(v):
                if w in self.index:
                    self._arc(2 * i + 1, 2 * self.index[w])
                elif w in xs or w in ys:
                    self._arc(2 * i + 1, self.side_x if w in xs else self.side_y)
        self._arc(self.side_x, self.sink)
        self._arc(self.side_y, self.sink)
        self.distance = self._distances_to_sink(4 * k + 8)
        for a in range(len(self.adjacency)):
            self.adjacency[a].sort(key=lambda v: -self.distance[v])

    def _arc(self, a: int, b: int) -> None:
        if (a, b) not in self.capacity:
            self.adjacency[a].append(b)
            self.adjacency[b].append(a)
            self.capacity.setdefault((b, a), 0)
        self.capacity[(a, b)] = 1

    def _distances_to_sink(self, far: int) -> list[int]:
        """Breadth-first over reversed arcs from the sink."""
        distance = [far] * len(self.adjacency)
        distance[self.sink] = 0
        frontier = [self.sink]
        while frontier:
            nxt = []
            for b in frontier:
                for a in self.adjacency[b]:
                    if self.capacity.get((a, b), 0) > 0 and distance[a] == far:
                        distance[a] = distance[b] + 1
                        nxt.append(a)
            frontier = nxt
        return distance

    def entry(self, v: str, xs: set[str], ys: set[str]) -> int | None:
        if v in self.index:
            return 2 * self.index[v]
        if v in xs or v in ys:
            return self.side_x if v in xs else self.side_y
        return None

    def _augment(self, starts: set[int], blocked: set[int], changed: list[tuple[int, int]]) -> int | None:
        """Push one unit from a start to the sink, avoiding ``blocked``; the start used,
        or None. Depth-first, nearest-to-a-side first (distances precomputed once on
        the full network), so a path is usually found after a few steps."""
        back: dict[int, int] = {}
        stack = [(s, self.source) for s in sorted(starts, key=lambda v: -self.distance[v])
                 if s not in blocked]
        while stack:
            a, parent = stack.pop()
            if a in back:
                continue
            back[a] = parent
            if a == self.sink:
                break
            stack.extend((b, a) for b in self.adjacency[a]
                         if b not in back and b not in blocked and self.capacity[(a, b)] > 0)
        else:
            return None
        b = self.sink
        while back[b] != self.source:
            a = back[b]
            self.capacity[(a, b)] -= 1
            self.capacity[(b, a)] += 1
            changed.append((a, b))
            b = a
        return b

    def two_disjoint(self, starts: set[int], blocked: set[int]) -> bool:
        """Do two vertex-disjoint paths run from distinct starts to the sink? The
        network is restored afterwards."""
        changed: list[tuple[int, int]] = []
        used = self._augment(starts, blocked, changed)
        ok = used is not None and self._augment(starts - {used}, blocked, changed) is not None
        for a, b in changed:
            self.capacity[(a, b)] += 1
            self.capacity[(b, a)] -= 1
        return ok


def colliders_on_paths(
    dag: Dag, xs: set[str], ys: set[str], relevant: set[str], known: AbstractSet[str] = frozenset()
) -> set[str]:
    """Inner nodes that are a collider on at least one proper path from xs to ys.

    c qualifies iff two of its parents reach the treatment side and the
    outcome side by vertex-disjoint paths that avoid c (inner nodes outside
    xs and ys), i.e. a unit-capacity flow of 2 in the node-split skeleton
    (Menger's theorem). Each candidate costs two breadth-first augmentations,
    O(n + m), on one residual network built once.
    """
    inner = sorted(relevant)
    net = _SplitNetwork(dag, xs, ys, inner)
    found: set[str] = set(known) & relevant
    for c in inner:
        if c in found:
            continue
        starts = {e for p in dag.parents[c] if (e := net.entry(p, xs, ys)) is not None}
        if len(starts) < 2:
            continue
        i = net.index[c]
        if net.two_disjoint(starts, {2 * i, 2 * i + 1}):
            found.add(c)
    return found
