"""Draw a diagram as a standalone SVG string, in the canvas's visual language.

The rules are the ones written down in ``static/visual-language.md``: shape,
outline and line pattern carry every distinction first, colour second. The
output holds presentation attributes only (no script, no external reference),
every piece of user text is XML-escaped, and the drawing is scaled to fit its
``viewBox`` so it never runs off a printed page.

:func:`diagram_svg` draws the diagram; :func:`legend_svg` draws the key that
explains each glyph; both are used by the report.
"""

from __future__ import annotations

import math
import re
from html import escape
from typing import Iterable

from ..graph.document import Diagram
from .visual import SPEC, Node, Route, box_size, hexagon, label_lines, place_badge, ring_rectangle, route_arrows, text_width

__all__ = ["diagram_svg", "legend_svg", "label_lines", "text_width"]

PAD = 48
_V = SPEC["variables"]
_ARROWS = SPEC["arrows"]["kinds"]
FONT = SPEC["font"]["family"].replace("'", "&apos;")
LABEL = SPEC["label"]["fill"]
MUTED = SPEC["role"]["fill"]

_NOT_XML = re.compile("[\ud800-\udfff\ufffe\uffff]")


def _x(text: object) -> str:
    """XML-escaped text; characters XML 1.0 cannot hold become U+FFFD."""
    return escape(_NOT_XML.sub("\ufffd", str(text)), quote=True)


def _size(label: str) -> tuple[float, float, list[str]]:
    return box_size(label)


def _attrs(**pairs) -> str:
    """SVG attributes from keyword pairs (underscores become hyphens; None is left out)."""
    return "".join(f' {k.replace("_", "-")}="{v}"' for k, v in pairs.items() if v is not None)


def _arrow_attrs(kind: str, prefix: str) -> str:
    k = _ARROWS[kind]
    return _attrs(fill="none", stroke=k["stroke"], stroke_width=k["stroke_width"], stroke_dasharray=k["dash"],
                  marker_end=f"url(#{prefix}-head-{kind})")


def _shape_attrs(prefix: str, *, latent: bool = False, treatment: bool = False, outcome: bool = False) -> str:
    fill, stroke, width, dash = (_V["measured"][k] for k in ("fill", "stroke", "stroke_width", "dash"))
    if latent:
        fill, stroke, width, dash = f"url(#{prefix}-hatch)", _V["latent"]["stroke"], _V["latent"]["stroke_width"], _V["latent"]["dash"]
    if treatment:
        fill = fill if latent else _V["treatment"]["fill"]
        stroke, width = _V["treatment"]["stroke"], _V["treatment"]["stroke_width"]
    elif outcome:
        fill = fill if latent else _V["outcome"]["fill"]
        stroke, width = _V["outcome"]["stroke"], _V["outcome"]["stroke_width"]
    return _attrs(fill=fill, stroke=stroke, stroke_width=width, stroke_dasharray=dash)


def _ring_attrs(ring: dict) -> str:
    return _attrs(fill="none", stroke=ring["stroke"], stroke_width=ring["stroke_width"],
                  stroke_dasharray=ring.get("dash"), stroke_linecap=ring.get("linecap"))


def _defs(prefix: str) -> str:
    m, h = SPEC["marker"], SPEC["hatch"]

    def marker(kind: str) -> str:
        return (f'<marker id="{prefix}-head-{kind}" viewBox="{m["view_box"]}" refX="{m["ref_x"]}" refY="{m["ref_y"]}" '
                f'markerWidth="{m["size"]}" markerHeight="{m["size"]}" markerUnits="userSpaceOnUse" '
                f'orient="auto-start-reverse"><path d="{m["path"]}" fill="{_ARROWS[kind]["head"]}"/></marker>')
    return ("<defs>" + "".join(marker(k) for k in _ARROWS)
            + f'<pattern id="{prefix}-hatch" width="{h["size"]}" height="{h["size"]}" patternUnits="userSpaceOnUse" '
              f'patternTransform="rotate({h["angle"]})"><rect width="{h["size"]}" height="{h["size"]}" fill="{h["background"]}"/>'
              f'<line x1="0" y1="0" x2="0" y2="{h["size"]}" stroke="{h["line"]}" stroke-width="{h["line_width"]}"/></pattern></defs>')


