// The live workshop page: wires the canvas, the panels and the live connection together.

import { el, svg, clear, toast, askText } from './dom.js';
import { callApi, loadKey, saveKey, forgetKey, TOKEN_HEADER } from './api.js';
import { LiveSession, applyPatch, blankArrowNote } from './live.js';
import { Canvas } from './canvas.js';
import { renderAnalysis, renderDebate, renderSelection, renderHistory, renderPeople } from './panels.js';

const pageData = JSON.parse(document.getElementById('page-data').textContent);
const STAGE_NAMES = { drafting: 'Drafting', debating: 'Debating', agreed: 'Agreed', estimation: 'Estimation' };
const LOCKED = new Set(['agreed', 'estimation']);
// A patch with nothing but these only moves variables: the analysis stays valid.
const POSITION_PATCH_KEYS = new Set(['type', 'revision', 'base', 'moves', 'event']);

class SessionApp {
  constructor(sessionId, token) {
    this.sessionId = sessionId;
    this.token = token;
    this.state = null;
    this.analysis = null;
    this.history = null;
    this.me = null;
    this.online = new Set();
    this.tab = 'analysis';
    this.view = { selection: null, highlight: null, adjusted: null };
    this.status = 'connecting';
  }

  get isFacilitator() { return this.me?.role === 'facilitator'; }

  async start() {
    let data;
    try {
      data = await callApi('GET', `/api/sessions/${encodeURIComponent(this.sessionId)}`, undefined, this.token);
    } catch (err) {
      if (err.status === 401 || err.status === 403) forgetKey(this.sessionId);
      showBlocked(err.message);
      return;
    }
    this.me = data.member;
    this.state = normalizeState(data.state);
    this.online = new Set(data.online);
    saveKey(this.sessionId, this.token, this.state.session.title, this.me.role);
    this.buildLayout();
    this.live = new LiveSession(this.sessionId, this.token, {
      onState: (state, missed, event) => this.receiveState(state, missed, event),
      onPatch: (message) => this.receivePatch(message),
      onAnalysis: (message) => { this.analysis = message; this.refreshAdjustedPaths(); this.refreshPanel(); this.renderCanvas(); },
      onPresence: (online) => { this.online = new Set(online); if (this.tab === 'people') this.refreshPanel(); this.renderBar(); },
      onStatus: (status) => { this.status = status; this.renderStatus(); },
      onWelcome: (message) => { this.me = message.member; },
      onFatal: () => showBlocked('This browser’s key for the session is no longer accepted.'),
      onError: (message) => toast(message.error, 'error'),
    });
    this.live.connect();
    this.renderAll();
    this.mountEstimation();
  }

  receivePatch(message) {
    if (!this.state || !applyPatch(this.state, message)) return false;
    const positionsOnly = Object.keys(message).every((k) => POSITION_PATCH_KEYS.has(k));
    if (positionsOnly && this.analysis && this.analysis.revision === message.base) this.analysis.revision = message.revision;
    this.noteEvent(message.event);
    if (positionsOnly) this.renderCanvas();
    else { this.checkSelection(); this.renderAll(); }
    return true;
  }

  noteEvent(event) {
    if (!event || !this.history) return;
    if (event.kind === 'undo') { this.loadHistory(); return; }
    if (!this.history.some((e) => e.revision === event.revision)) this.history.push(event);
    if (this.tab === 'history') this.refreshPanel();
  }

  receiveState(state, missed, event) {
    const before = this.state;
    if (!state.members && before) state.members = before.members;  // unchanged, so not sent
    this.state = normalizeState(state);
    const me = state.members.find((m) => m.id === this.me.id);
    if (me) this.me = me;
    if (missed.length > 1 && before) toast(`Caught up on ${missed.length} changes made while you were away.`);
    if (missed.length) { if (this.history) this.loadHistory(); } else this.noteEvent(event);
    this.checkSelection();
    this.renderAll();
  }

  checkSelection() {
    const sel = this.view.selection;
    if (!sel) return;
    const s = this.state;
    const exists = sel.kind === 'variable' ? s.document.variables.some((v) => v.name === sel.name)
      : sel.kind === 'arrow' ? s.arrows.some((a) => JSON.stringify([a.from, a.to]) === sel.key)
        : s.proposals.some((p) => p.id === sel.id);
    if (!exists) this.view.selection = null;
  }

