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

__all__ = ["diagram_svg", "legend_svg", "label_lines", "text_width"]

BOX_HEIGHT = 46
MIN_WIDTH = 96
MAX_WIDTH = 240
LINE_WIDTH = 190
PAD = 48

NODE_STROKE = "#2b3140"
LATENT_STROKE = "#5b6270"
TREAT_STROKE = "#6e4300"
TREAT_FILL = "#fbe3b4"
OUTCOME_STROKE = "#1d3f66"
OUTCOME_FILL = "#d6e6f5"
LABEL = "#1d2330"
TAG = "#5d6472"
EDGE = "#39404d"
DISPUTED = "#8f5300"
PROPOSED = "#7d8594"
ROLE = "#6b7785"
FONT = "system-ui, -apple-system, 'Segoe UI', sans-serif"

# Generous average advance of a semibold 15 px sans-serif glyph, by character class
# (wide fonts such as DejaVu Sans must still fit inside the box).
_NARROW = set("iljtfrI.,:;'!|()[] ")
_WIDE = set("mwMW@%")


_NOT_XML = re.compile("[\ud800-\udfff\ufffe\uffff]")


def _x(text: object) -> str:
    """XML-escaped text; characters XML 1.0 cannot hold become U+FFFD."""
    return escape(_NOT_XML.sub("\ufffd", str(text)), quote=True)


def text_width(text: str, size: float = 15.0) -> float:
    """An estimate of the rendered width of ``text`` (no font metrics on the server)."""
    units = 0.0
    for ch in text:
        if ch in _NARROW:
            units += 0.36
        elif ch in _WIDE:
            units += 0.95
        elif ch.isupper():
            units += 0.74
        elif ch.isdigit():
            units += 0.66
        else:
            units += 0.63
    return units * size


def label_lines(text: str) -> list[str]:
    """At most two lines of LINE_WIDTH, the second ending in an ellipsis when cut."""
    if text_width(text) <= LINE_WIDTH:
        return [text]
    words = text.split(" ")
    lines: list[str] = []
    line = ""
    for word in words:
        candidate = f"{line} {word}" if line else word
        if text_width(candidate) <= LINE_WIDTH or not line:
            line = candidate
        else:
            lines.append(line)
            line = word
    lines.append(line)
    if len(lines) > 2:
        lines = [lines[0], " ".join(lines[1:])]
    out = []
    for i, ln in enumerate(lines):
        if text_width(ln) > LINE_WIDTH:
            cut = ln
            while len(cut) > 3 and text_width(cut + "…") > LINE_WIDTH:
                cut = cut[:-1]
            ln = cut + "…"
        out.append(ln)
    return out


def _size(label: str) -> tuple[float, float, list[str]]:
    lines = label_lines(label)
    width = max(MIN_WIDTH, min(MAX_WIDTH, max(text_width(ln) for ln in lines) + 34))
    height = BOX_HEIGHT + 18 if len(lines) > 1 else BOX_HEIGHT
    return width, height, lines


def _clip(width: float, height: float, dx: float, dy: float) -> tuple[float, float]:
    hw, hh = width / 2 + 4, height / 2 + 4
    if dx == 0 and dy == 0:
        return 0.0, 0.0
    t = min(hw / abs(dx) if dx else math.inf, hh / abs(dy) if dy else math.inf)
    return dx * t, dy * t


def _defs(prefix: str) -> str:
    def marker(name: str, colour: str) -> str:
        return (f'<marker id="{prefix}-{name}" viewBox="0 0 12 12" refX="11" refY="6" markerWidth="11" '
                f'markerHeight="11" markerUnits="userSpaceOnUse" orient="auto-start-reverse">'
                f'<path d="M0,1 L12,6 L0,11 L3,6 z" fill="{colour}"/></marker>')
    return ("<defs>" + marker("head", EDGE) + marker("head-disputed", DISPUTED) + marker("head-proposed", PROPOSED)
            + f'<pattern id="{prefix}-hatch" width="8" height="8" patternUnits="userSpaceOnUse" '
              'patternTransform="rotate(45)"><rect width="8" height="8" fill="#f1f2f4"/>'
              '<line x1="0" y1="0" x2="0" y2="8" stroke="#d3d7de" stroke-width="3"/></pattern></defs>')


