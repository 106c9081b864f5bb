"""Server-side SVG charts, returned as strings.

Three builders: :func:`forest_plot` (one estimate per row with its interval),
:func:`sensitivity_contour` (adjusted estimate over the strength of an
unmeasured confounder, with benchmark points) and :func:`overlap_histogram`
(propensity scores of the two arms, mirrored). All text is XML-escaped; the
output holds no script and no inline style, only presentation attributes and
class names (``am-chart``, ``am-...``) a stylesheet may refine.
"""

from __future__ import annotations

import math
from html import escape
from typing import Iterable, Sequence

__all__ = ["forest_plot", "sensitivity_contour", "overlap_histogram", "nice_ticks"]

INK = "#1f2933"
MUTED = "#6b7785"
GRID = "#e3e7ec"
POINT = "#1d5f8c"
CRITICAL = "#b3261e"
TREATED = "#2a7f8f"
UNTREATED = "#c7782a"
FONT = 'font-family="system-ui, sans-serif"'


def _t(value: object) -> str:
    return escape(str(value), quote=True)


def _f(value: float) -> str:
    return f"{value:.1f}"


def nice_ticks(low: float, high: float, count: int = 5) -> list[float]:
    """Round tick values covering [low, high]."""
    if not (math.isfinite(low) and math.isfinite(high)):
        return [0.0]
    if high <= low:
        high = low + 1.0
    raw = (high - low) / max(count - 1, 1)
    mag = 10 ** math.floor(math.log10(raw))
    step = min((m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw), default=10 * mag)
    start = math.floor(low / step) * step
    ticks, value = [], start
    while value <= high + step * 1e-9:
        ticks.append(round(value, 10))
        value += step
    return ticks


def _fmt(value: float) -> str:
    if value == 0:
        return "0"
    if abs(value) >= 100:
        return f"{value:.0f}"
    if abs(value) >= 1:
        return f"{value:.2f}".rstrip("0").rstrip(".")
    return f"{value:.3f}".rstrip("0").rstrip(".")


def _open(width: int, height: int, title: str, desc: str, cls: str) -> list[str]:
    return [
        f'<svg xmlns="http://www.w3.org/2000/svg" class="am-chart {cls}" role="img" '
        f'viewBox="0 0 {width} {height}" width="{width}" height="{height}" {FONT} font-size="12">',
        f"<title>{_t(title)}</title>",
        f"<desc>{_t(desc)}</desc>",
        f'<rect x="0" y="0" width="{width}" height="{height}" fill="#ffffff"/>',
    ]


def forest_plot(rows: Sequence[dict], *, title: str = "Estimate under each version of the diagram",
                x_label: str = "estimated effect", reference: float | None = 0.0,
                highlight: int | None = None) -> str:
    """One row per estimate: ``{"label", "estimate", "low", "high"}``; rows with
    ``estimate`` None show their ``problem`` text instead."""
    label_w, plot_w, right_w = 330, 300, 190
    row_h, top, bottom = 30, 46, 46
    width = label_w + plot_w + right_w
    height = top + bottom + row_h * max(len(rows), 1)
    values = [v for r in rows if r.get("estimate") is not None for v in (r["low"], r["high"], r["estimate"])]
    if reference is not None:
        values.append(reference)
    low, high = (min(values), max(values)) if values else (-1.0, 1.0)
    pad = (high - low) * 0.08 or 0.5
    ticks = nice_ticks(low - pad, high + pad)
    lo, hi = ticks[0], ticks[-1]

    def x(v: float) -> float:
        return label_w + (v - lo) / (hi - lo) * plot_w

    out = _open(width, height, title, f"{len(rows)} estimates with 95% intervals", "am-forest")
    out.append(f'<text x="12" y="24" font-size="14" font-weight="600" fill="{INK}">{_t(title)}</text>')
    base = top + row_h * max(len(rows), 1)
    for tv in ticks:
        out.append(f'<line x1="{_f(x(tv))}" y1="{top - 6}" x2="{_f(x(tv))}" y2="{base}" stroke="{GRID}"/>')
        out.append(f'<text x="{_f(x(tv))}" y="{base + 16}" text-anchor="middle" fill="{MUTED}">{_t(_fmt(tv))}</text>')
    out.append(f'<text x="{label_w + plot_w / 2}" y="{base + 34}" text-anchor="middle" fill="{MUTED}">{_t(x_label)}</text>')
    out.append(f'<text x="{label_w + plot_w + 12}" y="{top - 12}" fill="{MUTED}">estimate [95% interval]</text>')
    if reference is not None and lo <= reference <= hi:
        out.append(f'<line class="am-reference" x1="{_f(x(reference))}" y1="{top - 6}" x2="{_f(x(reference))}" '
                   f'y2="{base}" stroke="{MUTED}" stroke-dasharray="4 3"/>')
    for i, row in enumerate(rows):
        cy = top + row_h * i + row_h / 2
        if i == highlight:
            out.append(f'<rect x="4" y="{_f(cy - row_h / 2)}" width="{width - 8}" height="{row_h}" fill="#f2f6fa"/>')
        label = str(row.get("label", ""))
        shown = label if len(label) <= 52 else label[:50] + "…"
        out.append(f'<text class="am-row-label" x="12" y="{_f(cy + 4)}" fill="{INK}">{_t(shown)}<title>{_t(label)}</title></text>')
        if row.get("estimate") is None:
            out.append(f'<text x="{label_w + 6}" y="{_f(cy + 4)}" fill="{MUTED}" font-style="italic">'
                       f'{_t(row.get("problem") or "no estimate")[:90]}</text>')
            continue
        est, rlo, rhi = row["estimate"], row["low"], row["high"]
        out.append(f'<line x1="{_f(x(rlo))}" y1="{_f(cy)}" x2="{_f(x(rhi))}" y2="{_f(cy)}" stroke="{POINT}" stroke-width="2"/>')
        for end in (rlo, rhi):
            out.append(f'<line x1="{_f(x(end))}" y1="{_f(cy - 5)}" x2="{_f(x(end))}" y2="{_f(cy + 5)}" stroke="{POINT}" stroke-width="2"/>')
        out.append(f'<rect class="am-point" x="{_f(x(est) - 5)}" y="{_f(cy - 5)}" width="10" height="10" fill="{POINT}"/>')
        out.append(f'<text x="{label_w + plot_w + 12}" y="{_f(cy + 4)}" fill="{INK}">'
                   f'{_t(_fmt(est))} [{_t(_fmt(rlo))}, {_t(_fmt(rhi))}]</text>')
    out.append("</svg>")
    return "".join(out)


