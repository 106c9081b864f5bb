// The diagram canvas: plain SVG. One render() redraws from the model; pointer handlers
// change the view (pan, zoom, drag) or ask the session to send a command.
// Visual language: see static/visual-language.md.

import { svg, clear, ROLE_WORDS } from './dom.js';

const BOX_HEIGHT = 46;
const MIN_WIDTH = 96;
const MAX_WIDTH = 240;
const FONT = '600 15px system-ui, -apple-system, "Segoe UI", sans-serif';

let measureContext = null;
function textWidth(text) {
  if (!measureContext) measureContext = document.createElement('canvas').getContext('2d');
  measureContext.font = FONT;
  return measureContext.measureText(text).width;
}

const LINE_WIDTH = 190;

/** Break a label into at most two lines of LINE_WIDTH pixels, ending in an ellipsis if cut. */
function wrapLabel(text) {
  if (textWidth(text) <= LINE_WIDTH) return [text];
  const words = text.split(/\s+/);
  const lines = [];
  let line = '';
  for (const word of words) {
    const next = line ? `${line} ${word}` : word;
    if (textWidth(next) <= LINE_WIDTH || !line) line = next;
    else { lines.push(line); line = word; }
  }
  lines.push(line);
  const out = lines.slice(0, 2);
  if (lines.length > 2) out[1] = `${out[1]} ${lines.slice(2).join(' ')}`;
  return out.map((l, i) => {
    if (textWidth(l) <= LINE_WIDTH && (i === 0 || lines.length <= 2)) return l;
    let cut = l;
    while (cut.length > 3 && textWidth(`${cut}…`) > LINE_WIDTH) cut = cut.slice(0, -1);
    return `${cut}…`;
  });
}

/**
 * @typedef {{name: string, label?: string, latent?: boolean, x: number, y: number}} VariableData
 * @typedef {{document: any, arrows: any[], proposals: any[], selection: any, highlight: any,
 *            roles: Record<string, string[]>, adjusted: string[]}} CanvasModel
 */

export class Canvas {
  /**
   * @param {HTMLElement} host
   * @param {{onCommand: (c: any) => Promise<any>, onSelect: (s: any) => void, onAddVariable: (x: number, y: number) => void, arrowCommand: (from: string, to: string) => any}} callbacks
   */
  constructor(host, callbacks) {
    this.host = host;
    this.callbacks = callbacks;
    this.view = { x: 0, y: 0, k: 1 };
    this.mode = 'select';
    this.model = null;
    this.drag = null;
    this.localPositions = new Map();
    this.root = svg('svg', { class: 'canvas', role: 'img', 'aria-label': 'Causal diagram', tabindex: '0' });
    this.root.append(this.buildDefs());
    this.viewport = svg('g', { class: 'viewport' });
    this.layerHalo = svg('g', { class: 'layer-halo' });
    this.layerEdges = svg('g', { class: 'layer-edges' });
    this.layerNodes = svg('g', { class: 'layer-nodes' });
    this.layerBadges = svg('g', { class: 'layer-badges' });  // arrow badges above the boxes, never hidden
    this.layerGhost = svg('g', { class: 'layer-ghost' });
    this.viewport.append(this.layerHalo, this.layerEdges, this.layerNodes, this.layerBadges, this.layerGhost);
    this.root.append(this.viewport);
    host.append(this.root);
    this.attachPointer();
    this.fitted = false;
  }

  buildDefs() {
    const marker = (id, cls) => svg('marker', {
      id, viewBox: '0 0 12 12', refX: '11', refY: '6', markerWidth: '11', markerHeight: '11',
      markerUnits: 'userSpaceOnUse', orient: 'auto-start-reverse',
    }, svg('path', { d: 'M0,1 L12,6 L0,11 L3,6 z', class: cls }));
    const hatch = svg('pattern', { id: 'hatch-latent', width: '8', height: '8', patternUnits: 'userSpaceOnUse', patternTransform: 'rotate(45)' },
      svg('rect', { width: '8', height: '8', class: 'hatch-bg' }),
      svg('line', { x1: '0', y1: '0', x2: '0', y2: '8', class: 'hatch-line' }));
    return svg('defs', {}, marker('head', 'head'), marker('head-ghost', 'head-ghost'),
      marker('head-selected', 'head-selected'), hatch);
  }

  // -- geometry -------------------------------------------------------------------------
  position(variable) {
    return this.localPositions.get(variable.name) || { x: variable.x ?? 0, y: variable.y ?? 0 };
  }

