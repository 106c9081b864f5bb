"""Server-side SVG charts, returned as strings.

Three builders: :func:`forest_plot` (one estimate per row with its interval),
:func:`hidden_cause_chart` (the estimate's interval as a hidden common
cause grows stronger, with the room's stated causes marked) and :func:`overlap_histogram`
(propensity scores of the two arms, mirrored). All text is XML-escaped; the
output holds no script and no inline style, only presentation attributes and
class names (``am-chart``, ``am-...``) a stylesheet may refine.
"""

from __future__ import annotations

import math
from html import escape
from typing import Sequence

__all__ = ["forest_plot", "hidden_cause_chart", "overlap_histogram", "nice_ticks"]

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


def hidden_cause_chart(regression: dict, *,
                       title: str = "The interval as a hidden common cause grows stronger") -> str:
    """The estimate and its interval (shaded band) against the strength of a hidden common
    cause equally strong on both sides (x: share of what the adjustment set leaves
    unexplained). The room's stated causes stand as vertical bars with their own interval,
    placed where an equally strong cause would move the estimate as far; the median and
    the strongest are named."""
    path = regression["path"]
    room = regression.get("room") or {}
    stated = [r for r in room.get("statements") or [] if r.get("usable")]
    left, top, plot_w, plot_h, bottom = 70, 62, 500, 220, 96
    width, height = left + plot_w + 80, top + plot_h + bottom
    x_max = path[-1]["strength"] or 1.0
    values = [v for p in path for v in (p["low"], p["high"])] + [0.0]
    values += [v for r in stated for v in r["interval_if_present"]]
    ticks_y = nice_ticks(min(values), max(values))
    if len(ticks_y) > 1 and ticks_y[-1] < max(values):
        ticks_y.append(round(2 * ticks_y[-1] - ticks_y[-2], 10))
    lo, hi = ticks_y[0], ticks_y[-1]

    def px(v: float) -> float:
        return left + min(v, x_max) / x_max * plot_w

    def py(v: float) -> float:
        return top + plot_h - (v - lo) / (hi - lo) * plot_h

    out = _open(width, height, title, "Estimate and 95% interval for hidden causes of growing strength, "
                "with the room's stated causes marked", "am-shift")
    out.append(f'<text x="12" y="22" font-size="14" font-weight="600" fill="{INK}">{_t(title)}</text>')
    for tv in ticks_y:
        out.append(f'<line x1="{left}" y1="{_f(py(tv))}" x2="{left + plot_w}" y2="{_f(py(tv))}" stroke="{GRID}"/>')
        out.append(f'<text x="{left - 6}" y="{_f(py(tv) + 4)}" text-anchor="end" fill="{MUTED}">{_t(_fmt(tv))}</text>')
    for tv in nice_ticks(0, x_max):
        if tv > x_max + 1e-12:
            continue
        out.append(f'<line x1="{_f(px(tv))}" y1="{top + plot_h}" x2="{_f(px(tv))}" y2="{top + plot_h + 5}" stroke="{MUTED}"/>')
        out.append(f'<text x="{_f(px(tv))}" y="{top + plot_h + 18}" text-anchor="middle" fill="{MUTED}">'
                   f'{_t(_fmt(100 * tv))}%</text>')
    out.append(f'<text x="{left + plot_w / 2}" y="{top + plot_h + 36}" text-anchor="middle" fill="{INK}">'
               "strength of the hidden cause: share of the remaining variance it explains, "
               "in treatment and outcome alike</text>")
    out.append(f'<text transform="translate(18 {top + plot_h / 2}) rotate(-90)" text-anchor="middle" '
               f'fill="{INK}">effect if the cause were adjusted for</text>')
    band = [f"{_f(px(p['strength']))},{_f(py(p['high']))}" for p in path]
    band += [f"{_f(px(p['strength']))},{_f(py(p['low']))}" for p in reversed(path)]
    out.append(f'<polygon class="am-band" points="{" ".join(band)}" fill="{POINT}" fill-opacity="0.16" stroke="none"/>')
    line = " ".join(f"{_f(px(p['strength']))},{_f(py(p['estimate']))}" for p in path)
    out.append(f'<polyline class="am-path" points="{line}" fill="none" stroke="{POINT}" stroke-width="2"/>')
    if lo <= 0 <= hi:
        out.append(f'<line class="am-zero" x1="{left}" y1="{_f(py(0))}" x2="{left + plot_w}" y2="{_f(py(0))}" '
                   f'stroke="{INK}" stroke-width="1"/>')
        out.append(f'<text x="{left + plot_w + 4}" y="{_f(py(0) + 4)}" fill="{INK}">no effect</text>')
    for key, label in (("robustness_value_alpha", "interval reaches 0"), ("robustness_value", "estimate reaches 0")):
        v = regression.get(key)
        if v and 0 < v <= x_max:
            out.append(f'<line class="am-threshold" x1="{_f(px(v))}" y1="{top}" x2="{_f(px(v))}" '
                       f'y2="{top + plot_h}" stroke="{MUTED}" stroke-width="1"/>')
            row = 0 if key == "robustness_value_alpha" else 1
            anchor = "end" if px(v) > left + plot_w * 0.55 else "start"
            out.append(f'<line x1="{_f(px(v))}" y1="{top - 14 + 12 * row}" x2="{_f(px(v))}" y2="{top}" '
                       f'stroke="{MUTED}" stroke-width="1"/>')
            out.append(f'<text x="{_f(px(v) + (-3 if anchor == "end" else 3))}" y="{top - 16 + 12 * row}" '
                       f'text-anchor="{anchor}" fill="{MUTED}" font-size="11">{_t(label)} at {100 * v:.1f}%</text>')
    if room.get("median") == room.get("strongest"):
        named = [(room.get("median"), "the room's statement")]
    else:
        named = [(room.get("median"), "room's median"), (room.get("strongest"), "room's strongest")]
    for r in stated:
        cx = px(r["equal_strength"])
        low, high = r["interval_if_present"]
        out.append(f'<g class="am-stated"><line x1="{_f(cx)}" y1="{_f(py(low))}" x2="{_f(cx)}" y2="{_f(py(high))}" '
                   f'stroke="{UNTREATED}" stroke-width="3" stroke-linecap="round"/>'
                   f'<circle cx="{_f(cx)}" cy="{_f(py(r["estimate_if_present"]))}" r="4.5" fill="#ffffff" '
                   f'stroke="{UNTREATED}" stroke-width="2"/><title>{_t(r.get("by") or "")}: {_t(r["phrase"])}</title></g>')
    rows = [(name, r) for r in stated for chosen, name in named if chosen == r]
    for i, (name, r) in enumerate(rows):
        cx = px(r["equal_strength"])
        ty = top + plot_h + 58 + 16 * i
        out.append(f'<line x1="{_f(cx)}" y1="{top + plot_h + 42}" x2="{_f(cx)}" y2="{ty - 10}" stroke="{UNTREATED}" '
                   f'stroke-dasharray="1 2"/>')
        text = f"{name}: {r['phrase']}" + (f" ({r['by']})" if r.get("by") else "")
        anchor = "end" if cx > left + plot_w * 0.6 else "start"
        out.append(f'<text class="am-stated-label" x="{_f(cx)}" y="{ty}" text-anchor="{anchor}" fill="{UNTREATED}" '
                   f'font-size="11">{_t(text)}</text>')
    if not stated:
        out.append(f'<text x="{left}" y="{top + plot_h + 60}" fill="{MUTED}" font-size="11">'
                   "No stated hidden cause from the room to mark.</text>")
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