  /** Send a command; show the server's message when it is refused. */
  send(command) {
    return this.live.send(command).catch((err) => {
      toast(err.message || String(err), 'error');
      throw err;
    });
  }

  arrowCommand(from, to) {
    if (this.state.session.stage === 'debating') return { type: 'propose', kind: 'add', from, to };
    return { type: 'add_arrow', from, to };
  }

  async proposeWithReason(kind, from, to) {
    const reason = await askText(`Propose to ${kind} ${from} → ${to}`, { label: 'Why? (optional, one line)', confirm: 'Propose' });
    if (reason === null) return;
    await this.send({ type: 'propose', kind, from, to, reason }).catch(() => {});
    this.tab = 'debate';
    this.renderAll();
  }

  select(selection) {
    this.view.selection = selection;
    if (selection) this.tab = 'selection';
    this.renderAll();
  }

  highlightPath(path) {
    this.view.highlight = path ? { nodes: path.nodes, causal: path.causal } : null;
    this.renderAll();
  }

  showAdjusted(set) {
    this.view.adjusted = set;
    this.view.highlight = null;
    this.refreshAdjustedPaths();
    this.renderAll();
  }

  /** With a set shown on the diagram, list the paths as they stand given that set. */
  refreshAdjustedPaths() {
    const set = this.view.adjusted;
    if (!set || !this.analysis?.analysis) return;
    const revision = this.analysis.revision;
    callApi('POST', '/api/identify', { ...this.state.document, adjust: set }).then((result) => {
      if (!this.analysis?.analysis || this.analysis.revision !== revision || this.view.adjusted !== set) return;
      this.analysis = { ...this.analysis, analysis: { ...this.analysis.analysis, paths: result.paths, paths_total: result.paths_total, paths_capped: result.paths_capped, adjustment_check: result.adjustment_check } };
      this.refreshPanel();
    }).catch((err) => {
      // The set may name a variable that was just deleted or renamed; stop showing it.
      this.view.adjusted = null;
      toast(err.message, 'error');
      this.renderAll();
    });
  }

  async addVariableAt(x, y) {
    if (LOCKED.has(this.state.session.stage)) { toast('The diagram is locked; the facilitator can reopen it.', 'error'); return; }
    const name = await askText('New variable', { label: 'Name', required: true, confirm: 'Add' });
    if (!name) return;
    const p = x === undefined ? this.canvas.visibleCentre() : { x, y };
    await this.send({ type: 'add_variable', name, x: Math.round(p.x), y: Math.round(p.y) })
      .then(() => this.select({ kind: 'variable', name })).catch(() => {});
  }

  async moveStage(stage) {
    if (!this.isFacilitator || stage === this.state.session.stage) return;
    let reason = '';
    const reopening = LOCKED.has(this.state.session.stage) && !LOCKED.has(stage);
    if (reopening) {
      reason = await askText(`Reopen the diagram (${STAGE_NAMES[stage]})`, { label: 'Why is it being reopened? This goes in the log.', required: true, multiline: true, confirm: 'Reopen' });
      if (reason === null) return;
    }
    this.send({ type: 'set_stage', stage, reason }).catch(() => {});
  }

  async renameSession() {
    const title = await askText('Rename the session', { label: 'Title', value: this.state.session.title, required: true, confirm: 'Rename' });
    if (title && title !== this.state.session.title) this.send({ type: 'rename_session', title }).catch(() => {});
  }

  loadHistory() {
    callApi('GET', `/api/sessions/${encodeURIComponent(this.sessionId)}/history`, undefined, this.token)
      .then((data) => { this.history = data.events; if (this.tab === 'history') this.refreshPanel(); })
      .catch((err) => toast(err.message, 'error'));
  }

  copyFacilitatorLink() {
    const link = `${location.origin}/s/${this.sessionId}#key=${this.token}`;
    navigator.clipboard?.writeText(link).then(() => toast('Facilitator link copied.'), () => toast('Copying is blocked here; the link is in this browser only.', 'error'));
  }