def sensitivity_contour(contour: dict, *, benchmarks: Iterable[dict] = (), estimate: float | None = None,
                        robustness_value: float | None = None,
                        title: str = "How strong would an unmeasured confounder have to be?") -> str:
    """Adjusted-estimate curves over (partial R2 with treatment, partial R2 with outcome)."""
    size, left, top, right, bottom = 380, 64, 40, 200, 52
    width, height = left + size + right, top + size + bottom
    r2_max = float(contour["r2_max"])

    def px(v: float) -> float:
        return left + v / r2_max * size

    def py(v: float) -> float:
        return top + size - v / r2_max * size

    out = _open(width, height, title, "Contours of the bias-adjusted estimate; the red dashed curve is where it reaches zero", "am-contour")
    out.append(f'<text x="12" y="22" font-size="14" font-weight="600" fill="{INK}">{_t(title)}</text>')
    for tv in nice_ticks(0, r2_max):
        if tv > r2_max + 1e-12:
            continue
        out.append(f'<line x1="{_f(px(tv))}" y1="{top}" x2="{_f(px(tv))}" y2="{top + size}" stroke="{GRID}"/>')
        out.append(f'<line x1="{left}" y1="{_f(py(tv))}" x2="{left + size}" y2="{_f(py(tv))}" stroke="{GRID}"/>')
        out.append(f'<text x="{_f(px(tv))}" y="{top + size + 16}" text-anchor="middle" fill="{MUTED}">{_t(_fmt(tv))}</text>')
        out.append(f'<text x="{left - 6}" y="{_f(py(tv) + 4)}" text-anchor="end" fill="{MUTED}">{_t(_fmt(tv))}</text>')
    out.append(f'<rect x="{left}" y="{top}" width="{size}" height="{size}" fill="none" stroke="{MUTED}"/>')
    out.append(f'<text x="{left + size / 2}" y="{top + size + 38}" text-anchor="middle" fill="{INK}">'
               "partial R² of the confounder with the treatment</text>")
    out.append(f'<text transform="translate(16 {top + size / 2}) rotate(-90)" text-anchor="middle" fill="{INK}">'
               "partial R² with the outcome</text>")
    for line in contour["lines"]:
        pts = [p for p in line["points"] if 0 <= p[1] <= r2_max]
        if len(pts) < 2:
            continue
        path = " ".join(f"{_f(px(a))},{_f(py(b))}" for a, b in pts)
        critical = line.get("critical")
        colour, dash = (CRITICAL, ' stroke-dasharray="6 4"') if critical else (POINT, "")
        out.append(f'<polyline class="am-level{" am-critical" if critical else ""}" points="{path}" fill="none" '
                   f'stroke="{colour}" stroke-width="{2 if critical else 1.2}"{dash}/>')
        lx, ly = pts[-1]
        out.append(f'<text x="{_f(px(lx) + 4)}" y="{_f(py(ly) + 4)}" fill="{colour}" font-size="11">{_t(_fmt(line["level"]))}</text>')
    if estimate is not None:
        out.append(f'<circle cx="{_f(px(0))}" cy="{_f(py(0))}" r="4" fill="{INK}"/>')
        out.append(f'<text x="{_f(px(0) + 8)}" y="{_f(py(0) - 8)}" fill="{INK}">as estimated: {_t(_fmt(estimate))}</text>')
    if robustness_value is not None and 0 < robustness_value <= r2_max:
        out.append(f'<circle cx="{_f(px(robustness_value))}" cy="{_f(py(robustness_value))}" r="4" fill="none" stroke="{CRITICAL}" stroke-width="2"/>')
    legend_x = left + size + 52
    benchmarks = list(benchmarks)
    firsts = [b for b in benchmarks if b["k"] == 1]
    strongest = max(firsts, key=lambda b: max(b["r2dz"], b["r2yz"]))["variable"] if firsts else None
    benchmarks = [b for b in benchmarks if b["k"] == 1 or b["variable"] == strongest]
    out.append(f'<text x="{legend_x}" y="{top + 10}" fill="{INK}" font-weight="600">Benchmarks</text>')
    row = 0
    for b in benchmarks:
        if b["r2dz"] > r2_max or b["r2yz"] > r2_max:
            continue
        cx, cy = px(b["r2dz"]), py(b["r2yz"])
        out.append(f'<path class="am-benchmark" d="M{_f(cx)},{_f(cy - 5)} L{_f(cx + 5)},{_f(cy)} L{_f(cx)},{_f(cy + 5)} '
                   f'L{_f(cx - 5)},{_f(cy)} z" fill="{UNTREATED}"/>')
        label = f'{_fmt(b["k"])}× {b["variable"]}'
        out.append(f'<text x="{_f(cx + 7)}" y="{_f(cy - 4)}" fill="{INK}" font-size="10">{_t(label)}</text>')
        if row < 14:
            out.append(f'<text x="{legend_x}" y="{top + 28 + 15 * row}" fill="{INK}" font-size="11">'
                       f'{_t(label)}: {_t(_fmt(b["adjusted_estimate"]))}</text>')

        row += 1
    if row == 0:
        out.append(f'<text x="{legend_x}" y="{top + 28}" fill="{MUTED}" font-size="11">none inside the plot</text>')
    out.append("</svg>")
    return "".join(out)


