// How a diagram is drawn, from the one visual specification (static/visual-spec.json)
// that the report renderer (app/reporting/visual.py) reads too. The geometry here (label
// wrapping, box sizes, outlines, where an arrow starts and ends, how it bends round boxes,
// where its badge sits) is the same algorithm, step for step, as in that module; a
// browser test draws one diagram both ways and compares them.

import SPEC from '../visual-spec.json' with { type: 'json' };

export { SPEC };

/** Put the specification's colours into CSS variables (--treat-fill, --disputed, ...). */
export function applyColourVariables(root = document.documentElement) {
  for (const [name, value] of Object.entries(SPEC.colours)) root.style.setProperty(`--${name}`, value);
}

const ADVANCE = SPEC.font.advance;

/** An estimate of the width of `text` at `size` px, the same on the page and in the report. */
export function textWidth(text, size = SPEC.label.size) {
  let units = 0;
  for (const ch of text) {
    if (ADVANCE.narrow.chars.includes(ch)) units += ADVANCE.narrow.em;
    else if (ADVANCE.wide.chars.includes(ch)) units += ADVANCE.wide.em;
    else if (ch >= '0' && ch <= '9') units += ADVANCE.digit;
    else if (ch !== ch.toLowerCase()) units += ADVANCE.upper;
    else units += ADVANCE.other;
  }
  return units * size;
}

/** At most two lines of the box's line width, the second ending in an ellipsis when cut. */
export function labelLines(text) {
  const limit = SPEC.box.line_width;
  if (textWidth(text) <= limit) return [text];
  let lines = [];
  let line = '';
  for (const word of text.split(' ')) {
    const candidate = line ? `${line} ${word}` : word;
    if (textWidth(candidate) <= limit || !line) line = candidate;
    else { lines.push(line); line = word; }
  }
  lines.push(line);
  if (lines.length > 2) lines = [lines[0], lines.slice(1).join(' ')];
  return lines.map((ln) => {
    if (textWidth(ln) <= limit) return ln;
    let cut = ln;
    while (cut.length > 3 && textWidth(`${cut}…`) > limit) cut = cut.slice(0, -1);
    return `${cut}…`;
  });
}

/** Box size and label lines for a label. */
export function boxSize(label) {
  const box = SPEC.box;
  const lines = labelLines(label);
  const widest = Math.max(...lines.map((ln) => textWidth(ln)));
  const width = Math.max(box.min_width, Math.min(box.max_width, widest + box.padding));
  return { width, height: lines.length > 1 ? box.two_line_height : box.height, lines };
}

/** Points of a rounded rectangle centred on 0, 0 (corners as short straight runs). */
export function roundedRectangle(hw, hh, r) {
  const n = SPEC.arrows.corner_segments;
  const corners = [[hw - r, -hh + r, -90], [hw - r, hh - r, 0], [-hw + r, hh - r, 90], [-hw + r, -hh + r, 180]];
  const points = [];
  for (const [cx, cy, a0] of corners) {
    for (let i = 0; i <= n; i++) {
      const a = ((a0 + (90 * i) / n) * Math.PI) / 180;
      points.push([cx + r * Math.cos(a), cy + r * Math.sin(a)]);
    }
  }
  return points;
}

/** The treatment's pointed box. */
export function hexagon(hw, hh) {
  const tip = SPEC.variables.treatment.tip;
  return [[-hw, -hh], [hw, -hh], [hw + tip, 0], [hw, hh], [-hw, hh], [-hw - tip, 0]];
}

/** The ring drawn round a variable in the adjustment set (it encloses a treatment's tips). */
export function ringRectangle(width, height, treatment, ring = SPEC.rings.adjusted) {
  const extra = treatment ? SPEC.variables.treatment.tip : 0;
  const hw = width / 2 + extra + ring.offset, hh = height / 2 + ring.offset;
  return { x: -hw, y: -hh, width: 2 * hw, height: 2 * hh, rx: ring.corner };
}

