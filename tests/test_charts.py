"""SVG chart builders: well-formed XML, escaped text, and marks where the data put them."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from app.estimation import sensitivity as S
from app.reporting.charts import forest_plot, hidden_cause_chart, nice_ticks, overlap_histogram

NS = "{http://www.w3.org/2000/svg}"


def test_forest_plot_is_valid_svg_with_escaped_labels():
    rows = [{"label": "with <b>&\"a\"→b</b>", "estimate": 1.0, "low": 0.5, "high": 1.5},
            {"label": "without a→b", "estimate": None, "problem": "not identified <here>"}]
    text = forest_plot(rows)
    root = ET.fromstring(text)  # raises on unescaped markup
    assert "<b>" not in text and "&lt;b&gt;" in text
    assert len(root.findall(f".//{NS}rect[@class='am-point']")) == 1
    assert "not identified &lt;here&gt;" in text


def test_forest_points_are_ordered_like_the_estimates():
    rows = [{"label": str(v), "estimate": v, "low": v - 0.1, "high": v + 0.1} for v in (-2.0, 0.5, 3.0)]
    root = ET.fromstring(forest_plot(rows))
    xs = [float(r.get("x")) for r in root.findall(f".//{NS}rect[@class='am-point']")]
    assert xs == sorted(xs) and xs[0] < xs[1] < xs[2]


def _darfur_like(statements):
    est, se, df = 0.0973, 0.0233, 783  # Cinelli & Hazlett (2020) Darfur example, from memory
    room = S.room_reading(statements, {"female": (0.0091, 0.11), "age": (0.001, 0.002)},
                          estimate=est, se=se, df=df)
    return {"path": S.interval_path(est, se, df, top=0.2), "room": room,
            "robustness_value": S.robustness_value(est / se, df),
            "robustness_value_alpha": S.robustness_value(est / se, df, alpha=0.05)}


def test_hidden_cause_chart_marks_each_usable_statement_and_names_median_and_strongest():
    statements = [{"by": "Ana <b>", "variable": "female", "times": 1.0, "words": "about as strong as female"},
                  {"by": "Ben", "variable": "female", "times": 3.0},
                  {"by": "Cy", "variable": "age", "times": 2.0},
                  {"by": "Di", "variable": "region", "times": 1.0}]
    text = hidden_cause_chart(_darfur_like(statements))
    root = ET.fromstring(text)
    assert "<b>" not in text
    assert len(root.findall(f".//{NS}g[@class='am-stated']")) == 3  # the unusable one is not drawn
    labels = [t.text for t in root.findall(f".//{NS}text[@class='am-stated-label']")]
    assert any(t.startswith("room's median: about as strong as female") for t in labels)
    assert any(t.startswith("room's strongest: 3 times as strong as female") for t in labels)
    assert root.findall(f".//{NS}polygon[@class='am-band']") and root.findall(f".//{NS}line[@class='am-zero']")


def test_hidden_cause_chart_path_falls_to_zero_where_the_robustness_value_says():
    """The estimate line crosses the zero line at the x of the 'estimate reaches 0' mark."""
    chart = _darfur_like([])
    root = ET.fromstring(hidden_cause_chart(chart))
    zero_y = float(root.find(f".//{NS}line[@class='am-zero']").get("y1"))
    points = [tuple(map(float, p.split(","))) for p in root.find(f".//{NS}polyline[@class='am-path']").get("points").split()]
    cross = next(x for (x, y), (x2, y2) in zip(points, points[1:]) if (y - zero_y) * (y2 - zero_y) <= 0)
    marks = [float(m.get("x1")) for m in root.findall(f".//{NS}line[@class='am-threshold']")]
    assert min(abs(cross - m) for m in marks) < 8
    assert "No stated hidden cause" in ET.tostring(root, encoding="unicode")


def test_overlap_histogram_bars_match_counts():
    overlap = {"bin_edges": [0, 0.5, 1.0], "treated_counts": [0, 3], "untreated_counts": [2, 1]}
    root = ET.fromstring(overlap_histogram(overlap, treated_label="joined & <x>"))
    assert len(root.findall(f".//{NS}rect[@class='am-treated']")) == 1
    assert len(root.findall(f".//{NS}rect[@class='am-untreated']")) == 2


def test_nice_ticks_cover_the_range():
    ticks = nice_ticks(-1.77, 0.0)
    assert ticks[0] <= -1.77 and ticks[-1] >= 0.0 and len(ticks) <= 8
