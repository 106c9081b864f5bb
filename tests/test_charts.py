"""SVG chart builders: well-formed XML, escaped text, and marks where the data put them."""

from __future__ import annotations

import xml.etree.ElementTree as ET

from app.estimation.sensitivity import contour_lines, robustness_value
from app.reporting.charts import forest_plot, nice_ticks, overlap_histogram, sensitivity_contour

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


def test_contour_has_critical_line_and_benchmarks():
    est, se, df = 0.0973, 0.0233, 783  # Cinelli & Hazlett (2020) Darfur example, from memory
    contour = contour_lines(est, se, df, r2_max=0.4)
    bench = [{"variable": "female", "k": 1.0, "r2dz": 0.0092, "r2yz": 0.1246, "adjusted_estimate": 0.075}]
    root = ET.fromstring(sensitivity_contour(contour, benchmarks=bench, estimate=est,
                                             robustness_value=robustness_value(est / se, df)))
    assert root.findall(f".//{NS}polyline[@class='am-level am-critical']")
    assert len(root.findall(f".//{NS}path[@class='am-benchmark']")) == 1


def test_overlap_histogram_bars_match_counts():
    overlap = {"bin_edges": [0, 0.5, 1.0], "treated_counts": [0, 3], "untreated_counts": [2, 1]}
    root = ET.fromstring(overlap_histogram(overlap, treated_label="joined & <x>"))
    assert len(root.findall(f".//{NS}rect[@class='am-treated']")) == 1
    assert len(root.findall(f".//{NS}rect[@class='am-untreated']")) == 2


def test_nice_ticks_cover_the_range():
    ticks = nice_ticks(-1.77, 0.0)
    assert ticks[0] <= -1.77 and ticks[-1] >= 0.0 and len(ticks) <= 8
