"""The drawing stays readable in a real room: arrows end where they can be seen, Tidy
keeps arrows apart and off boxes, text stays a readable size, the canvas fits again when
a panel opens, the legend hides nothing, and the page works at every screen size.

Sizes: 1440×900 and 1280×720 (projectors), 1024×768 (a small laptop) and 390×844 (a
phone). Screenshots land in tests/artifacts/ (git-ignored).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import httpx
import pytest

from tests.helpers.live_server import ARTIFACTS, CHROMIUM, running_server
from tests.helpers.live_server import CHROMIUM_ARGS as ARGS

pytestmark = [
    pytest.mark.browser,
    pytest.mark.skipif(not os.path.exists(CHROMIUM), reason="Debian chromium is not installed"),
]

SIZES = [(1440, 900), (1280, 720), (1024, 768), (390, 844)]
DEMO = json.loads((Path(__file__).resolve().parent.parent / "sample_data" / "cycle_to_work.json").read_text())
TOKEN = "X-Arrowmoot-Token"

# Boxes, arrow ends and paths in diagram coordinates, read from the canvas's DOM.
GEOMETRY = """() => {
  const nodes = {};
  for (const g of document.querySelectorAll('.canvas .node')) {
    const m = g.getAttribute('transform').match(/translate\\(([-\\d.]+),([-\\d.]+)\\)/);
    const shape = g.querySelector('.shape'), box = shape.getBBox();
    const ring = g.querySelector('.adjust-ring');
    const points = shape.tagName === 'polygon'
      ? shape.getAttribute('points').trim().split(/\\s+/).map((p) => p.split(',').map(Number)) : null;
    nodes[g.dataset.name] = { x: +m[1], y: +m[2], box: { x: box.x, y: box.y, width: box.width, height: box.height },
      ring: ring && ring.getBBox(), points };
  }
  const arrows = {};
  for (const g of document.querySelectorAll('.canvas .edge')) {
    const path = g.querySelector('.edge-line'), total = path.getTotalLength();
    const samples = [];
    for (let i = 0; i <= 60; i++) { const p = path.getPointAtLength((total * i) / 60); samples.push([p.x, p.y]); }
    arrows[JSON.parse(g.dataset.key).join(' -> ')] = { samples, end: samples[samples.length - 1] };
  }
  return { nodes, arrows, k: window.arrowmoot.canvas.view.k };
}"""


def _session(base, document=DEMO, title="Does the cycle-to-work offer cut sick days?"):
    made = httpx.post(base + "/api/sessions", json={"title": title, "name": "Dana", "document_text": json.dumps(document),
                                                    "document_format": "json"}).json()
    return made["session_id"], made["token"], made["state"]["session"]["join_code"]


def _command(base, session_id, token, command):
    response = httpx.post(f"{base}/api/sessions/{session_id}/commands", json=command, headers={TOKEN: token})
    assert response.status_code < 300, response.text
    return response.json()


def _open(browser, base, session_id, token, size):
    page = browser.new_page(viewport={"width": size[0], "height": size[1]})
    errors = []
    page.on("pageerror", lambda e: errors.append(str(e)))
    page.goto(f"{base}/s/{session_id}#key={token}")
    page.wait_for_selector(".canvas .node")
    page.wait_for_timeout(300)
    return page, errors


def _inside_polygon(x, y, points):
    inside = False
    for i, (ax, ay) in enumerate(points):
        bx, by = points[i - 1]
        if (ay > y) != (by > y) and x < (bx - ax) * (y - ay) / (by - ay) + ax:
            inside = not inside
    return inside


def _rect_of(node, grow=0.0):
    b = node["ring"] or node["box"]
    x0 = node["x"] + b["x"] - grow
    y0 = node["y"] + b["y"] - grow
    return x0, y0, x0 + b["width"] + 2 * grow, y0 + b["height"] + 2 * grow


@pytest.fixture(name="browser")
def fixture_browser():
    from playwright.sync_api import sync_playwright

    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        yield browser
        browser.close()


def test_arrows_end_outside_the_outline_they_enter(tmp_path, browser):
    """The instrument's arrow enters the treatment at its pointed end; arrows into a
    variable in the set shown stop at its dotted ring; arrows into the outcome at its
    outer border. Each head must end outside that outline, not under it."""
    ARTIFACTS.mkdir(exist_ok=True)
    document = {
        "format": "arrowmoot-graph", "version": 1,
        "variables": [{"name": "voucher", "x": 60, "y": 300}, {"name": "lease", "label": "Leased a bike", "x": 330, "y": 300},
                      {"name": "sick_days", "x": 760, "y": 300}, {"name": "age", "x": 540, "y": 120}],
        "arrows": [{"from": "voucher", "to": "lease"}, {"from": "lease", "to": "sick_days"},
                   {"from": "age", "to": "lease"}, {"from": "age", "to": "sick_days"}, {"from": "voucher", "to": "age"}],
        "treatment": ["lease"], "outcome": ["sick_days"],
    }
    with running_server(tmp_path) as base:
        session_id, token, _ = _session(base, document)
        page, errors = _open(browser, base, session_id, token, (1440, 900))
        page.evaluate("window.arrowmoot.showAdjusted(['age'])")
        page.wait_for_selector(".canvas .adjust-ring")
        g = page.evaluate(GEOMETRY)
        page.screenshot(path=str(ARTIFACTS / "drawing_outlines.png"))
        page.close()
    lease, age, outcome = g["nodes"]["lease"], g["nodes"]["age"], g["nodes"]["sick_days"]
    hexagon = [(lease["x"] + px, lease["y"] + py) for px, py in lease["points"]]
    ex, ey = g["arrows"]["voucher -> lease"]["end"]
    tip = min(x for x, _ in hexagon)
    assert not _inside_polygon(ex, ey, hexagon) and ex <= tip - 2, (ex, tip)
    for key, node in (("voucher -> age", age), ("lease -> sick_days", outcome), ("age -> sick_days", outcome)):
        x, y = g["arrows"][key]["end"]
        x0, y0, x1, y1 = _rect_of(node)
        assert not (x0 < x < x1 and y0 < y < y1), (key, (x, y), (x0, y0, x1, y1))
    assert errors == []


def test_tidy_spreads_arrow_ends_keeps_arrows_off_boxes_and_text_readable(tmp_path, browser):
    ARTIFACTS.mkdir(exist_ok=True)
    with running_server(tmp_path) as base:
        session_id, token, _ = _session(base)
        for width, height in SIZES:
            page, errors = _open(browser, base, session_id, token, (width, height))
            if (width, height) == SIZES[0]:
                page.click("button:has-text('Tidy')")
                page.wait_for_timeout(800)
            page.click("button:has-text('Fit')")
            page.wait_for_timeout(200)
            g = page.evaluate(GEOMETRY)
            page.screenshot(path=str(ARTIFACTS / f"drawing_tidy_{width}x{height}.png"))
            page.close()
            assert errors == []
            # Labels are 15 px in the diagram: never drawn below 10 px on screen.
            assert 15 * g["k"] >= 9.9, (width, height, g["k"])
    # Arrow heads into one box keep apart (no two within 8 px).
    by_target: dict[str, list] = {}
    for key, arrow in g["arrows"].items():
        by_target.setdefault(key.split(" -> ")[1], []).append(arrow["end"])
    for target, ends in by_target.items():
        for i, (ax, ay) in enumerate(ends):
            for bx, by in ends[i + 1:]:
                assert (ax - bx) ** 2 + (ay - by) ** 2 >= 64, (target, (ax, ay), (bx, by))
    # No arrow runs through a box other than its own two.
    for key, arrow in g["arrows"].items():
        source, target = key.split(" -> ")
        for name, node in g["nodes"].items():
            if name in (source, target):
                continue
            x0, y0, x1, y1 = _rect_of(node, grow=-2)
            crossing = [p for p in arrow["samples"] if x0 < p[0] < x1 and y0 < p[1] < y1]
            assert not crossing, (key, name)


def test_canvas_fits_again_when_a_panel_opens_and_the_legend_hides_nothing(tmp_path, browser):
    ARTIFACTS.mkdir(exist_ok=True)
    treatment, outcome = DEMO["treatment"][0], DEMO["outcome"][0]
    with running_server(tmp_path) as base:
        session_id, token, _ = _session(base)
        _command(base, session_id, token, {"type": "set_stage", "stage": "debating"})
        page, errors = _open(browser, base, session_id, token, (1280, 720))

        def visible(name):
            canvas = page.locator(".canvas").bounding_box()
            box = page.locator(f'.canvas .node[data-name="{name}"] .shape').bounding_box()
            return (box["x"] >= canvas["x"] - 1 and box["y"] >= canvas["y"] - 1
                    and box["x"] + box["width"] <= canvas["x"] + canvas["width"] + 1
                    and box["y"] + box["height"] <= canvas["y"] + canvas["height"] + 1)

        def apart(a, b):
            return (a["x"] + a["width"] <= b["x"] or b["x"] + b["width"] <= a["x"]
                    or a["y"] + a["height"] <= b["y"] or b["y"] + b["height"] <= a["y"])

        page.wait_for_selector(".tab[data-tab=estimation]")
        page.click(".tab[data-tab=estimation]")
        page.wait_for_timeout(500)
        assert visible(treatment) and visible(outcome)
        page.screenshot(path=str(ARTIFACTS / "drawing_estimation_open.png"))
        page.click(".tab[data-tab=analysis]")
        page.click("button:has-text('Big text')")
        page.wait_for_timeout(500)
        assert visible(treatment) and visible(outcome)
        page.click("button:has-text('Big text')")
        page.wait_for_timeout(300)

        # The legend opens and folds, and neither it nor the stage banner covers the canvas or each other.
        legend = page.locator(".legend")
        if not legend.evaluate("el => el.open"):
            page.click(".legend summary")
        expect_open = legend.evaluate("el => el.open")
        assert expect_open and page.locator(".legend ul").is_visible()
        canvas = page.locator(".canvas").bounding_box()
        banner = page.locator(".stage-banner").bounding_box()
        assert apart(legend.bounding_box(), canvas) and apart(banner, canvas) and apart(banner, legend.bounding_box())
        assert visible(treatment) and visible(outcome)
        page.screenshot(path=str(ARTIFACTS / "drawing_legend_open.png"))
        page.click(".legend summary")
        assert not page.locator(".legend ul").is_visible()
        page.close()
    assert errors == []


def test_session_page_fits_every_screen_and_a_phone_can_vote(tmp_path, browser):
    ARTIFACTS.mkdir(exist_ok=True)
    treatment, outcome = DEMO["treatment"][0], DEMO["outcome"][0]
    with running_server(tmp_path) as base:
        session_id, token, code = _session(base)
        _command(base, session_id, token, {"type": "set_stage", "stage": "debating"})
        for width, height in SIZES:
            page, errors = _open(browser, base, session_id, token, (width, height))
            page.wait_for_selector(".tab[data-tab=estimation]")
            facts = page.evaluate("""() => {
              const r = (s) => { const b = document.querySelector(s).getBoundingClientRect(); return [b.left, b.right, b.width]; };
              const tabs = document.querySelector('.tabs').getBoundingClientRect();
              return { scroll: document.documentElement.scrollWidth, who: r('.who'), live: r('.live-status'), title: r('.session-title'),
                       titleText: document.querySelector('.session-title').scrollWidth,
                       tabs: [...document.querySelectorAll('.tab')].map((t) => { const b = t.getBoundingClientRect(); return [b.left >= tabs.left - 1 && b.right <= tabs.right + 1, t.scrollWidth <= t.clientWidth + 1]; }) };
            }""")
            page.screenshot(path=str(ARTIFACTS / f"layout_{width}x{height}.png"))
            page.close()
            assert errors == []
            assert facts["scroll"] <= width, (width, facts["scroll"])
            for part in ("who", "live"):
                left, right, _ = facts[part]
                assert 0 <= left and right <= width, (width, part, facts[part])
            assert facts["title"][2] >= min(facts["titleText"], 180), (width, facts["title"])  # about 20 characters at least
            assert all(inside and whole for inside, whole in facts["tabs"]), (width, facts["tabs"])

        # On a phone a participant follows the diagram and votes on a proposal.
        _command(base, session_id, token, {"type": "propose", "kind": "add", "from": outcome, "to": treatment, "reason": "sick staff stop cycling"})
        page = browser.new_page(viewport={"width": 390, "height": 844}, is_mobile=True, has_touch=True)
        errors: list[str] = []
        page.on("pageerror", lambda e: errors.append(str(e)))
        page.goto(f"{base}/join/{code}")
        page.fill("input[name=name]", "Sam")
        page.click("#join-form button[type=submit]")
        page.wait_for_selector(".canvas .node")
        assert page.locator(f'.canvas .node[data-name="{outcome}"]').count() == 1
        page.click(".tab[data-tab=debate]")
        page.locator(".vote-agree").first.click()
        page.wait_for_selector(".vote-agree.vote-mine")
        assert page.evaluate("document.documentElement.scrollWidth") <= 390
        page.screenshot(path=str(ARTIFACTS / "layout_phone_vote.png"), full_page=True)
        page.close()
    assert errors == []