  async downloadDocument(format = 'json') {
    let blob;
    if (format === 'json') {
      blob = new Blob([JSON.stringify(this.state.document, null, 2)], { type: 'application/json' });
    } else {
      const response = await fetch(`/api/sessions/${encodeURIComponent(this.sessionId)}/document?format=${format}`, { headers: { [TOKEN_HEADER]: this.token } });
      if (!response.ok) { toast((await response.json().catch(() => ({}))).error || 'export failed', 'error'); return; }
      blob = await response.blob();
    }
    const name = { json: 'diagram.arrowmoot.json', graphml: 'diagram.graphml', dot: 'diagram.gv' }[format];
    const a = el('a', { href: URL.createObjectURL(blob), download: name });
    document.body.append(a); a.click(); a.remove();
  }

  /** Open the session's report in a new tab, through a short-lived link (tabs cannot send the key). */
  async openReport() {
    const tab = window.open('', '_blank');  // opened now, inside the click, so it is not blocked
    try {
      const data = await callApi('POST', `/api/sessions/${encodeURIComponent(this.sessionId)}/report/link`, undefined, this.token);
      if (tab) { tab.opener = null; tab.location.href = data.url; } else location.assign(data.url);
    } catch (err) {
      if (tab) tab.close();
      toast(err.message, 'error');
    }
  }

  /** Download the versioned record bundle of the whole workshop. */
  async downloadBundle() {
    const response = await fetch(`/api/sessions/${encodeURIComponent(this.sessionId)}/export/bundle`, { headers: { [TOKEN_HEADER]: this.token } });
    if (!response.ok) { toast((await response.json().catch(() => ({}))).error || 'export failed', 'error'); return; }
    const a = el('a', { href: URL.createObjectURL(await response.blob()), download: 'workshop.record.json' });
    document.body.append(a); a.click(); a.remove();
  }

  async importFile(file) {
    if (!file) { toast('Choose a file first.', 'error'); return; }
    const lower = file.name.toLowerCase();
    const format = lower.endsWith('.graphml') || lower.endsWith('.xml') ? 'graphml' : lower.endsWith('.dot') || lower.endsWith('.gv') ? 'dot' : 'json';
    const text = await file.text();
    await this.send({ type: 'import_document', text, format }).then(() => { this.canvas.fitted = false; this.canvas.fit(); toast(`Imported ${file.name}.`); }).catch(() => {});
  }

  // -- layout ---------------------------------------------------------------------------
  buildLayout() {
    const app = document.getElementById('app');
    clear(app);
    this.bar = el('div', { class: 'session-bar' });
    this.toolbar = el('div', { class: 'toolbar', role: 'toolbar', 'aria-label': 'Diagram tools' });
    this.canvasHost = el('div', { class: 'canvas-host' });
    this.legend = buildLegend();
    this.banner = el('p', { class: 'stage-banner', hidden: true, role: 'status' });
    const canvasWrap = el('section', { class: 'canvas-wrap' }, this.toolbar, this.banner, this.canvasHost, this.legend);
    this.tabs = el('nav', { class: 'tabs', role: 'tablist' });
    this.panel = el('div', { class: 'panel', role: 'tabpanel' });
    this.estimationPanel = el('div', { id: 'estimation-panel', class: 'panel', hidden: true });
    const side = el('aside', { class: 'side' }, this.tabs, this.panel, this.estimationPanel);
    app.append(this.bar, el('div', { class: 'workspace' }, canvasWrap, side));
    this.canvas = new Canvas(this.canvasHost, {
      onCommand: (c) => this.send(c).then((ack) => {
        if (c.type === 'propose') toast(`Your proposal to add ${c.from} → ${c.to} is up for a vote (Debate tab).`);
        return ack;
      }),
      onSelect: (s) => this.select(s),
      onAddVariable: (x, y) => this.addVariableAt(x, y),
      arrowCommand: (from, to) => this.arrowCommand(from, to),
    });
    this.buildToolbar();
    document.addEventListener('keydown', (event) => this.keyDown(event));
    window.addEventListener('resize', () => this.canvas.applyView());
  }

