// The live workshop page: wires the state, the canvas, the panels and the live connection
// together. State and its reducers: state.js; drawing the frame: render.js; commands:
// commands.js; shortcuts: keyboard.js; talking to the server: api.js and live.js.

import { el, clear, toast } from './dom.js';
import {
  loadKey, saveKey, forgetKey, fetchSession, fetchHistory, checkAdjustmentSet, createReportLink,
  fetchDocumentExport, fetchRecordBundle,
} from './api.js';
import { LiveSession } from './live.js';
import { Canvas } from './canvas.js';
import { renderAnalysis, renderDebate, renderSelection, renderHistory, renderPeople } from './panels.js';
import {
  createPageState, reduceLoaded, reduceFullState, reducePatch, reduceEvent, reduceSelection, reduceHighlight,
  reduceAdjusted, reduceAdjustedPaths, adjustedPaths,
} from './state.js';
import { STAGE_NAMES, renderBar, renderStatus, renderBanner, renderTabs, canvasModel, buildLegend } from './render.js';
import * as commands from './commands.js';
import { attachKeyboard, showShortcuts } from './keyboard.js';
import { readPanel, restorePanel, orphanNotes } from './drafts.js';
import { applyColourVariables } from './visual.js';

// What the room hears about as it happens: votes, proposals and their fate, stage moves.
const ANNOUNCED = new Set(['vote', 'withdraw_vote', 'propose', 'withdraw_proposal', 'settle', 'set_stage']);

const pageData = JSON.parse(document.getElementById('page-data').textContent);

class SessionApp {
  constructor(sessionId, token) {
    this.sessionId = sessionId;
    this.token = token;
    this.page = createPageState();
    this.listeners = new Set();
    // Unsaved text in the panels, by field (see drafts.js), kept across live updates.
    this.drafts = new Map();
    this.panelTab = null;
    this.lastEvent = null;
  }

  // The page's state lives in one object (state.js); these name its parts.
  get state() { return this.page.shared; }
  get analysis() { return this.page.analysis; }
  set analysis(value) { this.page.analysis = value; }
  get history() { return this.page.history; }
  set history(value) { this.page.history = value; }
  get me() { return this.page.me; }
  set me(value) { this.page.me = value; }
  get online() { return this.page.online; }
  get tab() { return this.page.tab; }
  set tab(value) { this.page.tab = value; }
  get view() { return this.page.view; }
  get status() { return this.page.status; }

  get isFacilitator() { return this.me?.role === 'facilitator'; }

  /**
   * Hear what arrives live: ('state' | 'patch' | 'analysis', message), after the page
   * has applied it. Returns a function that stops listening.
   */
  subscribe(listener) {
    this.listeners.add(listener);
    return () => this.listeners.delete(listener);
  }

  notify(kind, message) {
    for (const listener of this.listeners) {
      try { listener(kind, message); } catch (err) { console.warn('listener failed', err); }
    }
  }

  async start() {
    let data;
    try {
      data = await fetchSession(this.sessionId, this.token);
    } catch (err) {
      if (err.status === 401 || err.status === 403) forgetKey(this.sessionId);
      showBlocked(err.message);
      return;
    }
    reduceLoaded(this.page, data);
    this.readOnly = Boolean(data.read_only);
    saveKey(this.sessionId, this.token, this.state.session.title, this.me.role);
    this.buildLayout();
    this.live = new LiveSession(this.sessionId, this.token, {
      onState: (state, missed, event) => this.receiveState(state, missed, event),
      onPatch: (message) => this.receivePatch(message),
      onAnalysis: (message) => this.receiveAnalysis(message),
      onPresence: (online) => { this.page.online = new Set(online); if (this.tab === 'people') this.refreshPanel(); this.renderBar(); },
      onStatus: (status) => { this.page.status = status; renderStatus(this); },
      onWelcome: (message) => { this.me = message.member; },
      onFatal: () => showBlocked('This browser’s key for the session is no longer accepted.'),
      onError: (message) => toast(message.error, 'error'),
    });
    this.live.connect();
    this.renderAll();
    this.mountEstimation();
  }

  receivePatch(message) {
    const applied = reducePatch(this.page, message);
    if (!applied) return false;
    this.noteEvent(message.event);
    if (applied.positionsOnly) this.renderCanvas();
    else this.renderAll();
    this.notify('patch', message);
    return true;
  }

