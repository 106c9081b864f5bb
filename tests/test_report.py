"""The workshop report: sections, numbers, escaping of user text, self-containment, CLI.

References outside the project: the estimate the report states is recomputed
here with statsmodels OLS and HC1 standard errors on sample_data/cycle_to_work.csv
(White 1980 / MacKinnon & White 1985 robust errors as statsmodels implements
them); the HTML is parsed with the standard library's html.parser and the
diagram SVG with xml.etree.ElementTree.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET

import pandas as pd
import pytest
import statsmodels.api as sm
from fastapi.testclient import TestClient

from app.graph.document import parse_document
from app.reporting.cli import add_parsers
from app.reporting.diagram_svg import _size, diagram_svg
from app.reporting.report import SECTIONS, num, plain_estimate
from tests.helpers.app import make_app
from tests.helpers.report_page import parse
from tests.helpers.workshop import SAMPLE, build_workshop

SVG_NS = "{http://www.w3.org/2000/svg}"


@pytest.fixture(name="reported", scope="module")
def fixture_reported(tmp_path_factory):
    application = make_app(tmp_path_factory.mktemp("report"))
    with TestClient(application) as client:
        workshop = build_workshop(client)
        r = workshop.get("/report", workshop.analyst)
        assert r.status_code == 200, r.text
        bundle = workshop.get("/export/bundle").json()
        yield workshop, r, bundle


def test_report_has_every_section_in_order(reported):
    _, response, _ = reported
    page = parse(response.text)
    assert page.sections == [sid for sid, _ in SECTIONS]
    assert page.headings == [title for _, title in SECTIONS]


def test_report_is_self_contained(reported):
    _, response, _ = reported
    html = response.text
    assert "<script" not in html and "<link" not in html and "<img" not in html
    assert not re.search(r"(?:src|href)\s*=\s*[\"']?(?:https?:)?//", html)
    hrefs = [a.get("href") for tag, a in parse(html).tags if "href" in a]
    assert hrefs and all(h.startswith("#") for h in hrefs)
    assert "@media print" in html and "break-before: page" in html
    csp = response.headers["content-security-policy"]
    assert "default-src 'none'" in csp and "script-src" not in csp


def test_report_states_the_estimate_statsmodels_gives(reported):
    """OLS of sick_days on bike_lease and the adjustment set with HC1 errors, fitted here."""
    _, response, bundle = reported
    est = bundle["estimation"]["estimate"]
    frame = pd.read_csv(SAMPLE / "cycle_to_work.csv")
    design = pd.get_dummies(frame[["bike_lease", "age", "commute_km", "department", "fitness"]],
                            columns=["department"], drop_first=True, dtype=float)
    fit = sm.OLS(frame["sick_days"], sm.add_constant(design)).fit(cov_type="HC1")
    low, high = fit.conf_int().loc["bike_lease"]
    assert est["estimate"] == pytest.approx(fit.params["bike_lease"], rel=1e-8)
    text = parse(response.text).full_text
    assert f"{num(fit.params['bike_lease'])} [{num(low)}, {num(high)}]" in text
    assert f"about {num(abs(fit.params['bike_lease']))} lower on average" in text
    assert f"runs from {num(low)} to {num(high)}" in text


def test_report_explains_the_adjustment_by_the_paths_it_blocks(reported):
    _, response, _ = reported
    text = parse(response.text).full_text
    assert "Adjustment set: age, commute_km, department and fitness" in text
    assert "bike_lease ← fitness → sick_days" in text and "blocked at fitness: adjusted for" in text
    assert "Paths closed already, at a collider" in text and "bike_lease → engagement_score ← sick_days" in text
    assert "Causal paths, left open on purpose (2)" in text


def test_report_lists_every_assumption_and_the_cautions(reported):
    _, response, bundle = reported
    text = parse(response.text).full_text
    for arrow in bundle["absent_arrows"]["arrows"]:
        assert f"({arrow['from']}) has no direct effect on" in text
    assert "Health consciousness (health_consciousness): drawn as unmeasured" in text
    assert "This is an observational estimate" in text
    assert "not a substitute for a randomised trial or for professional judgement" in text


def test_report_carries_the_decision_record(reported):
    _, response, _ = reported
    text = parse(response.text).full_text
    assert "#1 add commute_km → fitness" in text and "disputed" in text
    assert "proposed by Pat (occupational health)" in text
    assert "“fitness was measured first”" in text and "“field staff cannot cycle”" in text
    assert "rejected proposal #2: remove department → bike_lease" in text
    assert "moved the session from debating to agreed" in text


def test_report_draws_the_charts_as_inline_svg(reported):
    _, response, _ = reported
    html = response.text
    for cls in ("am-diagram", "am-legend", "am-forest", "am-shift"):
        assert f'class="{cls}' in html or f'class="am-chart {cls}"' in html, cls


def test_report_needs_analyst_or_facilitator(reported):
    workshop, _, _ = reported
    assert workshop.get("/report", workshop.participant).status_code == 403
    assert workshop.get("/report", workshop.facilitator).status_code == 200


def test_uploaded_bundle_report_ignores_any_markup_smuggled_into_it(reported):
    workshop, _, bundle = reported
    tampered = json.loads(json.dumps(bundle))
    tampered["estimation"]["disputes"]["charts"] = {"forest": "<script>steal()</script>"}
    tampered["disputes"]["note"] = "<img src=x onerror=steal()>"
    r = workshop.client.post("/api/records/report", content=json.dumps(tampered))
    assert r.status_code == 200
    assert "steal()</script>" not in r.text and "<img" not in r.text
    assert "&lt;img src=x onerror=steal()&gt;" in r.text


MARKUP_DOC = {
    "format": "arrowmoot-graph", "version": 1,
    "variables": [
        {"name": "<b>x</b>", "label": "<i>Treated</i>", "description": "<img src=x onerror=alert(1)>", "x": 100, "y": 100},
        {"name": "<script>alert(1)</script>", "x": 500, "y": 100},
        {"name": 'a & b "q"', "label": "</text><text>broken", "x": 300, "y": 0},
        {"name": "]]><u>", "latent": True, "x": 300, "y": 250},
    ],
    "arrows": [{"from": 'a & b "q"', "to": "<b>x</b>"}, {"from": 'a & b "q"', "to": "<script>alert(1)</script>"},
               {"from": "<b>x</b>", "to": "<script>alert(1)</script>"},
               {"from": "]]><u>", "to": "<script>alert(1)</script>"}],
    "treatment": ["<b>x</b>"], "outcome": ["<script>alert(1)</script>"],
}


def test_markup_in_names_shows_as_text(tmp_path):
    application = make_app(tmp_path)
    with TestClient(application) as client:
        workshop = build_workshop(client, document=MARKUP_DOC, estimate=False, title="<i>Markup</i> & co")
        r = workshop.get("/report")
    assert r.status_code == 200, r.text
    html = r.text
    assert "<script" not in html and "<b>x</b>" not in html and "<img" not in html and "<u>" not in html
    page = parse(html)
    assert {tag for tag, _ in page.tags} <= {
        "html", "head", "meta", "title", "style", "body", "header", "p", "h1", "dl", "div", "dt", "dd", "nav",
        "ol", "li", "a", "main", "section", "h2", "strong", "table", "thead", "tr", "th", "tbody", "td", "span",
        "br", "code", "em", "figure", "figcaption", "h3", "ul", "footer", "svg", "defs", "marker", "path",
        "pattern", "rect", "line", "g", "polygon", "text", "desc"}
    text = page.full_text
    for shown in ("<b>x</b>", "<script>alert(1)</script>", 'a & b "q"', "<img src=x onerror=alert(1)>",
                  "<i>Markup</i> & co", "</text><text>broken"):
        assert shown in text, shown
    # the diagram is well-formed XML and its labels are the raw names
    svg = re.search(r'<svg[^>]*class="am-diagram".*?</svg>', html, re.S).group(0)
    root = ET.fromstring(svg)
    labels = {t.text for t in root.iter(SVG_NS + "text")}
    assert {"<i>Treated</i>", "</text><text>broken", "]]><u>"} <= labels
    titles = {t.text for t in root.iter(SVG_NS + "title")}
    assert {"<b>x</b>", "<script>alert(1)</script>", 'a & b "q"'} <= titles


def test_diagram_svg_follows_the_visual_language():
    doc = json.loads((SAMPLE / "cycle_to_work.json").read_text())
    diagram = parse_document(doc)
    svg = diagram_svg(diagram, adjusted=["age", "fitness"], disputed=[("fitness", "bike_lease")],
                      proposed=[("commute_km", "fitness")])
    root = ET.fromstring(svg)
    lines = [el for el in root.iter(SVG_NS + "path") if "am-arrow" in (el.get("class") or "")]
    assert len(lines) == len(diagram.arrows) + 1
    dashes = {el.get("class").split()[-1]: el.get("stroke-dasharray") for el in lines}
    assert dashes == {"am-arrow-drawn": None, "am-arrow-disputed": "11 6", "am-arrow-proposed": "3 5"}
    polygons = list(root.iter(SVG_NS + "polygon"))
    assert len(polygons) == 1  # the treatment's pointed box
    rects = list(root.iter(SVG_NS + "rect"))
    assert sum(1 for r in rects if r.get("stroke-dasharray") == "0.5 6") == 2  # adjustment rings
    assert sum(1 for r in rects if r.get("stroke-dasharray") == "6 4") == len(diagram.latent)
    texts = [t.text for t in root.iter(SVG_NS + "text")]
    assert "TREATMENT" in texts and "OUTCOME" in texts and "UNMEASURED" in texts
    assert texts.count("ADJUSTED") == 2


def test_diagram_boxes_do_not_overlap():
    diagram = parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))
    root = ET.fromstring(diagram_svg(diagram))
    boxes = []
    for g in root.iter(SVG_NS + "g"):
        if g.get("class") != "am-node":
            continue
        x, y = map(float, re.match(r"translate\(([-\d.]+),([-\d.]+)\)", g.get("transform")).groups())
        name = g.find(SVG_NS + "title").text
        v = diagram.variable(name)
        w, h, _ = _size(v.label or v.name)
        extra = 14 if name in diagram.treatment else 0
        boxes.append((x - w / 2 - extra, y - h / 2, x + w / 2 + extra, y + h / 2))
    for i, a in enumerate(boxes):
        for b in boxes[i + 1:]:
            assert a[2] <= b[0] or b[2] <= a[0] or a[3] <= b[1] or b[3] <= a[1], (a, b)


def test_plain_words_say_when_the_interval_includes_zero():
    diagram = parse_document(json.loads((SAMPLE / "cycle_to_work.json").read_text()))
    est = {"estimate": 0.4, "ci": [-0.2, 1.0], "treatment": "bike_lease", "outcome": "sick_days", "n_used": 120,
           "columns": {"bike_lease": {"kind": "binary"}}}
    text = plain_estimate(est, diagram)
    assert "about 0.4 higher on average" in text and "includes zero" in text
    assert "comparing bike_lease = 1 with bike_lease = 0" in text


def _cli(argv):
    import argparse

    parser = argparse.ArgumentParser(prog="arrowmoot")
    add_parsers(parser.add_subparsers())
    args = parser.parse_args(argv)
    return args.run(args)


def test_cli_report_from_a_bundle_file(reported, tmp_path, capsys):
    _, _, bundle = reported
    source, out = tmp_path / "s.record.json", tmp_path / "report.html"
    source.write_text(json.dumps(bundle))
    assert _cli(["report", str(source), "-o", str(out)]) == 0
    page = parse(out.read_text())
    assert page.sections == [sid for sid, _ in SECTIONS]
    (tmp_path / "graph.json").write_text(json.dumps(bundle["graph"]))
    assert _cli(["report", str(tmp_path / "graph.json")]) == 2
    err = capsys.readouterr().err
    assert "this is a graph document, not a record bundle" in err and "Traceback" not in err


def test_report_of_an_instrument_estimate_says_why_nothing_was_adjusted(tmp_path):
    """With fitness unmeasured no adjustment set works; voucher_draw is the demo's instrument."""
    application = make_app(tmp_path)
    with TestClient(application) as client:
        workshop = build_workshop(client, estimate=False)
        base, head = f"/api/sessions/{workshop.session_id}/estimation", workshop.headers(workshop.analyst)
        client.put(f"{base}/data?name=c.csv", content=(SAMPLE / "cycle_to_work.csv").read_bytes(), headers=head)
        mapping = client.get(base, headers=head).json()["data"]["mapping"]
        mapping.pop("fitness")
        assert client.put(f"{base}/mapping", json={"mapping": mapping}, headers=head).status_code == 200
        assert client.post(f"{base}/estimate", json={}, headers=head).json()["result"]["strategy"] == "instrument"
        html = workshop.get("/report").text
    text = parse(html).full_text
    assert "No adjustment set works with the measured variables, so the effect was estimated with voucher_draw as an instrument" in text
    assert "{fitness}" in text and "Adjustment set:" not in text
    assert "Baseline fitness (fitness)" not in text or "no column of the data measures it" in text
    root = ET.fromstring(re.search(r'<svg[^>]*class="am-diagram".*?</svg>', html, re.S).group(0))
    assert not [t for t in root.iter(SVG_NS + "text") if t.text == "ADJUSTED"]