  buildToolbar() {
    const button = (text, title, onClick, extra = {}) => el('button', { type: 'button', text, title, on: { click: onClick }, ...extra });
    this.connectButton = button('Draw arrow', 'Arrow mode: drag from one variable to another (C). Shift-drag works in any mode.', () => this.toggleConnect(), { 'aria-pressed': 'false' });
    clear(this.toolbar).append(
      button('+ Variable', 'Add a variable (N); or double-click empty space', () => this.addVariableAt()),
      this.connectButton,
      button('Tidy', 'Arrange in layers, causes on the left (T)', () => this.send({ type: 'tidy' }).then(() => this.canvas.fit()).catch(() => {})),
      button('Fit', 'Fit the diagram to the screen (F)', () => this.canvas.fit()),
      button('−', 'Zoom out (-)', () => this.canvas.zoomBy(1 / 1.2)),
      button('+', 'Zoom in (+)', () => this.canvas.zoomBy(1.2)),
      button('Legend', 'Show or hide the legend (G)', () => { this.legend.hidden = !this.legend.hidden; }),
      button('Keys', 'Keyboard shortcuts (?)', () => showShortcuts()),
      button('Big text', 'Larger text for a projector (P)', () => toggleProjector()));
  }

  toggleConnect() {
    this.canvas.mode = this.canvas.mode === 'connect' ? 'select' : 'connect';
    this.connectButton.setAttribute('aria-pressed', this.canvas.mode === 'connect' ? 'true' : 'false');
    this.canvasHost.classList.toggle('connect-mode', this.canvas.mode === 'connect');
  }

  keyDown(event) {
    const target = event.target;
    if (target.closest?.('input, textarea, select, dialog')) return;
    const sel = this.view.selection;
    const key = event.key;
    if ((event.ctrlKey || event.metaKey) && key.toLowerCase() === 'z') {
      event.preventDefault();
      if (this.isFacilitator) this.send({ type: 'undo' }).catch(() => {});
      else toast('Only the facilitator can undo.', 'error');
      return;
    }
    if (event.ctrlKey || event.metaKey || event.altKey) return;
    const arrowOf = () => this.state.arrows.find((a) => JSON.stringify([a.from, a.to]) === sel.key);
    switch (key) {
      case 'n': case 'N': event.preventDefault(); this.addVariableAt(); break;
      case 'c': case 'C': this.toggleConnect(); break;
      case 't': case 'T': this.send({ type: 'tidy' }).then(() => this.canvas.fit()).catch(() => {}); break;
      case 'f': case 'F': this.canvas.fit(); break;
      case 'g': case 'G': this.legend.hidden = !this.legend.hidden; break;
      case '+': case '=': this.canvas.zoomBy(1.2); break;
      case '-': this.canvas.zoomBy(1 / 1.2); break;
      case '?': showShortcuts(); break;
      case 'p': case 'P': toggleProjector(); break;
      case 'Escape': this.view.highlight = null; this.select(null); break;
      case 'Delete': case 'Backspace':
        if (!sel) break;
        event.preventDefault();
        if (sel.kind === 'variable') this.send({ type: 'delete_variable', name: sel.name }).then(() => this.select(null)).catch(() => {});
        else if (sel.kind === 'arrow') {
          const a = arrowOf();
          if (!a) break;
          if (this.state.session.stage === 'debating' && !this.isFacilitator) this.proposeWithReason('remove', a.from, a.to);
          else this.send({ type: 'delete_arrow', from: a.from, to: a.to }).then(() => this.select(null)).catch(() => {});
        }
        break;
      case 'r': case 'R':
        if (sel?.kind === 'arrow') {
          const a = arrowOf();
          if (!a) break;
          if (this.state.session.stage === 'debating' && !this.isFacilitator) this.proposeWithReason('reverse', a.from, a.to);
          else this.send({ type: 'reverse_arrow', from: a.from, to: a.to }).then(() => this.select({ kind: 'arrow', key: JSON.stringify([a.to, a.from]) })).catch(() => {});
        }
        break;
      case 'ArrowUp': case 'ArrowDown': case 'ArrowLeft': case 'ArrowRight':
        if (sel?.kind === 'variable') {
          event.preventDefault();
          const v = this.state.document.variables.find((x) => x.name === sel.name);
          const step = event.shiftKey ? 5 : 20;
          const dx = { ArrowLeft: -step, ArrowRight: step }[key] || 0;
          const dy = { ArrowUp: -step, ArrowDown: step }[key] || 0;
          if (v) this.send({ type: 'move_variable', name: v.name, x: (v.x || 0) + dx, y: (v.y || 0) + dy }).catch(() => {});
        }
        break;
      case 'l': case 'L':
        if (sel?.kind === 'variable') {
          const v = this.state.document.variables.find((x) => x.name === sel.name);
          if (v) this.send({ type: 'update_variable', name: v.name, latent: !v.latent }).catch(() => {});
        }
        break;
      case 'e': case 'E': case 'F2':
        if (sel?.kind === 'variable') {
          event.preventDefault();
          askText(`Rename ${sel.name}`, { label: 'New name', value: sel.name, required: true, confirm: 'Rename' }).then((name) => {
            if (name && name !== sel.name) this.send({ type: 'update_variable', name: sel.name, new_name: name }).then(() => this.select({ kind: 'variable', name })).catch(() => {});
          });
        }
        break;
      default: break;
    }
  }

