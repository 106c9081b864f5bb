"""The canvas and the report draw one diagram alike: both read static/visual-spec.json.

One diagram (every kind of box, an arrow into the treatment's pointed end, ends that
meet on one side of a box, an arrow that would cross a box) is drawn by the canvas in
chromium and by app/reporting/diagram_svg.py; every box, arrow and badge is compared:
geometry to a tenth of a pixel, strokes, dashes, fills and arrowheads exactly.
"""

from __future__ import annotations

import json
import os
import re
import xml.etree.ElementTree as ET

import httpx
import pytest

from app.graph.document import parse_document
from app.reporting.diagram_svg import diagram_svg
from tests.helpers.live_server import CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]

SVG = "{http://www.w3.org/2000/svg}"

# An invented diagram in the demo's scenario, placed so that the instrument enters the
# treatment at its pointed end, three arrows meet the outcome's left side, and the arrow
# from commute_km to sick_days would run through the fitness box.
DOCUMENT = {
    "format": "arrowmoot-graph", "version": 1,
    "variables": [
        {"name": "voucher_draw", "label": "Won a voucher in the staff lottery", "x": 60, "y": 300},
        {"name": "bike_lease", "label": "Leased a bike in 2025", "x": 330, "y": 300},
        {"name": "sick_days", "label": "Sick days", "x": 800, "y": 300},
        {"name": "fitness", "label": "Baseline fitness", "x": 560, "y": 210},
        {"name": "commute_km", "label": "Commute distance", "x": 330, "y": 140},
        {"name": "age", "label": "Age", "x": 560, "y": 460},
        {"name": "health", "label": "Health consciousness", "latent": True, "x": 800, "y": 60},
    ],
    "arrows": [
        {"from": "voucher_draw", "to": "bike_lease"}, {"from": "bike_lease", "to": "sick_days"},
        {"from": "fitness", "to": "sick_days"}, {"from": "age", "to": "sick_days"},
        {"from": "commute_km", "to": "bike_lease"}, {"from": "commute_km", "to": "fitness"},
        {"from": "age", "to": "bike_lease"}, {"from": "health", "to": "fitness"}, {"from": "health", "to": "sick_days"},
    ],
    "treatment": ["bike_lease"], "outcome": ["sick_days"],
}
ADJUSTED = ["fitness", "age"]
DISPUTED = ("fitness", "sick_days")
PROPOSED = ("commute_km", "sick_days")

NUMBER = re.compile(r"-?\d+(?:\.\d+)?")


def _numbers(text):
    return [float(n) for n in NUMBER.findall(text or "")]


def _fill(value):
    return "hatch" if value and value.startswith("url(") else value


# Collect the same facts from the canvas's DOM as from the server's SVG.
CANVAS_FACTS = """() => {
  const a = (el, names) => Object.fromEntries(names.map((n) => [n, el.getAttribute(n)]));
  const LOOK = ['fill', 'stroke', 'stroke-width', 'stroke-dasharray', 'stroke-linecap'];
  const nodes = {};
  for (const g of document.querySelectorAll('.canvas .node')) {
    const shape = g.querySelector('.shape');
    nodes[g.dataset.name] = {
      transform: g.getAttribute('transform'),
      shape: { tag: shape.tagName, ...a(shape, ['x', 'y', 'width', 'height', 'rx', 'points', ...LOOK]) },
      inner: g.querySelector('.shape-inner') && a(g.querySelector('.shape-inner'), ['x', 'y', 'width', 'height', 'rx', ...LOOK]),
      ring: g.querySelector('.adjust-ring') && a(g.querySelector('.adjust-ring'), ['x', 'y', 'width', 'height', 'rx', ...LOOK]),
      labels: [...g.querySelectorAll('.label')].map((t) => ({ text: t.textContent, ...a(t, ['y', 'font-size', 'font-weight', 'font-style', 'fill']) })),
      tag: g.querySelector('.tag') && { text: g.querySelector('.tag').textContent, ...a(g.querySelector('.tag'), ['y', 'font-size', 'font-weight', 'letter-spacing', 'fill']) },
      role: g.querySelector('.role') && a(g.querySelector('.role'), ['y', 'font-size', 'font-style', 'fill']),
    };
  }
  const markerOf = (el) => {
    const id = el.getAttribute('marker-end').match(/#([^)]+)/)[1];
    const m = document.getElementById(id);
    return { ...a(m, ['viewBox', 'refX', 'refY', 'markerWidth', 'markerHeight', 'orient']), path: m.querySelector('path').getAttribute('d'), head: m.querySelector('path').getAttribute('fill') };
  };
  const arrows = {};
  for (const g of document.querySelectorAll('.canvas .edge')) {
    const line = g.querySelector('.edge-line');
    arrows[JSON.parse(g.dataset.key).join(' → ')] = { d: line.getAttribute('d'), ...a(line, LOOK), marker: markerOf(line) };
  }
  const badges = [...document.querySelectorAll('.canvas .edge-badge')].map((b) => ({
    transform: b.getAttribute('transform'), ...a(b.querySelector('rect'), ['width', 'height', 'rx', 'fill', 'stroke']),
    text: b.querySelector('text').textContent }));
  return { nodes, arrows, badges };
}"""