def _node(prefix: str, name: str, label: str, x: float, y: float, *, latent: bool, treatment: bool,
          outcome: bool, adjusted: bool, roles: list[str]) -> tuple[str, tuple[float, float, float, float]]:
    width, height, lines = box_size(label)
    hw, hh = width / 2, height / 2
    parts = [f'<g class="am-node" transform="translate({x:.1f},{y:.1f})">', f"<title>{_x(name)}</title>"]
    ring = SPEC["rings"]["adjusted"]
    if adjusted:
        rx, ry, rw, rh, rr = ring_rectangle(width, height, treatment, ring)
        parts.append(f'<rect class="adjust-ring" x="{rx:.1f}" y="{ry:.1f}" width="{rw:.1f}" height="{rh:.1f}" rx="{rr}"'
                     f'{_ring_attrs(ring)}/>')
    look = _shape_attrs(prefix, latent=latent, treatment=treatment, outcome=outcome)
    if treatment:
        pts = hexagon(hw, hh)
        parts.append('<polygon class="shape" points="' + " ".join(f"{a:.1f},{b:.1f}" for a, b in pts) + f'"{look}/>')
    else:
        parts.append(f'<rect class="shape" x="{-hw:.1f}" y="{-hh:.1f}" width="{width:.1f}" height="{height:.1f}" '
                     f'rx="{_V["measured"]["corner"]}"{look}/>')
        if outcome:
            o = _V["outcome"]
            inset = o["inner_inset"]
            parts.append(f'<rect class="shape-inner" x="{-hw + inset:.1f}" y="{-hh + inset:.1f}" width="{width - 2 * inset:.1f}" '
                         f'height="{height - 2 * inset:.1f}" rx="{o["inner_corner"]}"'
                         + _attrs(fill="none", stroke=o["stroke"], stroke_width=o["inner_stroke_width"]) + "/>")
    lab, box = SPEC["label"], SPEC["box"]
    style = _attrs(font_style=lab["latent_style"] if latent else None,
                   font_weight=lab["latent_weight"] if latent else lab["weight"])
    for i, line in enumerate(lines):
        ly = box["baseline"] + (i - (len(lines) - 1) / 2) * box["line_gap"]
        parts.append(f'<text class="label" x="0" y="{ly:.1f}" text-anchor="middle" font-size="{lab["size"]}" '
                     f'fill="{lab["fill"]}"{style}>{_x(line)}</text>')
    tags = [t for t, on in (("TREATMENT", treatment), ("OUTCOME", outcome), ("UNMEASURED", latent),
                            ("ADJUSTED", adjusted)) if on]
    tag, role = SPEC["tag"], SPEC["role"]
    top = -hh - (tag["gap_adjusted"] if adjusted else tag["gap"])
    if tags:
        parts.append(f'<text class="tag" x="0" y="{top:.1f}" text-anchor="middle"'
                     + _attrs(font_size=tag["size"], font_weight=tag["weight"], letter_spacing=tag["letter_spacing"],
                              fill=tag["fill"]) + f'>{_x(" · ".join(tags))}</text>')
    shown_roles = [r.replace("_", " ") for r in roles if r not in ("treatment", "outcome", "unrelated")]
    bottom = hh + (role["gap_adjusted"] if adjusted else role["gap"])
    if shown_roles:
        parts.append(f'<text class="role" x="0" y="{bottom:.1f}" text-anchor="middle"'
                     + _attrs(font_size=role["size"], font_style=role["style"], fill=role["fill"])
                     + f'>{_x(", ".join(shown_roles))}</text>')
    parts.append("</g>")
    extra_w = _V["treatment"]["tip"] if treatment else 0
    label_w = max([text_width(", ".join(shown_roles), role["size"]) / 2] if shown_roles else [0])
    bbox = (x - max(hw + extra_w + ring["offset"], label_w), y + min(top - 10, -hh - ring["offset"]),
            x + max(hw + extra_w + ring["offset"], label_w), y + max(bottom + 4, hh + ring["offset"]))
    return "".join(parts), bbox


def _badge(route: Route, text: str, nodes, placed: list) -> tuple[str, tuple[float, float, float, float]]:
    b = SPEC["badge"]
    bx, by, w, h = place_badge(route, text, nodes, placed)
    svg = (f'<g class="am-badge" transform="translate({bx:.1f},{by:.1f})">'
           f'<rect x="{-w / 2:.1f}" y="{-h / 2:.1f}" width="{w:.1f}" height="{h}" rx="{b["corner"]}" fill="{b["fill"]}" '
           f'stroke="{b["stroke"]}"/><text x="0" y="{b["baseline"]}" text-anchor="middle" font-size="{b["size"]}" '
           f'font-weight="{b["weight"]}" fill="{b["text_fill"]}">{_x(text)}</text></g>')
    return svg, (bx - w / 2, by - h / 2, bx + w / 2, by + h / 2)


