"""A layered auto-layout for imported or messy diagrams, and a free spot for new variables.

Layers follow the longest path from a root (every arrow points to a later
layer, so arrows run left to right); within a layer, variables are ordered by
the mean position of their neighbours in the previous and next layers, a few
sweeps each way (the barycentre heuristic of Sugiyama, Tagawa & Toda 1981).
"""

from __future__ import annotations

from typing import Iterable

__all__ = ["layered_positions", "free_spot", "LAYER_GAP", "ROW_GAP"]

LAYER_GAP = 220.0
ROW_GAP = 110.0
MARGIN = 100.0


def _layers(names: list[str], arrows: list[tuple[str, str]]) -> dict[str, int]:
    parents: dict[str, list[str]] = {n: [] for n in names}
    children: dict[str, list[str]] = {n: [] for n in names}
    for a, b in arrows:
        if a in parents and b in parents:
            parents[b].append(a)
            children[a].append(b)
    indeg = {n: len(parents[n]) for n in names}
    order = [n for n in names if indeg[n] == 0]
    layer = {n: 0 for n in names}
    i = 0
    while i < len(order):
        n = order[i]
        i += 1
        for c in children[n]:
            layer[c] = max(layer[c], layer[n] + 1)
            indeg[c] -= 1
            if indeg[c] == 0:
                order.append(c)
    return layer


def layered_positions(names: Iterable[str], arrows: Iterable[tuple[str, str]]) -> dict[str, tuple[float, float]]:
    names = list(names)
    arrows = [(a, b) for a, b in arrows]
    if not names:
        return {}
    layer = _layers(names, arrows)
    count = max(layer.values()) + 1
    rows: list[list[str]] = [[] for _ in range(count)]
    for n in names:
        rows[layer[n]].append(n)
    neighbours: dict[str, list[str]] = {n: [] for n in names}
    for a, b in arrows:
        if a in neighbours and b in neighbours:
            neighbours[a].append(b)
            neighbours[b].append(a)

    def sweep(order: range) -> None:
        for li in order:
            index = {n: i for row in rows for i, n in enumerate(row)}

            def centre(n: str, index: dict[str, int] = index, li: int = li) -> float:
                near = [index[m] for m in neighbours[n] if abs(layer[m] - li) == 1]
                return sum(near) / len(near) if near else index[n]

            rows[li].sort(key=centre)

    for _ in range(4):
        sweep(range(1, count))
        sweep(range(count - 2, -1, -1))
    tallest = max(len(r) for r in rows)
    positions = {}
    for li, row in enumerate(rows):
        offset = (tallest - len(row)) * ROW_GAP / 2
        for i, n in enumerate(row):
            positions[n] = (MARGIN + li * LAYER_GAP, MARGIN + offset + i * ROW_GAP)
    _clear_long_arrows(positions, rows, layer, arrows)
    top = min(y for _, y in positions.values())
    return {n: (x, round(y - top + MARGIN, 1)) for n, (x, y) in positions.items()}


def _clear_long_arrows(positions, rows, layer, arrows, rounds: int = 4) -> None:
    """Nudge variables off straight arrows that skip over their layer, keeping each
    layer's order and spacing (drawn arrows are straight, so a box sitting on one
    would hide it)."""
    long_arrows = [(a, b) for a, b in arrows if a in layer and b in layer and layer[b] - layer[a] >= 2]
    if not long_arrows:
        return
    for _ in range(rounds):
        moved = False
        for a, b in long_arrows:
            (xa, ya), (xb, yb) = positions[a], positions[b]
            for li in range(layer[a] + 1, layer[b]):
                for n in rows[li]:
                    x, y = positions[n]
                    line_y = ya + (yb - ya) * (x - xa) / (xb - xa)
                    if abs(y - line_y) < 34:
                        step = ROW_GAP * 0.6 if y >= line_y else -ROW_GAP * 0.6
                        positions[n] = (x, y + step)
                        moved = True
        for row in rows:
            ordered = sorted(row, key=lambda n: positions[n][1])
            for prev, n in zip(ordered, ordered[1:]):
                x, y = positions[n]
                if y - positions[prev][1] < ROW_GAP * 0.8:
                    positions[n] = (x, positions[prev][1] + ROW_GAP * 0.8)
        if not moved:
            return


def free_spot(variables: list[dict]) -> tuple[float, float]:
    """A grid point at least one box away from every placed variable."""
    taken = [(v.get("x") or 0.0, v.get("y") or 0.0) for v in variables]
    for row in range(0, 40):
        for col in range(0, 12):
            x = MARGIN + 200.0 * col
            y = MARGIN + row * 100.0
            if all(abs(x - tx) > 170 or abs(y - ty) > 80 for tx, ty in taken):
                return x, y
    return MARGIN, MARGIN + 100.0 * len(variables)