def test_diagram_labels_pending_proposals_and_tallies_as_the_canvas_does(reported):
    """static/visual-language.md: '#n add?', '#n drop?', '#n flip?' and '+agree −disagree ?unsure'."""
    from app.reporting.report import report_context

    _, _, bundle = reported
    changed = json.loads(json.dumps(bundle))
    second = changed["proposals"][1]
    second["status"] = "disputed"
    for p in changed["workshop"]["state"]["proposals"]:
        if p["id"] == second["id"]:
            p["status"] = "disputed"
    root = ET.fromstring(report_context(changed)["figure"])
    badges = [t.text for g in root.iter(SVG_NS + "g") if g.get("class") == "am-badge" for t in g.iter(SVG_NS + "text")]
    assert "#1 add? +1 −1 ?0" in badges
    assert "disputed  #2 drop? +0 −1 ?0" in badges  # the drawn arrow is now under a pending removal
    assert "+0 −0 ?1" in badges  # the vote on voucher_draw → bike_lease


def test_report_puts_the_verdict_and_a_caution_under_the_headline(reported):
    _, response, bundle = reported
    verdict = bundle["estimation"]["validation"]
    html = response.text
    estimate = html.split('<section id="estimate"', 1)[1].split("</section>", 1)[0]
    after_headline = estimate.split('class="headline"', 1)[1]
    first_lines = after_headline.split("<p", 4)[1:4]
    assert any(f"Checks against the data: {verdict['verdict']}" in line for line in first_lines)
    assert any("Caution." in line for line in first_lines)
    checks = parse(html.split('<section id="validation"', 1)[1].split("</section>", 1)[0]).full_text
    for item in verdict["items"]:
        assert item["label"] in checks and item["why"] in checks


def test_report_says_when_the_data_are_the_shipped_demo_data(reported):
    _, response, bundle = reported
    assert "Demo data." in parse(response.text).full_text
    changed = json.loads(json.dumps(bundle))
    changed["data"]["sha256"] = "0" * 64
    from app.reporting.report import render_report

    assert "Demo data." not in parse(render_report(changed)).full_text
