"""The report's arrows, from app/reporting/visual.py: they end outside the outline they
enter, ends meeting one side of a box keep apart, and no arrow runs through a box."""

from __future__ import annotations

import json
from pathlib import Path

from app.graph.document import parse_document
from app.graph.layout import layered_positions
from app.reporting.visual import SPEC, Node, box_size, hexagon, outline, route_arrows, spread_along

SAMPLE = Path(__file__).resolve().parent.parent / "sample_data" / "cycle_to_work.json"


def _inside(x, y, points):
    inside = False
    for i, (ax, ay) in enumerate(points):
        bx, by = points[i - 1]
        if (ay > y) != (by > y) and x < (bx - ax) * (y - ay) / (by - ay) + ax:
            inside = not inside
    return inside


def _distance_to_segment(x, y, p, q):
    (px, py), (qx, qy) = p, q
    dx, dy = qx - px, qy - py
    t = max(0.0, min(1.0, ((x - px) * dx + (y - py) * dy) / (dx * dx + dy * dy or 1.0)))
    return ((x - px - t * dx) ** 2 + (y - py - t * dy) ** 2) ** 0.5


def _node(x, y, label, **flags):
    width, height, _ = box_size(label)
    return Node(x, y, width, height, **flags)


def test_an_arrow_into_the_pointed_end_stops_outside_the_tip():
    nodes = {"voucher": _node(60, 300, "voucher"), "lease": _node(330, 300, "Leased a bike", treatment=True)}
    (route,) = route_arrows(nodes, [("voucher", "lease")])
    lease = nodes["lease"]
    tip = lease.x - lease.width / 2 - SPEC["variables"]["treatment"]["tip"]
    assert route.x2 == tip - SPEC["arrows"]["gap"] and route.y2 == 300
    assert not _inside(route.x2 - lease.x, route.y2 - lease.y, hexagon(lease.width / 2, lease.height / 2))


def test_every_arrow_end_touches_the_outline_it_leaves_or_enters():
    """Ends stop the gap away from the outline: never inside it, never left hanging beyond it."""
    diagram = parse_document(json.loads(SAMPLE.read_text()))
    adjusted = {"age", "commute_km", "department", "fitness"}
    nodes = {v.name: _node(v.x, v.y, v.label or v.name, treatment=v.name in diagram.treatment, adjusted=v.name in adjusted)
             for v in diagram.variables}
    arrows = [(a.source, a.target) for a in diagram.arrows] + [(diagram.outcome[0], "fitness")]
    gap = SPEC["arrows"]["gap"]
    for (a, b), route in zip(arrows, route_arrows(nodes, arrows)):
        for name, (x, y) in ((a, (route.x1, route.y1)), (b, (route.x2, route.y2))):
            n = nodes[name]
            poly = outline(n)
            assert not _inside(x - n.x, y - n.y, poly), (a, b, name)
            nearest = min(_distance_to_segment(x - n.x, y - n.y, poly[i - 1], poly[i]) for i in range(len(poly)))
            assert nearest <= gap + 0.01, (a, b, name, nearest)


def test_spread_keeps_order_gap_and_bounds():
    assert spread_along([0, 0, 0], 16, -50, 50) == [-16, 0, 16]
    assert spread_along([40, 45], 16, -50, 50) == [34, 50]
    assert spread_along([-3], 16, -50, 50) == [-3]
    assert spread_along([-80, 0, 80], 16, -50, 50) == [-50, 0, 50]  # never beyond the side's straight run


def test_tidied_demo_arrows_keep_apart_and_off_boxes():
    diagram = parse_document(json.loads(SAMPLE.read_text()))
    positions = layered_positions([v.name for v in diagram.variables], [(a.source, a.target) for a in diagram.arrows])
    nodes = {v.name: _node(*positions[v.name], v.label or v.name, treatment=v.name in diagram.treatment)
             for v in diagram.variables}
    arrows = [(a.source, a.target) for a in diagram.arrows]
    routes = route_arrows(nodes, arrows)
    heads: dict[str, list] = {}
    for (a, b), route in zip(arrows, routes):
        heads.setdefault(b, []).append((route.x2, route.y2))
        for name, n in nodes.items():
            if name in (a, b):
                continue
            x0, x1 = n.x - n.width / 2, n.x + n.width / 2
            y0, y1 = n.y - n.height / 2, n.y + n.height / 2
            for i in range(1, 40):
                t = i / 40
                c = route.control or ((route.x1 + route.x2) / 2, (route.y1 + route.y2) / 2)
                x = (1 - t) ** 2 * route.x1 + 2 * (1 - t) * t * c[0] + t * t * route.x2
                y = (1 - t) ** 2 * route.y1 + 2 * (1 - t) * t * c[1] + t * t * route.y2
                assert not (x0 < x < x1 and y0 < y < y1), (a, b, name)
    for target, ends in heads.items():
        for i, (ax, ay) in enumerate(ends):
            for bx, by in ends[i + 1:]:
                assert (ax - bx) ** 2 + (ay - by) ** 2 >= 64, (target, ends)