def _spread(pos: dict[str, tuple[float, float]], sizes: dict[str, tuple[float, float]],
            treatment: set[str], gap: float = 26.0, limit: float = 2.5) -> None:
    """Stretch the layout (never shrink it) until no two boxes overlap.

    Labels measured on the server can come out wider than on the canvas, so
    boxes placed side by side there may touch here; scaling the coordinates
    keeps the room's layout recognisable.
    """
    names = list(pos)
    sx = sy = 1.0
    for i, a in enumerate(names):
        (ax, ay), (aw, ah) = pos[a], sizes[a]
        aw += 28 if a in treatment else 0
        for b in names[i + 1:]:
            (bx, by), (bw, bh) = pos[b], sizes[b]
            bw += 28 if b in treatment else 0
            need_x, need_y = (aw + bw) / 2 + gap, (ah + bh) / 2 + gap
            dx, dy = abs(ax - bx), abs(ay - by)
            if dx >= need_x or dy >= need_y:
                continue
            # Stretch along whichever axis needs less.
            fx = need_x / dx if dx > 1e-9 else math.inf
            fy = need_y / dy if dy > 1e-9 else math.inf
            if fx <= fy:
                sx = max(sx, min(fx, limit))
            else:
                sy = max(sy, min(fy, limit))
    if sx > 1.0 or sy > 1.0:
        for n, (x, y) in pos.items():
            pos[n] = (x * sx, y * sy)