  // -- rendering --------------------------------------------------------------------------
  renderAll() {
    this.renderBar();
    this.renderCanvas();
    this.renderTabs();
    this.refreshPanel();
  }

  renderBar() {
    const s = this.state;
    document.title = `${s.session.title} · Arrowmoot`;
    const stage = s.session.stage;
    const stepper = el('ol', { class: 'stages', 'aria-label': 'Stages' }, s.session.stages.map((name, i) => {
      const current = name === stage;
      const item = el('li', { class: `stage${current ? ' stage-current' : ''}${s.session.stages.indexOf(stage) > i ? ' stage-done' : ''}` });
      const label = `${i + 1}. ${STAGE_NAMES[name]}`;
      if (this.isFacilitator && !current) item.append(el('button', { type: 'button', text: label, title: `Move the session to ${STAGE_NAMES[name]}${LOCKED.has(name) ? ' (locks the diagram)' : ''}`, on: { click: () => this.moveStage(name) } }));
      else item.append(el('span', { text: label, 'aria-current': current ? 'step' : null }));
      return item;
    }));
    const onlineCount = this.online.size;
    clear(this.bar).append(
      this.isFacilitator
        ? el('h1', { class: 'session-title' }, el('button', { type: 'button', class: 'title-button', text: s.session.title, title: 'Rename the session',
          on: { click: () => this.renameSession() } }))
        : el('h1', { class: 'session-title', text: s.session.title }),
      stepper,
      el('button', { type: 'button', class: 'join-code', title: 'Show the join address large, for the room',
        on: { click: () => showJoinScreen(s.session.join_code) } },
        el('span', { class: 'muted', text: `${location.host}/join · code ` }), el('strong', { text: s.session.join_code })),
      el('div', { class: 'who' }, el('span', { text: `${this.me.name} · ${this.me.roles.join(', ')}` }),
        el('span', { class: 'muted', text: ` · ${onlineCount} online` })),
      this.statusBadge = el('span', { class: `live-status live-${this.status}`, text: statusText(this.status) }));
  }

  renderStatus() {
    if (!this.statusBadge) return;
    this.statusBadge.className = `live-status live-${this.status}`;
    this.statusBadge.textContent = statusText(this.status);
  }

  renderCanvas() {
    const s = this.state;
    const pendingByArrow = new Map();
    for (const p of s.proposals) {
      if ((p.kind === 'remove' || p.kind === 'reverse') && ['open', 'disputed'].includes(p.status)) {
        const key = JSON.stringify([p.from, p.to]);
        if (!pendingByArrow.has(key)) pendingByArrow.set(key, []);
        pendingByArrow.get(key).push(p);
      }
    }
    const contested = new Set();
    for (const item of s.disputed) for (const opt of item.options) if (opt) contested.add(JSON.stringify(opt));
    const arrows = s.arrows.map((a) => ({ ...a, contested: contested.has(JSON.stringify([a.from, a.to])) && a.flag !== 'settled' && (a.tally.disagree > 0 || pendingByArrow.has(JSON.stringify([a.from, a.to]))) }));
    const decisive = new Set();
    const disputes = this.analysis?.disputes;
    if (disputes) for (const item of disputes.items) if (item.decisive) decisive.add(JSON.stringify(item.pair));
    this.renderBanner();
    this.canvas.render({
      document: s.document, arrows, proposals: s.proposals, pendingByArrow, decisive,
      selection: this.view.selection, highlight: this.view.highlight, adjusted: this.view.adjusted || [],
      roles: this.analysis?.revision === s.revision ? this.analysis?.analysis?.roles : this.canvas.model?.roles,
    });
  }

