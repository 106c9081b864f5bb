// The diagram canvas: plain SVG. One render() redraws from the model; pointer handlers
// change the view (pan, zoom, drag) or ask the session to send a command.
// Visual language: see static/visual-language.md.

import { svg, clear, ROLE_WORDS } from './dom.js';
import {
  SPEC, boxSize, textWidth, routeArrows, placeBadge, ringRectangle, hexagon, arrowAttributes, shapeAttributes,
} from './visual.js';

const HATCH = 'url(#hatch-latent)';
const MARKERS = { drawn: 'head', pending: 'head-pending', disputed: 'head-disputed', proposed: 'head-ghost', selected: 'head-selected' };

/**
 * @typedef {{name: string, label?: string, latent?: boolean, x: number, y: number}} VariableData
 * @typedef {{document: any, arrows: any[], proposals: any[], selection: any, highlight: any,
 *            roles: Record<string, string[]>, adjusted: string[]}} CanvasModel
 */

export class Canvas {
  /**
   * @param {HTMLElement} host
   * @param {{onCommand: (c: any) => Promise<any>, onSelect: (s: any) => void, onAddVariable: (x: number, y: number) => void, arrowCommand: (from: string, to: string) => any, onFit?: (cut: boolean) => void}} callbacks
   */
  constructor(host, callbacks) {
    this.host = host;
    this.callbacks = callbacks;
    this.view = { x: 0, y: 0, k: 1 };
    this.mode = 'select';
    this.model = null;
    this.drag = null;
    this.localPositions = new Map();
    this.root = svg('svg', { class: 'canvas', role: 'img', 'aria-label': 'Causal diagram', tabindex: '0', 'font-family': SPEC.font.family });
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
    this.autoFit = true;
    this.watchSize();
  }

  buildDefs() {
    const m = SPEC.marker;
    const marker = (id, kind) => svg('marker', {
      id, viewBox: m.view_box, refX: m.ref_x, refY: m.ref_y, markerWidth: m.size, markerHeight: m.size,
      markerUnits: 'userSpaceOnUse', orient: 'auto-start-reverse',
    }, svg('path', { d: m.path, class: id, fill: SPEC.arrows.kinds[kind].head }));
    const h = SPEC.hatch;
    const hatch = svg('pattern', { id: 'hatch-latent', width: h.size, height: h.size, patternUnits: 'userSpaceOnUse', patternTransform: `rotate(${h.angle})` },
      svg('rect', { width: h.size, height: h.size, fill: h.background }),
      svg('line', { x1: '0', y1: '0', x2: '0', y2: h.size, stroke: h.line, 'stroke-width': h.line_width }));
    return svg('defs', {}, ...Object.entries(MARKERS).map(([kind, id]) => marker(id, kind)), hatch);
  }

  // -- geometry -------------------------------------------------------------------------
  position(variable) {
    return this.localPositions.get(variable.name) || { x: variable.x ?? 0, y: variable.y ?? 0 };
  }