def _node(prefix: str, name: str, label: str, x: float, y: float, *, latent: bool, treatment: bool,
          outcome: bool, adjusted: bool, roles: list[str]) -> tuple[str, tuple[float, float, float, float]]:
    width, height, lines = _size(label)
    hw, hh = width / 2, height / 2
    parts = [f'<g class="am-node" transform="translate({x:.1f},{y:.1f})">', f"<title>{_x(name)}</title>"]
    if adjusted:
        parts.append(f'<rect x="{-hw - 8:.1f}" y="{-hh - 8:.1f}" width="{width + 16:.1f}" height="{height + 16:.1f}" '
                     f'rx="12" fill="none" stroke="{NODE_STROKE}" stroke-width="3.2" stroke-dasharray="0.5 6" '
                     'stroke-linecap="round"/>')
    if latent:
        fill, stroke, dash, sw = f"url(#{prefix}-hatch)", LATENT_STROKE, ' stroke-dasharray="6 4"', 1.6
    else:
        fill, stroke, dash, sw = "#fff", NODE_STROKE, "", 1.6
    if treatment:
        fill = TREAT_FILL if not latent else fill
        stroke, sw = TREAT_STROKE, 2.6
        tip = 14
        pts = [(-hw, -hh), (hw, -hh), (hw + tip, 0), (hw, hh), (-hw, hh), (-hw - tip, 0)]
        parts.append('<polygon points="' + " ".join(f"{a:.1f},{b:.1f}" for a, b in pts)
                     + f'" fill="{fill}" stroke="{stroke}" stroke-width="{sw}"{dash}/>')
    else:
        if outcome:
            fill = OUTCOME_FILL if not latent else fill
            stroke = OUTCOME_STROKE
        parts.append(f'<rect x="{-hw:.1f}" y="{-hh:.1f}" width="{width:.1f}" height="{height:.1f}" rx="8" '
                     f'fill="{fill}" stroke="{stroke}" stroke-width="{sw}"{dash}/>')
        if outcome:
            parts.append(f'<rect x="{-hw + 4:.1f}" y="{-hh + 4:.1f}" width="{width - 8:.1f}" height="{height - 8:.1f}" '
                         f'rx="5" fill="none" stroke="{OUTCOME_STROKE}" stroke-width="1.3"/>')
    style = ' font-style="italic" font-weight="500"' if latent else ' font-weight="600"'
    for i, line in enumerate(lines):
        ly = 5 + (i - (len(lines) - 1) / 2) * 18
        parts.append(f'<text x="0" y="{ly:.1f}" text-anchor="middle" font-size="15" fill="{LABEL}"{style}>'
                     f"{_x(line)}</text>")
    tags = [t for t, on in (("TREATMENT", treatment), ("OUTCOME", outcome), ("UNMEASURED", latent),
                            ("ADJUSTED", adjusted)) if on]
    top = -hh - (13 if adjusted else 7)
    if tags:
        parts.append(f'<text x="0" y="{top:.1f}" text-anchor="middle" font-size="10" font-weight="700" '
                     f'letter-spacing="1.2" fill="{TAG}">{_x(" · ".join(tags))}</text>')
    shown_roles = [r.replace("_", " ") for r in roles if r not in ("treatment", "outcome", "unrelated")]
    bottom = hh + (24 if adjusted else 16)
    if shown_roles:
        parts.append(f'<text x="0" y="{bottom:.1f}" text-anchor="middle" font-size="12" font-style="italic" '
                     f'fill="{ROLE}">{_x(", ".join(shown_roles))}</text>')
    parts.append("</g>")
    extra_w = 14 if treatment else 0
    label_w = max([text_width(", ".join(shown_roles), 12) / 2] if shown_roles else [0])
    bbox = (x - max(hw + extra_w + 8, label_w), y + min(top - 10, -hh - 8),
            x + max(hw + extra_w + 8, label_w), y + max(bottom + 4, hh + 8))
    return "".join(parts), bbox