  receiveState(state, missed, event) {
    const before = this.state;
    reduceFullState(this.page, state);
    if (missed.length > 1 && before) toast(`Caught up on ${missed.length} changes made while you were away.`);
    if (missed.length) { if (this.history) this.loadHistory(); } else this.noteEvent(event);
    this.renderAll();
    this.notify('state', state);
  }

  receiveAnalysis(message) {
    this.analysis = message;
    this.refreshAdjustedPaths();
    this.refreshPanel();
    this.renderCanvas();
    this.notify('analysis', message);
  }

  noteEvent(event) {
    if (event) { this.lastEvent = event; this.announce(event); }
    if (!reduceEvent(this.page, event)) { this.loadHistory(); return; }
    if (event && this.history && this.tab === 'history') this.refreshPanel();
  }

  /** Send a command; show the server's message when it is refused. */
  send(command, retried = false) {
    // After the server said "too fast", wait out its pause before sending anything.
    const wait = (this.backoffUntil || 0) - Date.now();
    const sent = wait > 0 ? new Promise((r) => setTimeout(r, wait)).then(() => this.live.send(command)) : this.live.send(command);
    return sent.catch((err) => {
      if (err.code === 'too_many_commands' && !retried) {
        const seconds = err.retry_after ?? err.body?.retry_after ?? 1;
        this.backoffUntil = Date.now() + seconds * 1000;
        if (!this.backoffNoted || Date.now() - this.backoffNoted > 5000) {
          this.backoffNoted = Date.now();
          toast('Changes are going out faster than the room can follow; this page now sends them a little slower.', 'info');
        }
        return this.send(command, true);
      }
      toast(err.message || String(err), 'error');
      throw err;
    });
  }

  arrowCommand(from, to) { return commands.arrowCommand(this.state.session.stage, from, to); }

  proposeWithReason(kind, from, to) { return commands.proposeWithReason(this, kind, from, to); }

  select(selection) {
    reduceSelection(this.page, selection);
    this.renderAll();
  }

  highlightPath(path) {
    reduceHighlight(this.page, path);
    this.renderAll();
  }

  showAdjusted(set) {
    reduceAdjusted(this.page, set);
    this.refreshAdjustedPaths();
    this.renderAll();
  }

  /** With a set shown on the diagram, list the paths as they stand given that set. */
  refreshAdjustedPaths() {
    const set = this.view.adjusted;
    if (!set || !this.analysis?.analysis) return;
    const revision = this.analysis.revision;
    if (this.adjustedView()) return;
    checkAdjustmentSet(this.state.document, set).then((result) => {
      if (reduceAdjustedPaths(this.page, revision, set, result)) this.refreshPanel();
    }).catch((err) => {
      // The set may name a variable that was just deleted or renamed; stop showing it.
      this.view.adjusted = null;
      toast(err.message, 'error');
      this.renderAll();
    });
  }

  /** Paths and the check given the set shown, when worked out for the current revision; else null. */
  adjustedView() { return adjustedPaths(this.page); }

  addVariableAt(x, y) { return commands.addVariableAt(this, x, y); }

  lockedReason() { return lockedReason(this, this.state.session.stage); }

  moveStage(stage) { return commands.moveStage(this, stage, STAGE_NAMES); }

  renameSession() { return commands.renameSession(this); }

  importFile(file) { return commands.importFile(this, file); }

  loadHistory() {
    fetchHistory(this.sessionId, this.token)
      .then((data) => { this.history = data.events; if (this.tab === 'history') this.refreshPanel(); })
      .catch((err) => toast(err.message, 'error'));
  }