  /** Box size and label lines for a variable. */
  size(variable) {
    return boxSize(variable.label || variable.name);
  }

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
    this.autoFit = false;
    this.applyView();
  }

  /** The smallest and largest zoom Fit uses: labels never drawn smaller than a readable size. */
  zoomLimits() {
    const big = document.body.classList.contains('projector');
    const readable = big ? 14 : 10;  // px on screen for a 15 px label
    return { min: readable / SPEC.label.size, max: big ? 1.6 : 1.15 };
  }

  /** The diagram's extent in its own coordinates, captions included. */
  extent() {
    let minX = Infinity, minY = Infinity, maxX = -Infinity, maxY = -Infinity;
    for (const v of this.model?.document?.variables || []) {
      const p = this.position(v);
      const { width, height } = this.size(v);
      const half = Math.max(width / 2 + SPEC.variables.treatment.tip, textWidth(this.roleCaption(v), SPEC.role.size) / 2) + 8;
      minX = Math.min(minX, p.x - half); maxX = Math.max(maxX, p.x + half);
      minY = Math.min(minY, p.y - height / 2 - 24); maxY = Math.max(maxY, p.y + height / 2 + 30);
    }
    return { minX, minY, maxX, maxY };
  }

  /**
   * Fit the whole diagram into the canvas, at a zoom that keeps its labels readable; when
   * that cannot show all of it, centre it and say so (callbacks.onFit(true)).
   */
  fit() {
    const variables = this.model?.document?.variables || [];
    const rect = this.root.getBoundingClientRect();
    this.autoFit = true;
    if (!variables.length || !rect.width || !rect.height) {
      if (!variables.length) { this.view = { x: 40, y: 40, k: 1 }; this.applyView(); }
      this.callbacks.onFit?.(false);
      return;
    }
    const { minX, minY, maxX, maxY } = this.extent();
    const pad = Math.min(24, rect.width / 20);
    const usableW = Math.max(40, rect.width - 2 * pad), usableH = Math.max(40, rect.height - 2 * pad);
    const limits = this.zoomLimits();
    const wanted = Math.min(usableW / (maxX - minX), usableH / (maxY - minY));
    const k = Math.max(limits.min, Math.min(limits.max, wanted));
    this.view = { k, x: pad + (usableW - (maxX - minX) * k) / 2 - minX * k, y: pad + (usableH - (maxY - minY) * k) / 2 - minY * k };
    if (wanted < limits.min) this.keepQuestionInView(rect, pad, { minX, minY, maxX, maxY });
    this.applyView();
    this.callbacks.onFit?.(wanted < limits.min);
  }

  /** With only part of the diagram in view, make it the part with the treatment and outcome. */
  keepQuestionInView(rect, pad, extent) {
    const doc = this.model.document;
    const names = new Set([...(doc.treatment || []), ...(doc.outcome || [])]);
    const chosen = doc.variables.filter((v) => names.has(v.name));
    if (!chosen.length) return;
    const k = this.view.k;
    for (const [axis, size, lo, hi] of [['x', rect.width, extent.minX, extent.maxX], ['y', rect.height, extent.minY, extent.maxY]]) {
      if ((hi - lo) * k <= size - 2 * pad) continue;
      const spans = chosen.map((v) => {
        const p = this.position(v), s = this.size(v);
        const half = axis === 'x' ? s.width / 2 + SPEC.variables.treatment.tip + 12 : s.height / 2 + 30;
        return [p[axis] - half, p[axis] + half];
      });
      const from = Math.min(...spans.map((q) => q[0])), to = Math.max(...spans.map((q) => q[1]));
      // Centre the question's variables, but never scroll past the diagram's own edges.
      let offset = size / 2 - ((from + to) / 2) * k;
      offset = Math.min(pad - lo * k, Math.max(size - pad - hi * k, offset));
      this.view[axis] = offset;
    }
  }

  /** When the canvas changes size (a panel opens, Big text, a rotated phone): fit again if the
   *  view was fitted, else keep the same point of the diagram in the middle. */
  watchSize() {
    let last = null;
    new ResizeObserver(() => {
      const rect = this.root.getBoundingClientRect();
      if (!rect.width || !rect.height) return;
      if (last && (last.width !== rect.width || last.height !== rect.height)) {
        if (this.autoFit) this.fit();
        else {
          this.view.x += (rect.width - last.width) / 2;
          this.view.y += (rect.height - last.height) / 2;
          this.applyView();
        }
      } else if (!last && this.model?.document?.variables?.length) this.fit();
      last = { width: rect.width, height: rect.height };
    }).observe(this.host);
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

    /** @type {Map<string, any>} */
    const nodes = new Map();
    for (const v of doc.variables) {
      const p = this.position(v);
      const { width, height } = this.size(v);
      nodes.set(v.name, { x: p.x, y: p.y, width, height, treatment: treatment.has(v.name), adjusted: adjusted.has(v.name) });
    }
    this.nodes = nodes;

    if (highlight?.nodes) {
      const halo = SPEC.halo;
      const path = highlight.nodes;
      for (let i = 0; i + 1 < path.length; i++) {
        const p = nodes.get(path[i]), q = nodes.get(path[i + 1]);
        if (!p || !q) continue;
        this.layerHalo.append(svg('line', {
          x1: p.x, y1: p.y, x2: q.x, y2: q.y, class: `halo ${highlight.causal ? 'halo-causal' : 'halo-noncausal'}`,
          stroke: halo.stroke, 'stroke-opacity': halo.opacity, 'stroke-width': halo.width, fill: 'none',
          'stroke-linecap': highlight.causal ? 'round' : 'butt', 'stroke-dasharray': highlight.causal ? undefined : halo.noncausal_dash,
        }));
      }
    }

    // Drawn arrows first, then proposed ones: routed together, so their ends spread round each box.
    const edges = [];
    for (const arrow of model.arrows) {
      if (!byName.has(arrow.from) || !byName.has(arrow.to)) continue;
      const key = JSON.stringify([arrow.from, arrow.to]);
      const selected = selection?.kind === 'arrow' && selection.key === key;
      const pending = model.pendingByArrow.get(key) || [];
      const classes = ['edge'];
      const disputed = arrow.flag === 'disputed' || arrow.contested;
      if (disputed) classes.push('edge-disputed');
      if (selected) classes.push('edge-selected');
      if (pending.length) classes.push('edge-pending');
      const kind = selected ? 'selected' : disputed ? 'disputed' : pending.length ? 'pending' : 'drawn';
      edges.push({ from: arrow.from, to: arrow.to, classes, kind, info: { key, arrow, pending, selected } });
    }
    for (const proposal of model.proposals) {
      if (proposal.kind !== 'add' || !['open', 'disputed'].includes(proposal.status)) continue;
      if (!byName.has(proposal.from) || !byName.has(proposal.to)) continue;
      const key = JSON.stringify([proposal.from, proposal.to]);
      edges.push({ from: proposal.from, to: proposal.to, classes: ['edge', 'edge-proposed'], kind: 'proposed', info: { key, proposal } });
    }
    const routes = routeArrows(nodes, edges);
    const placed = [];
    edges.forEach((edge, i) => {
      if (routes[i]) this.layerEdges.append(this.drawEdge(routes[i], edge, placed));
    });

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

  /** The words in an arrow's badge: its proposal, dispute, pending changes and tally. */
  badgeText(edge) {
    const { info, classes } = edge;
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
    return badges.join('  ');
  }

  drawEdge(route, edge, placed) {
    const { info } = edge;
    const group = svg('g', { class: edge.classes.join(' '), dataset: { key: info.key, kind: info.proposal ? 'proposal' : 'arrow' } });
    if (info.proposal) group.dataset.proposal = info.proposal.id;
    group.append(svg('path', { d: route.d, class: 'edge-hit', fill: 'none' }));
    group.append(svg('path', { d: route.d, class: 'edge-line', ...arrowAttributes(edge.kind), 'marker-end': `url(#${MARKERS[edge.kind]})` }));
    const text = this.badgeText(edge);
    if (text) {
      const b = SPEC.badge;
      const spot = placeBadge(route, text, this.nodes.values(), placed);
      const badge = svg('g', { class: 'edge-badge', transform: `translate(${spot.x},${spot.y})`, dataset: { ...group.dataset } },
        svg('rect', { x: -spot.width / 2, y: -spot.height / 2, width: spot.width, height: spot.height, rx: b.corner, fill: b.fill, stroke: b.stroke }),
        svg('text', { x: 0, y: b.baseline, 'text-anchor': 'middle', 'font-size': b.size, 'font-weight': b.weight, fill: b.text_fill, text }));
      this.layerBadges.append(badge);  // same data as its arrow, so a click on it selects the arrow
    }
    return group;
  }

  /** The words under a box: the variable's roles for the question, beyond treatment and outcome. */
  roleCaption(v) {
    const roles = (this.model?.roles?.[v.name] || []).filter((r) => !['treatment', 'outcome', 'unrelated'].includes(r));
    return roles.map((r) => ROLE_WORDS[r] || r.replaceAll('_', ' ')).join(', ');
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
    const ringAttributes = (ring) => ({ fill: 'none', stroke: ring.stroke, 'stroke-width': ring.stroke_width,
      'stroke-dasharray': ring.dash ?? undefined, 'stroke-linecap': ring.linecap ?? undefined });
    if (flags.adjusted) {
      const ring = SPEC.rings.adjusted;
      group.append(svg('rect', { ...ringRectangle(width, height, flags.treatment, ring), class: 'adjust-ring', ...ringAttributes(ring) }));
    }
    if (flags.selected) {
      const ring = SPEC.rings.selected;
      group.append(svg('rect', { ...ringRectangle(width, height, flags.treatment, ring), class: 'select-ring', ...ringAttributes(ring) }));
    }
    const look = shapeAttributes({ ...flags, latent: v.latent }, HATCH);
    if (flags.treatment) {
      group.append(svg('polygon', { points: hexagon(hw, hh).map((q) => q.join(',')).join(' '), class: 'shape', ...look }));
    } else {
      group.append(svg('rect', { x: -hw, y: -hh, width, height, rx: SPEC.variables.measured.corner, class: 'shape', ...look }));
      if (flags.outcome) {
        const o = SPEC.variables.outcome;
        group.append(svg('rect', { x: -hw + o.inner_inset, y: -hh + o.inner_inset, width: width - 2 * o.inner_inset, height: height - 2 * o.inner_inset,
          rx: o.inner_corner, class: 'shape-inner', fill: 'none', stroke: o.stroke, 'stroke-width': o.inner_stroke_width }));
      }
    }
    const label = SPEC.label, box = SPEC.box;
    lines.forEach((line, i) => {
      group.append(svg('text', { class: 'label', x: 0, y: box.baseline + (i - (lines.length - 1) / 2) * box.line_gap, 'text-anchor': 'middle',
        'font-size': label.size, 'font-weight': v.latent ? label.latent_weight : label.weight, 'font-style': v.latent ? label.latent_style : undefined,
        fill: label.fill, text: line }));
    });
    const tags = [];
    if (flags.treatment) tags.push('TREATMENT');
    if (flags.outcome) tags.push('OUTCOME');
    if (v.latent) tags.push('UNMEASURED');
    if (flags.adjusted) tags.push('ADJUSTED');
    if (tags.length) {
      const tag = SPEC.tag;
      group.append(svg('text', { class: 'tag', x: 0, y: -hh - (flags.adjusted ? tag.gap_adjusted : tag.gap), 'text-anchor': 'middle',
        'font-size': tag.size, 'font-weight': tag.weight, 'letter-spacing': tag.letter_spacing, fill: tag.fill, text: tags.join(' · ') }));
    }
    const caption = this.roleCaption(v);
    if (caption) {
      const role = SPEC.role;
      group.append(svg('text', { class: 'role', x: 0, y: hh + (flags.adjusted ? role.gap_adjusted : role.gap), 'text-anchor': 'middle',
        'font-size': role.size, 'font-style': role.style, fill: role.fill, text: caption }));
    }
    if (!this.model.locked) group.append(svg('circle', { class: 'port', cx: hw + (flags.treatment ? SPEC.variables.treatment.tip : 0), cy: 0, r: 7 }));
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
      const connect = !this.model.locked && (this.mode === 'connect' || event.shiftKey || event.target.classList.contains('port'));
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
      if (drag.moved) this.autoFit = false;
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
