"""How a diagram is drawn, from the one visual specification ``static/visual-spec.json``.

The canvas reads the same file (``static/js/visual.js``); the geometry here (label
wrapping, box sizes, outlines, where an arrow starts and ends, how it bends round
boxes, where its badge sits) is the same algorithm, step for step, as there. A browser
test draws one diagram both ways and compares them.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass

from ..resources import resource_dir

__all__ = ["SPEC", "text_width", "label_lines", "box_size", "outline", "exit_distance",
           "route_arrows", "place_badge", "spread_along", "Node", "Route"]

SPEC_PATH = resource_dir("static") / "visual-spec.json"
SPEC: dict = json.loads(SPEC_PATH.read_text(encoding="utf-8"))

_ADVANCE = SPEC["font"]["advance"]


def text_width(text: str, size: float | None = None) -> float:
    """An estimate of the width of ``text`` at ``size`` px, the same on the page and here."""
    size = SPEC["label"]["size"] if size is None else size
    units = 0.0
    for ch in text:
        if ch in _ADVANCE["narrow"]["chars"]:
            units += _ADVANCE["narrow"]["em"]
        elif ch in _ADVANCE["wide"]["chars"]:
            units += _ADVANCE["wide"]["em"]
        elif "0" <= ch <= "9":
            units += _ADVANCE["digit"]
        elif ch != ch.lower():
            units += _ADVANCE["upper"]
        else:
            units += _ADVANCE["other"]
    return units * size


def label_lines(text: str) -> list[str]:
    """At most two lines of the box's line width, the second ending in an ellipsis when cut."""
    limit = SPEC["box"]["line_width"]
    if text_width(text) <= limit:
        return [text]
    lines: list[str] = []
    line = ""
    for word in text.split(" "):
        candidate = f"{line} {word}" if line else word
        if text_width(candidate) <= limit or not line:
            line = candidate
        else:
            lines.append(line)
            line = word
    lines.append(line)
    if len(lines) > 2:
        lines = [lines[0], " ".join(lines[1:])]
    out = []
    for ln in lines:
        if text_width(ln) > limit:
            cut = ln
            while len(cut) > 3 and text_width(cut + "…") > limit:
                cut = cut[:-1]
            ln = cut + "…"
        out.append(ln)
    return out


def box_size(label: str) -> tuple[float, float, list[str]]:
    """Width, height and label lines of a variable's box."""
    box = SPEC["box"]
    lines = label_lines(label)
    widest = max(text_width(ln) for ln in lines)
    width = max(box["min_width"], min(box["max_width"], widest + box["padding"]))
    return width, (box["two_line_height"] if len(lines) > 1 else box["height"]), lines


def rounded_rectangle(hw: float, hh: float, r: float) -> list[tuple[float, float]]:
    """Points of a rounded rectangle centred on 0, 0 (corners as short straight runs)."""
    n = SPEC["arrows"]["corner_segments"]
    points = []
    for cx, cy, a0 in ((hw - r, -hh + r, -90), (hw - r, hh - r, 0), (-hw + r, hh - r, 90), (-hw + r, -hh + r, 180)):
        for i in range(n + 1):
            a = math.radians(a0 + 90 * i / n)
            points.append((cx + r * math.cos(a), cy + r * math.sin(a)))
    return points


def hexagon(hw: float, hh: float) -> list[tuple[float, float]]:
    """The treatment's pointed box."""
    tip = SPEC["variables"]["treatment"]["tip"]
    return [(-hw, -hh), (hw, -hh), (hw + tip, 0.0), (hw, hh), (-hw, hh), (-hw - tip, 0.0)]


def ring_rectangle(width: float, height: float, treatment: bool, ring: dict | None = None) -> tuple[float, float, float, float, float]:
    """x, y, width, height and corner of the ring round an adjusted variable (enclosing a treatment's tips)."""
    ring = ring or SPEC["rings"]["adjusted"]
    extra = SPEC["variables"]["treatment"]["tip"] if treatment else 0
    hw, hh = width / 2 + extra + ring["offset"], height / 2 + ring["offset"]
    return -hw, -hh, 2 * hw, 2 * hh, ring["corner"]


@dataclass
class Node:
    """A variable as placed: centre, box size and the flags that change its outline."""

    x: float
    y: float
    width: float
    height: float
    treatment: bool = False
    adjusted: bool = False


@dataclass
class Route:
    """Where one arrow runs: its two ends and, when it bends, the curve's control point."""

    x1: float
    y1: float
    x2: float
    y2: float
    control: tuple[float, float] | None
    d: str