def overlap_histogram(overlap: dict, *, title: str = "Propensity scores by arm",
                      treated_label: str = "treated", untreated_label: str = "not treated") -> str:
    """Mirrored histogram: treated above the axis, untreated below."""
    left, top, plot_w, half, bottom = 56, 44, 460, 110, 48
    width, height = left + plot_w + 24, top + 2 * half + bottom
    edges = overlap["bin_edges"]
    up, down = overlap["treated_counts"], overlap["untreated_counts"]
    peak = max([1] + list(up) + list(down))
    mid = top + half
    out = _open(width, height, title, "Distribution of the estimated probability of treatment in each arm", "am-overlap")
    out.append(f'<text x="12" y="22" font-size="14" font-weight="600" fill="{INK}">{_t(title)}</text>')
    bw = plot_w / (len(edges) - 1)
    for i, (a, b) in enumerate(zip(up, down)):
        x0 = left + i * bw
        ha, hb = a / peak * (half - 6), b / peak * (half - 6)
        if a:
            out.append(f'<rect class="am-treated" x="{_f(x0 + 1)}" y="{_f(mid - ha)}" width="{_f(bw - 2)}" height="{_f(ha)}" fill="{TREATED}"/>')
        if b:
            out.append(f'<rect class="am-untreated" x="{_f(x0 + 1)}" y="{_f(mid)}" width="{_f(bw - 2)}" height="{_f(hb)}" fill="{UNTREATED}"/>')
    out.append(f'<line x1="{left}" y1="{mid}" x2="{left + plot_w}" y2="{mid}" stroke="{INK}"/>')
    for tv in (0, 0.25, 0.5, 0.75, 1.0):
        xx = left + tv * plot_w
        out.append(f'<line x1="{_f(xx)}" y1="{top + 2 * half}" x2="{_f(xx)}" y2="{top + 2 * half + 5}" stroke="{MUTED}"/>')
        out.append(f'<text x="{_f(xx)}" y="{top + 2 * half + 18}" text-anchor="middle" fill="{MUTED}">{_t(_fmt(tv))}</text>')
    out.append(f'<text x="{left + plot_w / 2}" y="{top + 2 * half + 36}" text-anchor="middle" fill="{INK}">estimated probability of treatment</text>')
    out.append(f'<text x="{left + 6}" y="{top + 12}" fill="{TREATED}">{_t(treated_label)} (n={sum(up)})</text>')
    out.append(f'<text x="{left + 6}" y="{top + 2 * half - 6}" fill="{UNTREATED}">{_t(untreated_label)} (n={sum(down)})</text>')
    out.append(f'<text x="{left - 6}" y="{mid - half + 12}" text-anchor="end" fill="{MUTED}">{peak}</text>')
    out.append(f'<text x="{left - 6}" y="{mid + 4}" text-anchor="end" fill="{MUTED}">0</text>')
    out.append(f'<text x="{left - 6}" y="{mid + half - 4}" text-anchor="end" fill="{MUTED}">{peak}</text>')
    out.append("</svg>")
    return "".join(out)