def _badge(x1: float, y1: float, x2: float, y2: float, text: str) -> tuple[str, tuple[float, float, float, float]]:
    w = text_width(text, 11.5) + 14
    length = math.hypot(x2 - x1, y2 - y1) or 1.0
    nx, ny = -(y2 - y1) / length, (x2 - x1) / length
    if ny > 0:
        nx, ny = -nx, -ny
    offset = 15 + abs(nx) * (w / 2 - 8)
    if length < w + 24:
        # A short arrow between close boxes: lift the label clear of both boxes.
        offset = max(offset, 40.0)
    bx, by = (x1 + x2) / 2 + nx * offset, (y1 + y2) / 2 + ny * offset
    svg = (f'<g class="am-badge" transform="translate({bx:.1f},{by:.1f})">'
           f'<rect x="{-w / 2:.1f}" y="-11" width="{w:.1f}" height="22" rx="4" fill="#fff" stroke="#9aa0aa"/>'
           f'<text x="0" y="5" text-anchor="middle" font-size="11.5" font-weight="600" fill="{LABEL}">{_x(text)}</text></g>')
    return svg, (bx - w / 2, by - 11, bx + w / 2, by + 11)


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
        w, h, _ = _size(v.label or v.name)
        sizes[v.name] = (w, h)
    _spread(pos, sizes, treatment)
    boxes: list[tuple[float, float, float, float]] = []
    edge_parts: list[str] = []
    badge_parts: list[str] = []

    def edge(a: str, b: str, kind: str) -> None:
        (ax, ay), (bx, by) = pos[a], pos[b]
        dx, dy = bx - ax, by - ay
        sx, sy = _clip(*sizes[a], dx, dy)
        ex, ey = _clip(*sizes[b], -dx, -dy)
        x1, y1, x2, y2 = ax + sx, ay + sy, bx + ex, by + ey
        if kind == "disputed":
            attrs = f'stroke="{DISPUTED}" stroke-width="2.2" stroke-dasharray="11 6" marker-end="url(#{prefix}-head-disputed)"'
        elif kind == "proposed":
            attrs = f'stroke="{PROPOSED}" stroke-width="2" stroke-dasharray="3 5" marker-end="url(#{prefix}-head-proposed)"'
        else:
            attrs = f'stroke="{EDGE}" stroke-width="1.9" marker-end="url(#{prefix}-head)"'
        edge_parts.append(f'<line class="am-arrow am-arrow-{kind}" x1="{x1:.1f}" y1="{y1:.1f}" x2="{x2:.1f}" '
                          f'y2="{y2:.1f}" fill="none" {attrs}><title>{_x(a)} → {_x(b)}</title></line>')
        words = []
        if kind == "disputed":
            words.append("disputed")
        if badges.get((a, b)):
            words.append(str(badges[(a, b)]))
        elif kind == "proposed":
            words.append("add?")
        if words:
            svg, box = _badge(x1, y1, x2, y2, "  ".join(words))
            badge_parts.append(svg)
            boxes.append(box)

    for arrow in diagram.arrows:
        key = (arrow.source, arrow.target)
        edge(arrow.source, arrow.target, "disputed" if key in disputed else "drawn")
    for a, b in proposed:
        if a in pos and b in pos and not diagram.has_arrow(a, b):
            edge(a, b, "proposed")
    node_parts = []
    for v in diagram.variables:
        x, y = pos[v.name]
        svg, box = _node(prefix, v.name, v.label or v.name, x, y, latent=v.latent,
                         treatment=v.name in treatment, outcome=v.name in outcome,
                         adjusted=v.name in adjusted, roles=list(roles.get(v.name, [])))
        node_parts.append(svg)
        boxes.append(box)
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
        return head + f'<text x="200" y="60" text-anchor="middle" fill="{ROLE}">No variables were drawn.</text></svg>'
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
    for kind, text in items:
        hw, hh = 26, 12
        g = [f'<g transform="translate(44,{y})">']
        if kind == "adjusted":
            g.append(f'<rect x="{-hw - 6}" y="{-hh - 6}" width="{2 * hw + 12}" height="{2 * hh + 12}" rx="10" fill="none" '
                     f'stroke="{NODE_STROKE}" stroke-width="3" stroke-dasharray="0.5 5.5" stroke-linecap="round"/>')
        if kind == "treatment":
            pts = [(-hw, -hh), (hw, -hh), (hw + 9, 0), (hw, hh), (-hw, hh), (-hw - 9, 0)]
            g.append('<polygon points="' + " ".join(f"{a},{b}" for a, b in pts)
                     + f'" fill="{TREAT_FILL}" stroke="{TREAT_STROKE}" stroke-width="2.2"/>')
        elif kind == "outcome":
            g.append(f'<rect x="{-hw}" y="{-hh}" width="{2 * hw}" height="{2 * hh}" rx="6" fill="{OUTCOME_FILL}" '
                     f'stroke="{OUTCOME_STROKE}" stroke-width="1.6"/>'
                     f'<rect x="{-hw + 3}" y="{-hh + 3}" width="{2 * hw - 6}" height="{2 * hh - 6}" rx="4" fill="none" '
                     f'stroke="{OUTCOME_STROKE}" stroke-width="1.2"/>')
        elif kind == "latent":
            g.append(f'<rect x="{-hw}" y="{-hh}" width="{2 * hw}" height="{2 * hh}" rx="6" fill="url(#{prefix}-hatch)" '
                     f'stroke="{LATENT_STROKE}" stroke-width="1.6" stroke-dasharray="6 4"/>')
        else:
            g.append(f'<rect x="{-hw}" y="{-hh}" width="{2 * hw}" height="{2 * hh}" rx="6" fill="#fff" '
                     f'stroke="{NODE_STROKE}" stroke-width="1.6"/>')
        g.append("</g>")
        rows.append("".join(g))
        rows.append(f'<text x="92" y="{y + 5}" font-size="13" fill="{LABEL}">{_x(text)}</text>')
        y += 40
    for kind, text in (("drawn", "Arrow: a direct effect the room agreed on"),
                       ("disputed", "Disputed arrow (long dashes)"),
                       ("proposed", "Proposed arrow, not drawn (short dashes)")):
        if kind == "disputed":
            attrs = f'stroke="{DISPUTED}" stroke-width="2.2" stroke-dasharray="11 6" marker-end="url(#{prefix}-head-disputed)"'
        elif kind == "proposed":
            attrs = f'stroke="{PROPOSED}" stroke-width="2" stroke-dasharray="3 5" marker-end="url(#{prefix}-head-proposed)"'
        else:
            attrs = f'stroke="{EDGE}" stroke-width="1.9" marker-end="url(#{prefix}-head)"'
        rows.append(f'<line x1="14" y1="{y}" x2="76" y2="{y}" {attrs}/>')
        rows.append(f'<text x="92" y="{y + 5}" font-size="13" fill="{LABEL}">{_x(text)}</text>')
        y += 30
    rows.append(f'<text x="14" y="{y + 4}" font-size="12" font-style="italic" fill="{ROLE}">'
                "Grey italic words under a box: its role for this question.</text>")
    height = y + 16
    return (f'<svg xmlns="http://www.w3.org/2000/svg" class="am-legend" role="img" viewBox="0 0 420 {height}" '
            f'width="420" height="{height}" font-family="{FONT}"><title>Legend</title>'
            + _defs(prefix) + "".join(rows) + "</svg>")