  /** Box size and label lines for a variable. */
  size(variable) {
    const lines = wrapLabel(variable.label || variable.name);
    const width = Math.max(MIN_WIDTH, Math.min(MAX_WIDTH, Math.max(...lines.map(textWidth)) + 34));
    return { width, height: lines.length > 1 ? BOX_HEIGHT + 18 : BOX_HEIGHT, lines };
  }

  boxWidth(variable) { return this.size(variable).width; }

  toWorld(clientX, clientY) {
    const rect = this.root.getBoundingClientRect();
    return { x: (clientX - rect.left - this.view.x) / this.view.k, y: (clientY - rect.top - this.view.y) / this.view.k };
  }

  applyView() {
    this.viewport.setAttribute('transform', `translate(${this.view.x},${this.view.y}) scale(${this.view.k})`);
  }

  zoomBy(factor, clientX, clientY) {
    const rect = this.root.getBoundingClientRect();
    const cx = clientX ?? rect.left + rect.width / 2;
    const cy = clientY ?? rect.top + rect.height / 2;
    const before = this.toWorld(cx, cy);
    this.view.k = Math.max(0.25, Math.min(3, this.view.k * factor));
    this.view.x = cx - rect.left - before.x * this.view.k;
    this.view.y = cy - rect.top - before.y * this.view.k;
    this.applyView();
  }

  /** Fit the whole diagram into the visible area. */
  fit() {
    const variables = this.model?.document?.variables || [];
    const rect = this.root.getBoundingClientRect();
    if (!variables.length || !rect.width) { this.view = { x: 40, y: 40, k: 1 }; this.applyView(); return; }
    let minX = Infinity, minY = Infinity, maxX = -Infinity, maxY = -Infinity;
    for (const v of variables) {
      const p = this.position(v);
      const half = this.boxWidth(v) / 2 + 40;  // room for the role caption under the box
      minX = Math.min(minX, p.x - half); maxX = Math.max(maxX, p.x + half);
      minY = Math.min(minY, p.y - BOX_HEIGHT); maxY = Math.max(maxY, p.y + BOX_HEIGHT);
    }
    const pad = 30;
    const top = 56 + pad;
    const legend = this.host.parentElement?.querySelector('.legend');
    const bottom = (legend && !legend.hidden ? legend.offsetHeight + 16 : 0) + pad;
    const usableH = Math.max(120, rect.height - top - bottom);
    const usableW = rect.width - 2 * pad;
    const k = Math.max(0.3, Math.min(1.15, Math.min(usableW / (maxX - minX), usableH / (maxY - minY))));
    this.view = { k, x: pad + (usableW - (maxX - minX) * k) / 2 - minX * k, y: top + (usableH - (maxY - minY) * k) / 2 - minY * k };
    this.applyView();
  }

  /** Where a line from the centre of a box towards (dx, dy) leaves it. */
  static clip(box, dx, dy) {
    const hw = box.width / 2 + 4, hh = box.height / 2 + 4;
    if (dx === 0 && dy === 0) return { x: 0, y: 0 };
    const t = Math.min(dx !== 0 ? hw / Math.abs(dx) : Infinity, dy !== 0 ? hh / Math.abs(dy) : Infinity);
    return { x: dx * t, y: dy * t };
  }

  endpoints(source, target) {
    const a = this.position(source), b = this.position(target);
    const dx = b.x - a.x, dy = b.y - a.y;
    const start = Canvas.clip(this.size(source), dx, dy);
    const end = Canvas.clip(this.size(target), -dx, -dy);
    return { x1: a.x + start.x, y1: a.y + start.y, x2: b.x + end.x, y2: b.y + end.y };
  }