/**
 * The outermost line drawn round a variable, as a polygon about its centre: the dotted
 * ring when it is adjusted for, else the hexagon of a treatment, else the rounded box.
 * @param {{width: number, height: number}} size
 * @param {{treatment?: boolean, adjusted?: boolean}} flags
 */
export function outline(size, flags) {
  const hw = size.width / 2, hh = size.height / 2;
  if (flags.adjusted) {
    const r = ringRectangle(size.width, size.height, flags.treatment);
    return roundedRectangle(r.width / 2, r.height / 2, r.rx);
  }
  if (flags.treatment) return hexagon(hw, hh);
  return roundedRectangle(hw, hh, SPEC.variables.measured.corner);
}

/** How far a ray from (ox, oy) inside a polygon, along the unit vector (dx, dy), runs to its edge. */
export function exitDistance(polygon, ox, oy, dx, dy) {
  let best = Infinity;
  for (let i = 0; i < polygon.length; i++) {
    const [px, py] = polygon[i];
    const [qx, qy] = polygon[(i + 1) % polygon.length];
    const ex = qx - px, ey = qy - py;
    const det = dx * -ey - dy * -ex;
    if (Math.abs(det) < 1e-12) continue;
    const rx = px - ox, ry = py - oy;
    const t = (rx * -ey - ry * -ex) / det;
    const s = (dx * ry - dy * rx) / det;
    if (t > 1e-9 && s >= -1e-9 && s <= 1 + 1e-9) best = Math.min(best, t);
  }
  return Number.isFinite(best) ? best : 0;
}

/** The rectangle a variable and its captions take (for keeping badges and arrows off it). */
function footprint(node, margin = 0) {
  const extra = node.treatment ? SPEC.variables.treatment.tip : 0;
  const ring = node.adjusted ? SPEC.rings.adjusted.offset : 0;
  const hw = node.width / 2 + extra + ring, hh = node.height / 2 + ring;
  return { x0: node.x - hw - margin, y0: node.y - hh - margin, x1: node.x + hw + margin, y1: node.y + hh + margin };
}

function sideOf(node, dx, dy) {
  const extra = node.treatment ? SPEC.variables.treatment.tip : 0;
  const hw = node.width / 2 + extra, hh = node.height / 2;
  if (Math.abs(dx) * hh >= Math.abs(dy) * hw) return dx >= 0 ? 'right' : 'left';
  return dy >= 0 ? 'bottom' : 'top';
}

function pointAt(route, t) {
  const [ax, ay] = route.from, [bx, by] = route.to;
  if (!route.control) return [ax + (bx - ax) * t, ay + (by - ay) * t];
  const [cx, cy] = route.control;
  const u = 1 - t;
  return [u * u * ax + 2 * u * t * cx + t * t * bx, u * u * ay + 2 * u * t * cy + t * t * by];
}

function tangentAt(route, t) {
  const [ax, ay] = route.from, [bx, by] = route.to;
  if (!route.control) return [bx - ax, by - ay];
  const [cx, cy] = route.control;
  return [2 * (1 - t) * (cx - ax) + 2 * t * (bx - cx), 2 * (1 - t) * (cy - ay) + 2 * t * (by - cy)];
}

function crossings(route, boxes) {
  let hits = 0;
  const steps = 24;
  for (const b of boxes) {
    for (let i = 1; i < steps; i++) {
      const [x, y] = pointAt(route, i / steps);
      if (x > b.x0 && x < b.x1 && y > b.y0 && y < b.y1) { hits += 1; break; }
    }
  }
  return hits;
}

/** Spread positions along one side: in order, at least `gap` apart, centred where they were, within [lo, hi]. */
export function spreadAlong(values, gap, lo, hi) {
  values = values.map((v) => Math.min(hi, Math.max(lo, v)));
  const out = [];
  values.forEach((v, i) => out.push(i ? Math.max(v, out[i - 1] + gap) : v));
  const mean = (list) => list.reduce((a, b) => a + b, 0) / list.length;
  let shift = mean(values) - mean(out);
  if (out[0] + shift < lo) shift = lo - out[0];
  if (out[out.length - 1] + shift > hi) shift = hi - out[out.length - 1];
  return out.map((v) => v + shift);
}