  renderBanner() {
    const stage = this.state.session.stage;
    const text = {
      debating: 'Debating: new arrows, removals and reversals become proposals for the room to vote on.',
      agreed: 'The diagram is agreed and locked. The facilitator can reopen it, with a reason for the log.',
      estimation: 'Estimation: the diagram is locked; the analyst works in the Estimation tab.',
    }[stage];
    this.banner.hidden = !text;
    this.banner.className = `stage-banner stage-banner-${stage}`;
    this.banner.textContent = text || '';
  }

  renderTabs() {
    const open = this.state.proposals.filter((p) => p.status === 'open').length;
    const tabs = [
      ['analysis', 'Implications'], ['debate', `Debate${open ? ` (${open})` : ''}`], ['selection', 'Selection'],
      ['history', 'History'], ['people', 'People'],
    ];
    if (this.estimationMounted) tabs.push(['estimation', 'Estimation']);
    clear(this.tabs).append(...tabs.map(([id, text]) => el('button', {
      type: 'button', role: 'tab', class: `tab${this.tab === id ? ' tab-current' : ''}`, 'aria-selected': this.tab === id ? 'true' : 'false',
      text, dataset: { tab: id },
      on: { click: () => { this.tab = id; if (id === 'history') this.loadHistory(); this.renderTabs(); this.refreshPanel(); } },
    })));
  }

  refreshPanel() {
    if (!this.state) return;
    const showEstimation = this.tab === 'estimation';
    this.panel.hidden = showEstimation;
    this.estimationPanel.hidden = !showEstimation;
    if (showEstimation) return;
    const scroll = this.panel.scrollTop;
    const render = { analysis: renderAnalysis, debate: renderDebate, selection: renderSelection, history: renderHistory, people: renderPeople }[this.tab];
    clear(this.panel).append(render(this));
    this.panel.scrollTop = scroll;
    this.renderTabs();
  }

  async mountEstimation() {
    if (!pageData.estimation_module) return;
    try {
      const module = await import(pageData.estimation_module);
      if (typeof module.mountEstimation !== 'function') return;
      this.estimationMounted = true;
      module.mountEstimation(this.estimationPanel, {
        sessionId: this.sessionId, token: this.token, member: this.me, state: () => this.state, api: callApi,
      });
      this.renderTabs();
    } catch (err) {
      console.warn('estimation panel not loaded', err);
    }
  }
}

/** Live pushes list only arrows with votes or marks; fill in the rest from the document. */
function normalizeState(state) {
  if (!state.arrows_compact) return state;
  const notes = new Map(state.arrows.map((a) => [JSON.stringify([a.from, a.to]), a]));
  state.arrows = state.document.arrows.map((a) => notes.get(JSON.stringify([a.from, a.to])) || blankArrowNote(a.from, a.to));
  state.arrows_compact = false;
  return state;
}

function statusText(status) {
  return { live: 'Live', connecting: 'Connecting…', reconnecting: 'Reconnecting…', offline: 'Offline' }[status] || status;
}