def diagram_svg(diagram: Diagram, *, adjusted: Iterable[str] = (), roles: dict | None = None,
                disputed: Iterable[tuple[str, str]] = (), proposed: Iterable[tuple[str, str]] = (),
                badges: dict | None = None, title: str = "The agreed diagram",
                prefix: str = "amd") -> str:
    """The diagram as an SVG string.

    ``adjusted`` names the variables drawn inside the dotted ring; ``disputed``
    lists drawn arrows shown with long brown dashes; ``proposed`` lists arrows
    not drawn but proposed (short grey dashes); ``badges`` maps ``(from, to)``
    to the small text written beside an arrow (e.g. a vote tally).
    """
    roles = roles or {}
    badges = badges or {}
    adjusted = set(adjusted)
    disputed = {tuple(a) for a in disputed}
    treatment, outcome = set(diagram.treatment), set(diagram.outcome)
    pos: dict[str, tuple[float, float]] = {}
    sizes: dict[str, tuple[float, float]] = {}
    for i, v in enumerate(diagram.variables):
        x = v.x if v.x is not None else 160.0 + 220.0 * (i % 4)
        y = v.y if v.y is not None else 100.0 + 130.0 * (i // 4)
        pos[v.name] = (float(x), float(y))
        w, h, _ = box_size(v.label or v.name)
        sizes[v.name] = (w, h)
    _spread(pos, sizes, treatment)
    nodes = {name: Node(x, y, *sizes[name], treatment=name in treatment, adjusted=name in adjusted)
             for name, (x, y) in pos.items()}
    # Drawn arrows first, then proposed ones, routed together as on the canvas.
    edges: list[tuple[str, str, str]] = []
    for arrow in diagram.arrows:
        key = (arrow.source, arrow.target)
        edges.append((arrow.source, arrow.target, "disputed" if key in disputed else "drawn"))
    for a, b in proposed:
        if a in pos and b in pos and not diagram.has_arrow(a, b):
            edges.append((a, b, "proposed"))
    routes = route_arrows(nodes, [(a, b) for a, b, _ in edges])
    boxes: list[tuple[float, float, float, float]] = []
    edge_parts: list[str] = []
    badge_parts: list[str] = []
    placed: list = []
    for (a, b, kind), route in zip(edges, routes):
        if route is None:
            continue
        edge_parts.append(f'<path class="am-arrow am-arrow-{kind}" d="{route.d}"{_arrow_attrs(kind, prefix)}>'
                          f"<title>{_x(a)} → {_x(b)}</title></path>")
        words = []
        if kind == "disputed":
            words.append("disputed")
        if badges.get((a, b)):
            words.append(str(badges[(a, b)]))
        elif kind == "proposed":
            words.append("add?")
        if words:
            svg, box = _badge(route, "  ".join(words), nodes.values(), placed)
            badge_parts.append(svg)
            boxes.append(box)
    node_parts = []
    for v in diagram.variables:
        x, y = pos[v.name]
        svg, box = _node(prefix, v.name, v.label or v.name, x, y, latent=v.latent,
                         treatment=v.name in treatment, outcome=v.name in outcome,
                         adjusted=v.name in adjusted, roles=list(roles.get(v.name, [])))
        node_parts.append(svg)
        boxes.append(box)
    for route in routes:  # a bent arrow can reach beyond the boxes
        if route is not None and route.control is not None:
            cx, cy = route.control
            mx, my = (route.x1 + 2 * cx + route.x2) / 4, (route.y1 + 2 * cy + route.y2) / 4
            boxes.append((mx, my, mx, my))
    if boxes:
        min_x = min(b[0] for b in boxes) - PAD / 2
        min_y = min(b[1] for b in boxes) - PAD / 2
        max_x = max(b[2] for b in boxes) + PAD / 2
        max_y = max(b[3] for b in boxes) + PAD / 2
    else:
        min_x, min_y, max_x, max_y = 0.0, 0.0, 400.0, 120.0
    width, height = max_x - min_x, max_y - min_y
    desc = (f"{len(diagram.variables)} variables and {len(diagram.arrows)} arrows; treatment "
            f"{', '.join(diagram.treatment) or 'not chosen'}, outcome {', '.join(diagram.outcome) or 'not chosen'}")
    head = (f'<svg xmlns="http://www.w3.org/2000/svg" class="am-diagram" role="img" '
            f'viewBox="{min_x:.1f} {min_y:.1f} {width:.1f} {height:.1f}" width="{width:.0f}" height="{height:.0f}" '
            f'preserveAspectRatio="xMidYMid meet" font-family="{FONT}">'
            f"<title>{_x(title)}</title><desc>{_x(desc)}</desc>")
    if not diagram.variables:
        return head + f'<text x="200" y="60" text-anchor="middle" fill="{MUTED}">No variables were drawn.</text></svg>'
    return head + _defs(prefix) + "".join(edge_parts) + "".join(node_parts) + "".join(badge_parts) + "</svg>"


def legend_svg(prefix: str = "aml") -> str:
    """The key to the diagram's glyphs (the same rules as the canvas legend)."""
    rows = []
    y = 26
    items = [
        ("measured", "Measured variable"),
        ("latent", "Unmeasured variable (dashed outline, hatched)"),
        ("treatment", "Treatment (pointed ends, heavy outline)"),
        ("outcome", "Outcome (double border)"),
        ("adjusted", "In the adjustment set (dotted ring)"),
    ]
    ring = SPEC["rings"]["adjusted"]
    for kind, text in items:
        hw, hh = 26, 12
        g = [f'<g transform="translate(44,{y})">']
        if kind == "adjusted":
            g.append(f'<rect x="{-hw - 6}" y="{-hh - 6}" width="{2 * hw + 12}" height="{2 * hh + 12}" rx="10"'
                     f"{_ring_attrs(ring)}/>")
        if kind == "treatment":
            pts = [(-hw, -hh), (hw, -hh), (hw + 9, 0), (hw, hh), (-hw, hh), (-hw - 9, 0)]
            g.append('<polygon points="' + " ".join(f"{a},{b}" for a, b in pts) + '"'
                     + _shape_attrs(prefix, treatment=True) + "/>")
        elif kind == "outcome":
            o = _V["outcome"]
            g.append(f'<rect x="{-hw}" y="{-hh}" width="{2 * hw}" height="{2 * hh}" rx="6"{_shape_attrs(prefix, outcome=True)}/>'
                     f'<rect x="{-hw + 3}" y="{-hh + 3}" width="{2 * hw - 6}" height="{2 * hh - 6}" rx="4"'
                     + _attrs(fill="none", stroke=o["stroke"], stroke_width=o["inner_stroke_width"]) + "/>")
        else:
            g.append(f'<rect x="{-hw}" y="{-hh}" width="{2 * hw}" height="{2 * hh}" rx="6"'
                     f"{_shape_attrs(prefix, latent=kind == 'latent')}/>")
        g.append("</g>")
        rows.append("".join(g))
        rows.append(f'<text x="92" y="{y + 5}" font-size="13" fill="{LABEL}">{_x(text)}</text>')
        y += 40
    for kind, text in (("drawn", "Arrow: a direct effect the room agreed on"),
                       ("disputed", "Disputed arrow (long dashes)"),
                       ("proposed", "Proposed arrow, not drawn (short dashes)")):
        rows.append(f'<line x1="14" y1="{y}" x2="76" y2="{y}"{_arrow_attrs(kind, prefix)}/>')
        rows.append(f'<text x="92" y="{y + 5}" font-size="13" fill="{LABEL}">{_x(text)}</text>')
        y += 30
    rows.append(f'<text x="14" y="{y + 4}" font-size="12" font-style="italic" fill="{MUTED}">'
                "Grey italic words under a box: its role for this question.</text>")
    height = y + 16
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="am-legend" role="img" viewBox="0 0 420 {height}" '
            f'width="420" height="{height}" font-family="{FONT}"><title>Legend</title>'
            + _defs(prefix) + "".join(rows) + "</svg>")