const NORMALS = { top: [0, -1], bottom: [0, 1], left: [-1, 0], right: [1, 0] };

/**
 * Where every arrow runs. An arrow that would cross another box bends round it (a
 * quadratic curve, the smallest detour that clears); then the ends that meet one side of
 * a box are spread along that side (in the order they arrive, at most `spread` apart),
 * and each end stops `gap` short of the outline actually drawn.
 * @param {Map<string, {x: number, y: number, width: number, height: number, treatment?: boolean, adjusted?: boolean}>} nodes
 * @param {{from: string, to: string}[]} arrows
 * @returns {({x1: number, y1: number, x2: number, y2: number, control: number[]|null, d: string}|null)[]}
 */
export function routeArrows(nodes, arrows) {
  const spec = SPEC.arrows;
  const names = [...nodes.keys()];
  const controls = arrows.map((a) => {
    const s = nodes.get(a.from), t = nodes.get(a.to);
    if (!s || !t || a.from === a.to) return undefined;
    const A = [s.x, s.y], B = [t.x, t.y];
    const others = names.filter((n) => n !== a.from && n !== a.to).map((n) => footprint(nodes.get(n), spec.clearance));
    let best = null;
    let hits = crossings({ from: A, to: B, control: null }, others);
    if (!hits) return best;
    const length = Math.hypot(B[0] - A[0], B[1] - A[1]) || 1;
    const nx = -(B[1] - A[1]) / length, ny = (B[0] - A[0]) / length;
    const mx = (A[0] + B[0]) / 2, my = (A[1] + B[1]) / 2;
    for (const d of spec.detour) {
      for (const sign of [1, -1]) {
        // A quadratic curve's middle lies halfway to its control point: bend by 2d.
        const control = [mx + sign * nx * 2 * d, my + sign * ny * 2 * d];
        const h = crossings({ from: A, to: B, control }, others);
        if (h < hits) { best = control; hits = h; }
        if (!hits) return best;
      }
    }
    return best;
  });
  // Each end leaves its box towards the curve's control point, or the other box.
  const groups = new Map();
  const ends = arrows.map(() => ({}));
  arrows.forEach((a, i) => {
    if (controls[i] === undefined) return;
    const s = nodes.get(a.from), t = nodes.get(a.to);
    for (const [name, node, other, which] of [[a.from, s, t, 'from'], [a.to, t, s, 'to']]) {
      const toward = controls[i] || [other.x, other.y];
      const dx = toward[0] - node.x, dy = toward[1] - node.y;
      const side = sideOf(node, dx, dy);
      const length = Math.hypot(dx, dy) || 1;
      const reach = exitDistance(outline(node, node), 0, 0, dx / length, dy / length);
      const natural = side === 'top' || side === 'bottom' ? (dx / length) * reach : (dy / length) * reach;
      const key = `${name}|${side}`;
      if (!groups.has(key)) groups.set(key, []);
      groups.get(key).push({ i, which, natural, node, side });
    }
  });
  const corner = SPEC.variables.measured.corner;
  for (const group of groups.values()) {
    group.sort((p, q) => p.natural - q.natural || p.i - q.i);
    const { node, side } = group[0];
    const horizontal = side === 'top' || side === 'bottom';
    const half = Math.max(0, (horizontal ? node.width : node.height) / 2 - corner);
    const gap = group.length > 1 ? Math.min(spec.spread, (2 * half) / (group.length - 1)) : 0;
    const placed = spreadAlong(group.map((e) => e.natural), gap, -half, half);
    const [nx, ny] = NORMALS[side];
    const poly = outline(node, node);
    group.forEach((end, k) => {
      const ox = horizontal ? placed[k] : 0, oy = horizontal ? 0 : placed[k];
      const reach = exitDistance(poly, ox, oy, nx, ny) + spec.gap;
      ends[end.i][end.which] = [node.x + ox + nx * reach, node.y + oy + ny * reach];
    });
  }
  const f = (n) => n.toFixed(1);
  return arrows.map((a, i) => {
    if (controls[i] === undefined) return null;
    const [x1, y1] = ends[i].from, [x2, y2] = ends[i].to;
    const control = controls[i];
    const d = control ? `M${f(x1)},${f(y1)} Q${f(control[0])},${f(control[1])} ${f(x2)},${f(y2)}`
      : `M${f(x1)},${f(y1)} L${f(x2)},${f(y2)}`;
    return { x1, y1, x2, y2, control, d };
  });
}