  openTab(id) {
    this.tab = id;
    if (id === 'history') this.loadHistory();
    this.renderTabs();
    this.refreshPanel();
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
      try { blob = await fetchDocumentExport(this.sessionId, this.token, format); } catch (err) { toast(err.message, 'error'); return; }
    }
    const name = { json: 'diagram.arrowmoot.json', graphml: 'diagram.graphml', dot: 'diagram.gv' }[format];
    saveBlob(blob, name);
  }

  /** Open the session's report in a new tab, through a short-lived link (tabs cannot send the key). */
  async openReport() {
    const tab = window.open('', '_blank');  // opened now, inside the click, so it is not blocked
    try {
      const data = await createReportLink(this.sessionId, this.token);
      if (tab) { tab.opener = null; tab.location.href = data.url; } else location.assign(data.url);
    } catch (err) {
      if (tab) tab.close();
      toast(err.message, 'error');
    }
  }

  /** Download the versioned record bundle of the whole workshop. */
  async downloadBundle() {
    let blob;
    try { blob = await fetchRecordBundle(this.sessionId, this.token); } catch (err) { toast(err.message, 'error'); return; }
    saveBlob(blob, 'workshop.record.json');
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
    this.canvasNote = el('p', { class: 'canvas-note', hidden: true });
    // Toolbar above, banner and legend below: the canvas between them, never under them.
    const footer = el('div', { class: 'canvas-footer' }, this.banner, this.canvasNote, this.legend);
    const canvasWrap = el('section', { class: 'canvas-wrap' }, this.toolbar, this.canvasHost, footer);
    this.tabs = el('nav', { class: 'tabs', role: 'tablist' });
    this.panel = el('div', { class: 'panel', role: 'tabpanel' });
    this.estimationPanel = el('div', { id: 'estimation-panel', class: 'panel', hidden: true });
    const side = el('aside', { class: 'side' }, this.tabs, this.panel, this.estimationPanel);
    // Live changes by others, read out politely (the region itself is not shown).
    this.announcer = el('div', { class: 'visually-hidden', 'aria-live': 'polite', 'aria-atomic': 'false', role: 'log', 'aria-label': 'Changes in the room' });
    app.append(this.bar, el('div', { class: 'workspace' }, canvasWrap, side), this.announcer);
    this.canvas = new Canvas(this.canvasHost, {
      // A drawn arrow while debating becomes a proposal: ask for its (optional) reason first.
      onCommand: (c) => (c.type === 'propose' ? this.proposeWithReason(c.kind, c.from, c.to) : this.send(c)),
      onSelect: (s) => this.select(s),
      onAddVariable: (x, y) => this.addVariableAt(x, y),
      arrowCommand: (from, to) => this.arrowCommand(from, to),
      onFit: (cut) => {
        this.canvasNote.hidden = !cut;
        this.canvasNote.textContent = cut ? 'Zoomed to keep the labels readable: drag the canvas to see the rest, or zoom out (−).' : '';
      },
    });
    this.buildToolbar();
    attachKeyboard(this);
    window.addEventListener('resize', () => this.canvas.applyView());
  }

  buildToolbar() {
    const button = (text, title, onClick, extra = {}) => el('button', { type: 'button', text, title, on: { click: onClick }, ...extra });
    this.connectButton = button('Draw arrow', 'Arrow mode: drag from one variable to another (C). Shift-drag works in any mode.', () => this.toggleConnect(), { 'aria-pressed': 'false' });
    const addButton = button('+ Variable', 'Add a variable (N); or double-click empty space', () => this.addVariableAt());
    this.drawingButtons = [[addButton, addButton.title], [this.connectButton, this.connectButton.title]];
    clear(this.toolbar).append(
      addButton,
      this.connectButton,
      button('Tidy', 'Arrange in layers, causes on the left (T)', () => commands.tidyLayout(this)),
      button('Fit', 'Fit the diagram to the screen (F)', () => this.canvas.fit()),
      button('−', 'Zoom out (-)', () => this.canvas.zoomBy(1 / 1.2)),
      button('+', 'Zoom in (+)', () => this.canvas.zoomBy(1.2)),
      button('Legend', 'Show or hide the legend (G)', () => this.toggleLegend()),
      button('Keys', 'Keyboard shortcuts (?)', () => showShortcuts()),
      button('Big text', 'Larger text for a projector (P)', () => this.toggleProjector()));
  }

  /** Drawing tools are off while the diagram is locked, and say why. */
  renderToolbarState() {
    const stage = this.state.session.stage;
    const locked = commands.isLocked(stage) || this.readOnly;
    const why = locked ? lockedReason(this, stage) : null;
    for (const [button, title] of this.drawingButtons || []) {
      button.disabled = locked;
      button.title = locked ? why : title;
    }
    if (locked && this.canvas.mode === 'connect') this.toggleConnect();
  }

  toggleConnect() {
    if (this.canvas.mode !== 'connect' && (commands.isLocked(this.state.session.stage) || this.readOnly)) {
      toast(lockedReason(this, this.state.session.stage), 'error');
      return;
    }
    this.canvas.mode = this.canvas.mode === 'connect' ? 'select' : 'connect';
    this.connectButton.setAttribute('aria-pressed', this.canvas.mode === 'connect' ? 'true' : 'false');
    this.canvasHost.classList.toggle('connect-mode', this.canvas.mode === 'connect');
  }

  toggleLegend() {
    this.legend.open = !this.legend.open;
  }

  toggleProjector() {
    document.body.classList.toggle('projector');
    localStorage.setItem('arrowmoot:projector', document.body.classList.contains('projector') ? '1' : '');
  }

  // -- rendering --------------------------------------------------------------------------
  renderAll() {
    this.renderBar();
    this.renderCanvas();
    this.renderTabs();
    this.refreshPanel();
  }

  renderBar() { renderBar(this); }

  renderTabs() { renderTabs(this); }

  renderCanvas() {
    renderBanner(this);
    this.renderToolbarState();
    this.canvas.render(canvasModel(this, this.canvas.model?.roles));
  }

  refreshPanel() {
    if (!this.state) return;
    const showEstimation = this.tab === 'estimation';
    this.panel.hidden = showEstimation;
    this.estimationPanel.hidden = !showEstimation;
    if (showEstimation) return;
    const scroll = this.panel.scrollTop;
    const render = { analysis: renderAnalysis, debate: renderDebate, selection: renderSelection, history: renderHistory, people: renderPeople }[this.tab];
    const before = readPanel(this.panel, this.drafts, this.panelTab);
    clear(this.panel).append(render(this));
    this.panelTab = this.tab;
    const missing = restorePanel(this.panel, this.drafts, before)
      .filter((key) => this.drafts.get(key).tab === this.tab && this.isDraftOrphaned(key));
    if (missing.length) this.panel.prepend(...orphanNotes(this.drafts, missing, this.orphanReason(), () => this.refreshPanel()));
    if (this.focusSelection) {
      // chosen from the list: the reader lands on what was chosen
      this.focusSelection = false;
      this.panel.querySelector('.selection-heading')?.focus();
    }
    this.panel.scrollTop = scroll;
    this.renderTabs();
  }

  /** Tell screen readers, politely, about votes, proposals and stage changes as they happen. */
  announce(event) {
    if (!this.announcer || !ANNOUNCED.has(event.kind)) return;
    if (event.actor === this.me.id && event.kind !== 'set_stage') return;  // one's own change is on screen
    const line = el('p', { text: `${event.actor === this.me.id ? 'You' : event.actor_name} ${event.summary}.` });
    this.announcer.append(line);
    while (this.announcer.childElementCount > 5) this.announcer.firstChild.remove();
  }

  /** Whether the variable, arrow or proposal a draft's key names is gone from the state. */
  isDraftOrphaned(key) {
    const [kind, id] = JSON.parse(key);
    const s = this.state;
    if (kind === 'variable') return !s.document.variables.some((v) => v.name === id);
    if (kind === 'arrow') return !s.arrows.some((a) => JSON.stringify([a.from, a.to]) === id);
    if (kind === 'proposal') return !s.proposals.some((p) => p.id === id);
    return false;
  }

  orphanReason() {
    const e = this.lastEvent;
    return e && e.actor !== this.me.id ? `${e.actor_name} ${e.summary} while you were typing.` : 'What you were editing changed while you were typing.';
  }

  async mountEstimation() {
    if (!pageData.estimation_module) return;
    try {
      const module = await import(pageData.estimation_module);
      if (typeof module.mountEstimation !== 'function') return;
      this.estimationMounted = true;
      module.mountEstimation(this.estimationPanel, {
        sessionId: this.sessionId, token: this.token, member: this.me, state: () => this.state,
        subscribe: (listener) => this.subscribe(listener),
      });
      this.renderTabs();
    } catch (err) {
      console.warn('estimation panel not loaded', err);
    }
  }
}

/** Why the diagram cannot be changed now, in words for a tooltip or a message. */
export function lockedReason(app, stage) {
  if (app.readOnly) return 'This is a read-only copy of a workshop record: nothing in it can be changed.';
  const who = app.isFacilitator ? 'you can reopen it by moving back to Debating or Drafting' : 'only the facilitator can reopen it';
  return `The diagram is locked in the ${stage === 'agreed' ? 'Agreed' : 'Estimation'} stage; ${who}.`;
}

function saveBlob(blob, name) {
  const a = el('a', { href: URL.createObjectURL(blob), download: name });
  document.body.append(a); a.click(); a.remove();
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
  applyColourVariables();
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