def outline(node: Node) -> list[tuple[float, float]]:
    """The outermost line drawn round a variable: the ring, else the hexagon, else the rounded box."""
    hw, hh = node.width / 2, node.height / 2
    if node.adjusted:
        _, _, w, h, r = ring_rectangle(node.width, node.height, node.treatment)
        return rounded_rectangle(w / 2, h / 2, r)
    if node.treatment:
        return hexagon(hw, hh)
    return rounded_rectangle(hw, hh, SPEC["variables"]["measured"]["corner"])


def exit_distance(polygon: list[tuple[float, float]], ox: float, oy: float, dx: float, dy: float) -> float:
    """How far a ray from (ox, oy) inside a polygon, along the unit vector (dx, dy), runs to its edge."""
    best = math.inf
    for i, (px, py) in enumerate(polygon):
        qx, qy = polygon[(i + 1) % len(polygon)]
        ex, ey = qx - px, qy - py
        det = dx * -ey - dy * -ex
        if abs(det) < 1e-12:
            continue
        rx, ry = px - ox, py - oy
        t = (rx * -ey - ry * -ex) / det
        s = (dx * ry - dy * rx) / det
        if t > 1e-9 and -1e-9 <= s <= 1 + 1e-9:
            best = min(best, t)
    return best if math.isfinite(best) else 0.0


def _footprint(node: Node, margin: float = 0.0) -> tuple[float, float, float, float]:
    extra = SPEC["variables"]["treatment"]["tip"] if node.treatment else 0
    ring = SPEC["rings"]["adjusted"]["offset"] if node.adjusted else 0
    hw, hh = node.width / 2 + extra + ring, node.height / 2 + ring
    return node.x - hw - margin, node.y - hh - margin, node.x + hw + margin, node.y + hh + margin


def _side_of(node: Node, dx: float, dy: float) -> str:
    extra = SPEC["variables"]["treatment"]["tip"] if node.treatment else 0
    hw, hh = node.width / 2 + extra, node.height / 2
    if abs(dx) * hh >= abs(dy) * hw:
        return "right" if dx >= 0 else "left"
    return "bottom" if dy >= 0 else "top"


def _point_at(a, b, c, t):
    if c is None:
        return a[0] + (b[0] - a[0]) * t, a[1] + (b[1] - a[1]) * t
    u = 1 - t
    return (u * u * a[0] + 2 * u * t * c[0] + t * t * b[0], u * u * a[1] + 2 * u * t * c[1] + t * t * b[1])


def _tangent_at(a, b, c, t):
    if c is None:
        return b[0] - a[0], b[1] - a[1]
    return (2 * (1 - t) * (c[0] - a[0]) + 2 * t * (b[0] - c[0]), 2 * (1 - t) * (c[1] - a[1]) + 2 * t * (b[1] - c[1]))


def _crossings(a, b, c, boxes) -> int:
    hits = 0
    steps = 24
    for x0, y0, x1, y1 in boxes:
        for i in range(1, steps):
            x, y = _point_at(a, b, c, i / steps)
            if x0 < x < x1 and y0 < y < y1:
                hits += 1
                break
    return hits


def spread_along(values: list[float], gap: float, lo: float, hi: float) -> list[float]:
    """Spread positions along one side: in order, at least ``gap`` apart, centred where they were, within [lo, hi]."""
    values = [min(hi, max(lo, v)) for v in values]
    out: list[float] = []
    for i, v in enumerate(values):
        out.append(max(v, out[i - 1] + gap) if i else v)
    shift = sum(values) / len(values) - sum(out) / len(out)
    if out[0] + shift < lo:
        shift = lo - out[0]
    if out[-1] + shift > hi:
        shift = hi - out[-1]
    return [v + shift for v in out]


_NORMALS = {"top": (0, -1), "bottom": (0, 1), "left": (-1, 0), "right": (1, 0)}


def _detour(nodes: dict[str, Node], a: str, b: str):
    """None for a straight arrow, else the control point of the smallest curve round the boxes in the way."""
    spec = SPEC["arrows"]
    s, t = nodes[a], nodes[b]
    A, B = (s.x, s.y), (t.x, t.y)
    others = [_footprint(n, spec["clearance"]) for name, n in nodes.items() if name not in (a, b)]
    best = None
    hits = _crossings(A, B, None, others)
    if not hits:
        return best
    length = math.hypot(B[0] - A[0], B[1] - A[1]) or 1.0
    nx, ny = -(B[1] - A[1]) / length, (B[0] - A[0]) / length
    mx, my = (A[0] + B[0]) / 2, (A[1] + B[1]) / 2
    for d in spec["detour"]:
        for sign in (1, -1):
            # A quadratic curve's middle lies halfway to its control point: bend by 2d.
            control = (mx + sign * nx * 2 * d, my + sign * ny * 2 * d)
            h = _crossings(A, B, control, others)
            if h < hits:
                best, hits = control, h
            if not hits:
                return best
    return best