function buildLegend() {
  const shapes = {
    rect: () => [svg('rect', { class: 'shape', x: 2, y: 3, width: 42, height: 18, rx: 4 })],
    hex: () => [svg('polygon', { class: 'shape', points: '8,3 38,3 44,12 38,21 8,21 2,12' })],
    double: () => [svg('rect', { class: 'shape', x: 2, y: 3, width: 42, height: 18, rx: 4 }),
      svg('rect', { class: 'shape-inner', x: 5, y: 6, width: 36, height: 12, rx: 2 })],
    ring: () => [svg('rect', { class: 'adjust-ring', x: 1, y: 1, width: 44, height: 22, rx: 7 }),
      svg('rect', { class: 'shape', x: 6, y: 5, width: 34, height: 14, rx: 3 })],
    line: () => [svg('line', { class: 'edge-line', x1: 2, y1: 12, x2: 38, y2: 12 }),
      svg('path', { class: 'head', d: 'M35,7 L44,12 L35,17 L37,12 z' })],
    halo: (cls) => [svg('line', { class: `halo ${cls}`, x1: 2, y1: 12, x2: 44, y2: 12 })],
  };
  const sample = (cls, text, shape = 'rect') => el('li', {},
    svg('svg', { width: 46, height: 24, 'aria-hidden': 'true', class: `legend-sample ${cls}` }, shapes[shape](cls)),
    el('span', { text }));
  return el('aside', { class: 'legend', 'aria-label': 'Legend' },
    el('h2', { text: 'Legend' }),
    el('ul', {},
      sample('node', 'measured variable'),
      sample('node node-latent', 'unmeasured (dashed, hatched)'),
      sample('node node-treatment', 'treatment (pointed ends)', 'hex'),
      sample('node node-outcome', 'outcome (double border)', 'double'),
      sample('node node-adjusted', 'in the set shown (dotted ring)', 'ring'),
      sample('edge', 'arrow', 'line'),
      sample('edge edge-disputed', 'disputed arrow (long dashes, ?)', 'line'),
      sample('edge edge-proposed', 'proposed arrow (short dashes)', 'line'),
      sample('halo-causal', 'causal path shown (solid band)', 'halo'),
      sample('halo-noncausal', 'non-causal path shown (broken band)', 'halo')));
}

function showJoinScreen(code) {
  const dialog = el('dialog', { class: 'join-screen' },
    el('p', { text: 'Join this session at' }),
    el('p', { class: 'join-url', text: `${location.origin}/join` }),
    el('p', { text: 'with the code' }),
    el('p', { class: 'join-big', text: code }),
    el('button', { type: 'button', class: 'primary', text: 'Close', on: { click: () => { dialog.close(); dialog.remove(); } } }));
  document.body.append(dialog);
  dialog.showModal();
}

function toggleProjector() {
  document.body.classList.toggle('projector');
  localStorage.setItem('arrowmoot:projector', document.body.classList.contains('projector') ? '1' : '');
}

function showShortcuts() {
  const rows = [
    ['N', 'new variable (or double-click empty space)'], ['C', 'arrow mode on/off (or Shift-drag)'],
    ['Delete', 'delete the selection (proposes while debating)'], ['R', 'reverse the selected arrow'],
    ['E / F2', 'rename the selected variable'], ['L', 'mark the selected variable unmeasured / measured'],
    ['Arrow keys', 'nudge the selected variable (Shift: finer)'],
    ['T', 'tidy the layout'], ['F', 'fit to screen'], ['+ / −', 'zoom'], ['G', 'legend'],
    ['P', 'larger text for a projector'], ['Ctrl+Z', 'undo (facilitator)'], ['Esc', 'clear the selection'],
  ];
  const dialog = el('dialog', { class: 'ask' }, el('h2', { text: 'Keyboard shortcuts' }),
    el('table', { class: 'keys' }, el('tbody', {}, rows.map(([k, v]) => el('tr', {}, el('th', {}, el('kbd', { text: k })), el('td', { text: v }))))),
    el('div', { class: 'row end' }, el('button', { type: 'button', class: 'primary', text: 'Close', on: { click: () => { dialog.close(); dialog.remove(); } } })));
  document.body.append(dialog);
  dialog.showModal();
}

function showBlocked(message) {
  const app = document.getElementById('app');
  clear(app).append(el('main', { class: 'narrow' }, el('section', { class: 'card' },
    el('h1', { text: 'You are not in this session yet' }),
    el('p', { class: 'error-message', text: message }),
    el('p', { text: 'Ask the facilitator for the join code, or open your facilitator link again.' }),
    el('p', {}, el('a', { href: '/join', text: 'Join with a code' })))));
}

function start() {
  if (localStorage.getItem('arrowmoot:projector')) document.body.classList.add('projector');
  const sessionId = pageData.session_id;
  const match = location.hash.match(/key=([^&]+)/);
  if (match) {
    const token = decodeURIComponent(match[1]);
    localStorage.setItem(`arrowmoot:key:${sessionId}`, token);
    // Drop the key from the address bar so it does not end up on a projector or in a screenshot.
    history.replaceState(null, '', location.pathname + location.search);
  }
  const token = loadKey(sessionId);
  if (!token) { showBlocked('This browser holds no key for the session.'); return; }
  const app = new SessionApp(sessionId, token);
  window.arrowmoot = app;
  app.start();
}

start();