  // -- drawing --------------------------------------------------------------------------
  /** @param {CanvasModel} model */
  render(model) {
    this.model = model;
    const doc = model.document;
    const byName = new Map(doc.variables.map((v) => [v.name, v]));
    const treatment = new Set(doc.treatment), outcome = new Set(doc.outcome);
    const adjusted = new Set(model.adjusted || []);
    const highlight = model.highlight;
    const selection = model.selection;
    clear(this.layerHalo); clear(this.layerEdges); clear(this.layerNodes); clear(this.layerBadges);

    if (highlight?.nodes) {
      const nodes = highlight.nodes;
      for (let i = 0; i + 1 < nodes.length; i++) {
        const u = byName.get(nodes[i]), w = byName.get(nodes[i + 1]);
        if (!u || !w) continue;
        const p = this.position(u), q = this.position(w);
        this.layerHalo.append(svg('line', {
          x1: p.x, y1: p.y, x2: q.x, y2: q.y,
          class: `halo ${highlight.causal ? 'halo-causal' : 'halo-noncausal'}`,
        }));
      }
    }

    for (const arrow of model.arrows) {
      const source = byName.get(arrow.from), target = byName.get(arrow.to);
      if (!source || !target) continue;
      const key = JSON.stringify([arrow.from, arrow.to]);
      const selected = selection?.kind === 'arrow' && selection.key === key;
      const pending = model.pendingByArrow.get(key) || [];
      const classes = ['edge'];
      if (arrow.flag === 'disputed' || arrow.contested) classes.push('edge-disputed');
      if (selected) classes.push('edge-selected');
      if (pending.length) classes.push('edge-pending');
      this.layerEdges.append(this.drawEdge(source, target, classes, { key, arrow, pending, selected }));
    }
    for (const proposal of model.proposals) {
      if (proposal.kind !== 'add' || !['open', 'disputed'].includes(proposal.status)) continue;
      const source = byName.get(proposal.from), target = byName.get(proposal.to);
      if (!source || !target) continue;
      const key = JSON.stringify([proposal.from, proposal.to]);
      this.layerEdges.append(this.drawEdge(source, target, ['edge', 'edge-proposed'], { key, proposal }));
    }

    for (const v of doc.variables) {
      const isSelected = selection?.kind === 'variable' && selection.name === v.name;
      this.layerNodes.append(this.drawNode(v, {
        treatment: treatment.has(v.name), outcome: outcome.has(v.name), adjusted: adjusted.has(v.name),
        selected: isSelected, onPath: highlight?.nodes?.includes(v.name),
      }));
    }
    if (!this.fitted && doc.variables.length) { this.fitted = true; this.fit(); }
    else this.applyView();
  }

  drawEdge(source, target, classes, info) {
    const { x1, y1, x2, y2 } = this.endpoints(source, target);
    const group = svg('g', { class: classes.join(' '), dataset: { key: info.key, kind: info.proposal ? 'proposal' : 'arrow' } });
    if (info.proposal) group.dataset.proposal = info.proposal.id;
    group.append(svg('line', { x1, y1, x2, y2, class: 'edge-hit' }));
    const head = info.proposal ? 'head-ghost' : info.selected ? 'head-selected' : 'head';
    group.append(svg('line', { x1, y1, x2, y2, class: 'edge-line', 'marker-end': `url(#${head})` }));
    const along = info.proposal ? 0.35 : 0.5;  // proposals label nearer their source, so two labels rarely meet
    const mx = x1 + (x2 - x1) * along, my = y1 + (y2 - y1) * along;
    const badges = [];
    if (info.proposal) {
      const pair = JSON.stringify([info.proposal.from, info.proposal.to].sort());
      badges.push(`#${info.proposal.id} add?${this.model.decisive?.has(pair) ? ' decisive' : ''}`);
    }
    if (classes.includes('edge-disputed')) {
      const pair = JSON.stringify([info.arrow?.from ?? info.proposal?.from, info.arrow?.to ?? info.proposal?.to].sort());
      badges.push(this.model.decisive?.has(pair) ? 'decisive dispute' : 'disputed');
    }
    for (const p of info.pending || []) badges.push(`#${p.id} ${p.kind === 'remove' ? 'drop?' : 'flip?'}`);
    const tally = info.arrow?.tally || info.proposal?.tally;
    if (tally && tally.total) badges.push(`+${tally.agree} −${tally.disagree} ?${tally.unsure}`);
    if (badges.length) {
      const text = badges.join('  ');
      const w = textWidth(text) * 0.8 + 14;
      // Sit beside the line (on its upper normal), not on top of it, and off every box:
      // try a few places along the line and both sides before settling for the first.
      const length = Math.hypot(x2 - x1, y2 - y1) || 1;
      let nx = -(y2 - y1) / length, ny = (x2 - x1) / length;
      if (ny > 0) { nx = -nx; ny = -ny; }
      const offset = 15 + Math.abs(nx) * (w / 2 - 8);
      const spots = [];
      for (const t of [along, along - 0.15, along + 0.15, along - 0.28, along + 0.28]) {
        for (const side of [1, -1]) {
          spots.push({ x: x1 + (x2 - x1) * t + side * nx * offset, y: y1 + (y2 - y1) * t + side * ny * offset });
        }
      }
      const covered = spots.map((s) => this.boxOverlap(s.x, s.y, w / 2, 11));
      const best = covered.indexOf(Math.min(...covered));  // the first spot clear of boxes, or the least covered
      const bx = spots[best].x, by = spots[best].y;
      const badge = svg('g', { class: 'edge-badge', transform: `translate(${bx},${by})`,
        dataset: { ...group.dataset } },
        svg('rect', { x: -w / 2, y: -11, width: w, height: 22, rx: 4 }),
        svg('text', { x: 0, y: 5, 'text-anchor': 'middle', text }));
      this.layerBadges.append(badge);  // same data as its arrow, so a click on it selects the arrow
    }
    return group;
  }