def route_arrows(nodes: dict[str, Node], arrows: list[tuple[str, str]]) -> list[Route | None]:
    """Where every arrow runs (see static/js/visual.js, routeArrows: the same steps).

    An arrow that would cross another box bends round it (the smallest quadratic
    detour that clears); the ends that meet one side of a box are spread along that
    side, in the order they arrive; each end stops the arrow gap short of the outline
    actually drawn.
    """
    spec = SPEC["arrows"]
    missing = object()
    controls = [_detour(nodes, a, b) if a in nodes and b in nodes and a != b else missing for a, b in arrows]
    groups: dict[str, list] = {}
    ends: list[dict] = [{} for _ in arrows]
    for i, (a, b) in enumerate(arrows):
        if controls[i] is missing:
            continue
        s, t = nodes[a], nodes[b]
        for name, node, other, which in ((a, s, t, "from"), (b, t, s, "to")):
            toward = controls[i] or (other.x, other.y)
            dx, dy = toward[0] - node.x, toward[1] - node.y
            side = _side_of(node, dx, dy)
            length = math.hypot(dx, dy) or 1.0
            reach = exit_distance(outline(node), 0.0, 0.0, dx / length, dy / length)
            natural = (dx if side in ("top", "bottom") else dy) / length * reach
            groups.setdefault(f"{name}|{side}", []).append((natural, i, which, node, side))
    corner = SPEC["variables"]["measured"]["corner"]
    for group in groups.values():
        group.sort(key=lambda e: (e[0], e[1]))
        node, side = group[0][3], group[0][4]
        horizontal = side in ("top", "bottom")
        half = max(0.0, (node.width if horizontal else node.height) / 2 - corner)
        gap = min(spec["spread"], 2 * half / (len(group) - 1)) if len(group) > 1 else 0.0
        placed = spread_along([e[0] for e in group], gap, -half, half)
        nx, ny = _NORMALS[side]
        poly = outline(node)
        for k, (_, i, which, _, _) in enumerate(group):
            ox, oy = (placed[k], 0.0) if horizontal else (0.0, placed[k])
            reach = exit_distance(poly, ox, oy, nx, ny) + spec["gap"]
            ends[i][which] = (node.x + ox + nx * reach, node.y + oy + ny * reach)
    out: list[Route | None] = []
    for i in range(len(arrows)):
        if controls[i] is missing:
            out.append(None)
            continue
        (x1, y1), (x2, y2), control = ends[i]["from"], ends[i]["to"], controls[i]
        if control:
            d = f"M{x1:.1f},{y1:.1f} Q{control[0]:.1f},{control[1]:.1f} {x2:.1f},{y2:.1f}"
        else:
            d = f"M{x1:.1f},{y1:.1f} L{x2:.1f},{y2:.1f}"
        out.append(Route(x1, y1, x2, y2, control, d))
    return out


def _caption_footprint(node: Node) -> tuple[float, float, float, float]:
    x0, y0, x1, y1 = _footprint(node)
    return x0 - 4, y0 - 14, x1 + 4, y1 + 20


def place_badge(route: Route, text: str, nodes, placed: list) -> tuple[float, float, float, float]:
    """Centre x, y, width and height of an arrow's badge: beside the line, where no box or
    earlier badge covers it (else where they cover it least); ``placed`` is added to."""
    spec = SPEC["badge"]
    width, half = text_width(text, spec["size"]) + spec["padding"], spec["height"] / 2
    a, b, c = (route.x1, route.y1), (route.x2, route.y2), route.control
    rects = [_caption_footprint(n) for n in nodes]

    def covers(x: float, y: float) -> float:
        area = 0.0
        for x0, y0, x1, y1 in rects + placed:
            ox = min(x + width / 2, x1) - max(x - width / 2, x0)
            oy = min(y + half, y1) - max(y - half, y0)
            if ox > 0 and oy > 0:
                area += ox * oy
        return area

    best = None
    for t in spec["along"]:
        px, py = _point_at(a, b, c, t)
        tx, ty = _tangent_at(a, b, c, t)
        length = math.hypot(tx, ty) or 1.0
        nx, ny = -ty / length, tx / length
        if ny > 0:
            nx, ny = -nx, -ny
        offset = spec["offset"] + abs(nx) * (width / 2 - 8)
        for side in (1, -1):
            x, y = px + side * nx * offset, py + side * ny * offset
            area = covers(x, y)
            if best is None or area < best[2]:
                best = (x, y, area)
        if best[2] == 0:
            break
    x, y, _ = best
    placed.append((x - width / 2, y - half, x + width / 2, y + half))
    return x, y, width, spec["height"]