/**
 * Where an arrow's badge goes: beside the line (on its upper side first), at the first of
 * a few places along it that no box or earlier badge covers, else the least covered.
 * @param {{x1: number, y1: number, x2: number, y2: number, control: number[]|null}} route
 * @param {string} text
 * @param {Iterable<any>} nodes the variables (as given to routeArrows)
 * @param {{x0: number, y0: number, x1: number, y1: number}[]} placed badges placed so far (added to)
 */
export function placeBadge(route, text, nodes, placed) {
  const spec = SPEC.badge;
  const width = textWidth(text, spec.size) + spec.padding, half = spec.height / 2;
  const path = { from: [route.x1, route.y1], to: [route.x2, route.y2], control: route.control };
  const covers = (x, y) => {
    let area = 0;
    const rects = [...[...nodes].map((n) => captionFootprint(n)), ...placed];
    for (const r of rects) {
      const ox = Math.min(x + width / 2, r.x1) - Math.max(x - width / 2, r.x0);
      const oy = Math.min(y + half, r.y1) - Math.max(y - half, r.y0);
      if (ox > 0 && oy > 0) area += ox * oy;
    }
    return area;
  };
  let best = null;
  for (const t of spec.along) {
    const [px, py] = pointAt(path, t);
    const [tx, ty] = tangentAt(path, t);
    const length = Math.hypot(tx, ty) || 1;
    let nx = -ty / length, ny = tx / length;
    if (ny > 0) { nx = -nx; ny = -ny; }
    const offset = spec.offset + Math.abs(nx) * (width / 2 - 8);
    for (const side of [1, -1]) {
      const x = px + side * nx * offset, y = py + side * ny * offset;
      const area = covers(x, y);
      if (!best || area < best.area) best = { x, y, area };
    }
    if (best.area === 0) break;
  }
  const box = { x0: best.x - width / 2, y0: best.y - half, x1: best.x + width / 2, y1: best.y + half };
  placed.push(box);
  return { x: best.x, y: best.y, width, height: spec.height };
}

/** A variable's box with its tag above and role caption below. */
function captionFootprint(node) {
  const r = footprint(node);
  return { x0: r.x0 - 4, y0: r.y0 - 14, x1: r.x1 + 4, y1: r.y1 + 20 };
}

/** Presentation attributes (stroke, width, dash, fill) for a kind of arrow. */
export function arrowAttributes(kind) {
  const k = SPEC.arrows.kinds[kind];
  return { stroke: k.stroke, 'stroke-width': k.stroke_width, 'stroke-dasharray': k.dash ?? undefined, fill: 'none' };
}

/** Presentation attributes for a variable's shape. */
export function shapeAttributes(flags, hatchUrl) {
  const v = SPEC.variables;
  let fill = v.measured.fill, stroke = v.measured.stroke, width = v.measured.stroke_width, dash = v.measured.dash;
  if (flags.latent) { fill = hatchUrl; stroke = v.latent.stroke; width = v.latent.stroke_width; dash = v.latent.dash; }
  if (flags.treatment) { if (!flags.latent) fill = v.treatment.fill; stroke = v.treatment.stroke; width = v.treatment.stroke_width; }
  else if (flags.outcome) { if (!flags.latent) fill = v.outcome.fill; stroke = v.outcome.stroke; width = v.outcome.stroke_width; }
  return { fill, stroke, 'stroke-width': width, 'stroke-dasharray': dash ?? undefined };
}