  /** How much of a rectangle centred at (x, y), with these half sizes, the variables' boxes
   *  (and their captions) cover, in square pixels. */
  boxOverlap(x, y, halfWidth, halfHeight) {
    let area = 0;
    for (const v of this.model.document.variables) {
      const p = this.position(v);
      const { width, height } = this.size(v);
      const ox = Math.min(x + halfWidth, p.x + width / 2 + 4) - Math.max(x - halfWidth, p.x - width / 2 - 4);
      const oy = Math.min(y + halfHeight, p.y + height / 2 + 20) - Math.max(y - halfHeight, p.y - height / 2 - 14);
      if (ox > 0 && oy > 0) area += ox * oy;
    }
    return area;
  }

  drawNode(v, flags) {
    const p = this.position(v);
    const { width, height, lines } = this.size(v);
    const hw = width / 2, hh = height / 2;
    const classes = ['node'];
    if (v.latent) classes.push('node-latent');
    if (flags.treatment) classes.push('node-treatment');
    if (flags.outcome) classes.push('node-outcome');
    if (flags.adjusted) classes.push('node-adjusted');
    if (flags.selected) classes.push('node-selected');
    if (flags.onPath) classes.push('node-on-path');
    const group = svg('g', { class: classes.join(' '), transform: `translate(${p.x},${p.y})`, dataset: { name: v.name } });
    if (flags.adjusted) {
      group.append(svg('rect', { x: -hw - 8, y: -hh - 8, width: width + 16, height: height + 16, rx: 12, class: 'adjust-ring' }));
    }
    if (flags.selected) {
      group.append(svg('rect', { x: -hw - 5, y: -hh - 5, width: width + 10, height: height + 10, rx: 10, class: 'select-ring' }));
    }
    if (flags.treatment) {
      const tip = 14;
      const points = [[-hw, -hh], [hw, -hh], [hw + tip, 0], [hw, hh], [-hw, hh], [-hw - tip, 0]];
      group.append(svg('polygon', { points: points.map((q) => q.join(',')).join(' '), class: 'shape' }));
    } else {
      group.append(svg('rect', { x: -hw, y: -hh, width, height, rx: 8, class: 'shape' }));
      if (flags.outcome) {
        group.append(svg('rect', { x: -hw + 4, y: -hh + 4, width: width - 8, height: height - 8, rx: 5, class: 'shape-inner' }));
      }
    }
    lines.forEach((line, i) => {
      group.append(svg('text', { class: 'label', x: 0, y: 5 + (i - (lines.length - 1) / 2) * 18, 'text-anchor': 'middle', text: line }));
    });
    const tags = [];
    if (flags.treatment) tags.push('TREATMENT');
    if (flags.outcome) tags.push('OUTCOME');
    if (v.latent) tags.push('UNMEASURED');
    if (flags.adjusted) tags.push('ADJUSTED');
    if (tags.length) {
      group.append(svg('text', { class: 'tag', x: 0, y: -hh - (flags.adjusted ? 13 : 7), 'text-anchor': 'middle', text: tags.join(' · ') }));
    }
    const roles = (this.model.roles?.[v.name] || []).filter((r) => !['treatment', 'outcome', 'unrelated'].includes(r));
    if (roles.length) {
      group.append(svg('text', { class: 'role', x: 0, y: hh + (flags.adjusted ? 24 : 16), 'text-anchor': 'middle', text: roles.map((r) => ROLE_WORDS[r] || r.replaceAll('_', ' ')).join(', ') }));
    }
    group.append(svg('circle', { class: 'port', cx: hw + (flags.treatment ? 14 : 0), cy: 0, r: 7 }));
    const title = svg('title', { text: v.description ? `${v.name}: ${v.description}` : v.name });
    group.append(title);
    return group;
  }