def _server_facts(svg_text):
    root = ET.fromstring(svg_text)
    look = ["fill", "stroke", "stroke-width", "stroke-dasharray", "stroke-linecap"]
    pick = lambda el, names: {n: el.get(n) for n in names}  # noqa: E731
    markers = {m.get("id"): m for m in root.iter(SVG + "marker")}
    nodes = {}
    for g in root.iter(SVG + "g"):
        if g.get("class") != "am-node":
            continue
        by_class = lambda cls, g=g: [el for el in g if el.get("class") == cls]  # noqa: E731
        shape = by_class("shape")[0]
        tag, role = by_class("tag"), by_class("role")
        inner, ring = by_class("shape-inner"), by_class("adjust-ring")
        nodes[g.find(SVG + "title").text] = {
            "transform": g.get("transform"),
            "shape": {"tag": shape.tag.replace(SVG, ""), **pick(shape, ["x", "y", "width", "height", "rx", "points", *look])},
            "inner": inner and pick(inner[0], ["x", "y", "width", "height", "rx", *look]),
            "ring": ring and pick(ring[0], ["x", "y", "width", "height", "rx", *look]),
            "labels": [{"text": t.text, **pick(t, ["y", "font-size", "font-weight", "font-style", "fill"])} for t in by_class("label")],
            "tag": tag and {"text": tag[0].text, **pick(tag[0], ["y", "font-size", "font-weight", "letter-spacing", "fill"])},
            "role": role and pick(role[0], ["y", "font-size", "font-style", "fill"]),
        }
    arrows = {}
    for path in root.iter(SVG + "path"):
        if "am-arrow" not in (path.get("class") or ""):
            continue
        m = markers[re.search(r"#([^)]+)", path.get("marker-end")).group(1)]
        arrows[path.find(SVG + "title").text] = {
            "d": path.get("d"), **pick(path, look),
            "marker": {**pick(m, ["viewBox", "refX", "refY", "markerWidth", "markerHeight", "orient"]),
                       "path": m.find(SVG + "path").get("d"), "head": m.find(SVG + "path").get("fill")}}
    badges = []
    for g in root.iter(SVG + "g"):
        if g.get("class") == "am-badge":
            rect = g.find(SVG + "rect")
            badges.append({"transform": g.get("transform"), **pick(rect, ["width", "height", "rx", "fill", "stroke"]),
                           "text": g.find(SVG + "text").text})
    return {"nodes": nodes, "arrows": arrows, "badges": badges}


GEOMETRY = {"transform", "x", "y", "width", "height", "rx", "points", "d"}


def _same(canvas, server, where):
    """Geometry to 0.15 px (one decimal is written), every other attribute exactly."""
    if isinstance(canvas, dict) and isinstance(server, dict):
        assert set(canvas) == set(server), where
        for key in canvas:
            _same(canvas[key], server[key], f"{where}.{key}") if key not in GEOMETRY else _close(canvas[key], server[key], f"{where}.{key}")
    elif isinstance(canvas, list) and isinstance(server, list):
        assert len(canvas) == len(server), where
        for i, (c, s) in enumerate(zip(canvas, server)):
            _same(c, s, f"{where}[{i}]")
    elif not canvas and not server:
        pass  # no such element on either side
    else:
        c, s = (_fill(canvas), _fill(server)) if where.endswith(".fill") else (canvas, server)
        if c is not None and s is not None and _numbers(str(c)) and NUMBER.fullmatch(str(c)) and NUMBER.fullmatch(str(s)):
            assert float(c) == pytest.approx(float(s)), where
        else:
            assert c == s, (where, canvas, server)


def _close(canvas, server, where):
    c, s = _numbers(canvas), _numbers(server)
    assert len(c) == len(s) and all(abs(p - q) <= 0.15 for p, q in zip(c, s)), (where, canvas, server)
    assert re.sub(NUMBER, "#", canvas or "").replace(" ", "") == re.sub(NUMBER, "#", server or "").replace(" ", ""), where


def test_canvas_and_report_draw_the_same_diagram(tmp_path):
    from playwright.sync_api import sync_playwright

    with running_server(tmp_path) as base:
        made = httpx.post(base + "/api/sessions", json={"title": "Drawn twice", "name": "Dana",
                                                        "document_text": json.dumps(DOCUMENT), "document_format": "json"}).json()
        with sync_playwright() as p:
            browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
            page = browser.new_page(viewport={"width": 1440, "height": 900})
            page.goto(f"{base}/s/{made['session_id']}#key={made['token']}")
            for _ in range(200):
                if page.evaluate("() => !!window.arrowmoot?.canvas?.model?.roles"):
                    break
                page.wait_for_timeout(50)
            # The canvas draws what it is given: the same marks as the report's arguments.
            roles = page.evaluate(f"""() => {{
              const app = window.arrowmoot;
              app.view.adjusted = {json.dumps(ADJUSTED)};
              const model = app.canvas.model;
              const arrows = model.arrows.map((a) => a.from === '{DISPUTED[0]}' && a.to === '{DISPUTED[1]}' ? {{ ...a, flag: 'disputed' }} : a);
              const proposals = [{{ id: 1, kind: 'add', from: '{PROPOSED[0]}', to: '{PROPOSED[1]}', status: 'open', tally: {{ total: 0 }} }}];
              app.canvas.render({{ ...model, arrows, proposals, adjusted: {json.dumps(ADJUSTED)}, selection: null, highlight: null }});
              return model.roles;
            }}""")
            canvas = page.evaluate(CANVAS_FACTS)
            browser.close()
    server = _server_facts(diagram_svg(parse_document(DOCUMENT), adjusted=ADJUSTED, roles=roles, disputed=[DISPUTED],
                                       proposed=[PROPOSED], badges={PROPOSED: "#1 add?"}))
    assert set(canvas["nodes"]) == {v["name"] for v in DOCUMENT["variables"]}
    assert len(canvas["arrows"]) == len(DOCUMENT["arrows"]) + 1
    for node in canvas["nodes"].values():
        node["role"] = node["role"] and {k: v for k, v in node["role"].items()}
    _same(canvas, server, "drawing")
    # The one arrow that would run through a box bends round it, in both drawings.
    assert " Q" in canvas["arrows"]["commute_km → sick_days"]["d"]