  // -- pointer ----------------------------------------------------------------------------
  attachPointer() {
    const root = this.root;
    root.addEventListener('wheel', (event) => {
      event.preventDefault();
      this.zoomBy(event.deltaY < 0 ? 1.1 : 1 / 1.1, event.clientX, event.clientY);
    }, { passive: false });
    root.addEventListener('dblclick', (event) => {
      if (event.target.closest('.node') || event.target.closest('.edge') || event.target.closest('.edge-badge')) return;
      const p = this.toWorld(event.clientX, event.clientY);
      this.callbacks.onAddVariable(Math.round(p.x), Math.round(p.y));
    });
    root.addEventListener('pointerdown', (event) => this.pointerDown(event));
    root.addEventListener('pointermove', (event) => this.pointerMove(event));
    root.addEventListener('pointerup', (event) => this.pointerUp(event));
    root.addEventListener('pointercancel', () => this.cancelDrag());
  }

  pointerDown(event) {
    if (event.button !== 0) return;
    this.root.focus({ preventScroll: true });
    const nodeEl = event.target.closest('.node');
    const edgeEl = event.target.closest('.edge') || event.target.closest('.edge-badge');
    const start = { clientX: event.clientX, clientY: event.clientY };
    if (nodeEl) {
      const name = nodeEl.dataset.name;
      const variable = this.model.document.variables.find((v) => v.name === name);
      const connect = this.mode === 'connect' || event.shiftKey || event.target.classList.contains('port');
      if (connect) this.drag = { kind: 'arrow', from: name, start };
      else {
        const p = this.position(variable);
        const w = this.toWorld(event.clientX, event.clientY);
        this.drag = { kind: 'node', name, start, offset: { x: w.x - p.x, y: w.y - p.y }, moved: false };
      }
    } else if (edgeEl) {
      this.drag = { kind: 'edge', key: edgeEl.dataset.key, proposal: edgeEl.dataset.proposal, start };
    } else {
      this.drag = { kind: 'pan', start, view: { ...this.view }, moved: false };
    }
    this.root.setPointerCapture(event.pointerId);
  }

  pointerMove(event) {
    const drag = this.drag;
    if (!drag) return;
    const dx = event.clientX - drag.start.clientX, dy = event.clientY - drag.start.clientY;
    if (Math.abs(dx) + Math.abs(dy) > 3) drag.moved = true;
    if (drag.kind === 'pan') {
      this.view.x = drag.view.x + dx; this.view.y = drag.view.y + dy;
      this.applyView();
    } else if (drag.kind === 'node' && drag.moved) {
      const w = this.toWorld(event.clientX, event.clientY);
      this.localPositions.set(drag.name, { x: Math.round(w.x - drag.offset.x), y: Math.round(w.y - drag.offset.y) });
      this.render(this.model);
    } else if (drag.kind === 'arrow') {
      const variable = this.model.document.variables.find((v) => v.name === drag.from);
      const p = this.position(variable);
      const w = this.toWorld(event.clientX, event.clientY);
      clear(this.layerGhost).append(svg('line', { x1: p.x, y1: p.y, x2: w.x, y2: w.y, class: 'rubber', 'marker-end': 'url(#head-ghost)' }));
    }
  }

  pointerUp(event) {
    const drag = this.drag;
    this.drag = null;
    clear(this.layerGhost);
    if (!drag) return;
    if (drag.kind === 'pan' && !drag.moved) this.callbacks.onSelect(null);
    if (drag.kind === 'edge' && !drag.moved) {
      this.callbacks.onSelect(drag.proposal ? { kind: 'proposal', id: Number(drag.proposal) } : { kind: 'arrow', key: drag.key });
    }
    if (drag.kind === 'node') {
      if (!drag.moved) { this.callbacks.onSelect({ kind: 'variable', name: drag.name }); return; }
      const p = this.localPositions.get(drag.name);
      this.callbacks.onCommand({ type: 'move_variable', name: drag.name, x: p.x, y: p.y })
        .catch(() => {})
        .finally(() => { this.localPositions.delete(drag.name); });
    }
    if (drag.kind === 'arrow') {
      const hit = document.elementFromPoint(event.clientX, event.clientY)?.closest?.('.node');
      if (hit && hit.dataset.name !== drag.from) {
        this.callbacks.onCommand(this.callbacks.arrowCommand(drag.from, hit.dataset.name)).catch(() => {});
      } else if (!drag.moved || (hit && hit.dataset.name === drag.from)) {
        this.callbacks.onSelect({ kind: 'variable', name: drag.from });
      }
    }
  }

  cancelDrag() {
    if (this.drag?.kind === 'node') this.localPositions.delete(this.drag.name);
    this.drag = null;
    clear(this.layerGhost);
    if (this.model) this.render(this.model);
  }

  /** The centre of the visible area in diagram coordinates. */
  visibleCentre() {
    const rect = this.root.getBoundingClientRect();
    return this.toWorld(rect.left + rect.width / 2, rect.top + rect.height / 2);
  }
}
