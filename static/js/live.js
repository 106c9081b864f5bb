// The live connection: a WebSocket that says hello with the key, resyncs from the last
// revision after a drop, and carries commands (falling back to HTTP while it is down).

import { callApi } from './api.js';

export class LiveSession {
  /**
   * @param {string} sessionId
   * @param {string} token
   * @param {{onState: Function, onAnalysis: Function, onPresence: Function, onStatus: Function, onWelcome: Function, onFatal: Function}} handlers
   */
  constructor(sessionId, token, handlers) {
    this.sessionId = sessionId;
    this.token = token;
    this.handlers = handlers;
    this.revision = null;
    this.socket = null;
    this.pending = new Map();
    this.nextId = 1;
    // Commands carry a key unique to this page, so a resent one is applied once.
    this.keyPrefix = Array.from(crypto.getRandomValues(new Uint32Array(2)), (n) => n.toString(36)).join('');
    this.retryDelay = 500;
    this.stopped = false;
  }

  connect() {
    const scheme = location.protocol === 'https:' ? 'wss' : 'ws';
    const socket = new WebSocket(`${scheme}://${location.host}/ws/sessions/${encodeURIComponent(this.sessionId)}`);
    this.socket = socket;
    this.handlers.onStatus('connecting');
    socket.addEventListener('open', () => {
      socket.send(JSON.stringify({ type: 'hello', token: this.token, revision: this.revision }));
    });
    socket.addEventListener('message', (event) => this.receive(JSON.parse(event.data)));
    socket.addEventListener('close', (event) => {
      if (this.socket !== socket) return;
      this.socket = null;
      // Unanswered commands stay pending and are sent again, with the same key, once
      // the connection is back; the server applies a key only once.
      if (event.code === 4401 || event.code === 4403 || event.code === 4404) {
        for (const [, waiter] of this.pending) waiter.reject(new Error('the session refused this browser; your change did not land'));
        this.pending.clear();
        this.handlers.onStatus('offline');
        this.handlers.onFatal(event.code);
        return;
      }
      if (this.stopped) return;
      this.handlers.onStatus('reconnecting');
      setTimeout(() => this.connect(), this.retryDelay);
      this.retryDelay = Math.min(this.retryDelay * 2, 5000);
    });
  }

  receive(message) {
    switch (message.type) {
      case 'welcome':
        this.retryDelay = 500;
        this.handlers.onStatus('live');
        this.handlers.onWelcome(message);
        for (const [id, waiter] of this.pending) {
          this.socket.send(JSON.stringify({ type: 'command', id, key: waiter.key, command: waiter.command }));
        }
        break;
      case 'state':
        if (this.revision === null || message.revision >= this.revision) {
          this.revision = message.revision;
          this.handlers.onState(message.state, message.missed || [], message.event || null);
        }
        break;
      case 'patch':
        if (this.revision !== null && message.base === this.revision && this.handlers.onPatch(message)) {
          this.revision = message.revision;
        } else if (this.revision === null || message.revision > this.revision) {
          this.socket?.send(JSON.stringify({ type: 'resync', revision: this.revision }));
        }
        break;
      case 'analysis':
        this.handlers.onAnalysis(message);
        break;
      case 'presence':
        this.handlers.onPresence(message.online);
        break;
      case 'ack': {
        const waiter = this.pending.get(message.id);
        if (waiter) { this.pending.delete(message.id); waiter.resolve(message); }
        break;
      }
      case 'error': {
        const waiter = this.pending.get(message.id);
        if (waiter) { this.pending.delete(message.id); waiter.reject(Object.assign(new Error(message.error), message)); }
        else if (message.error) this.handlers.onError?.(message);
        break;
      }
      default:
        break;
    }
  }

  /** Send a command; resolves with the ack, rejects with the server's message. */
  send(command) {
    const socket = this.socket;
    if (!socket || socket.readyState !== WebSocket.OPEN) {
      return callApi('POST', `/api/sessions/${encodeURIComponent(this.sessionId)}/commands`, command, this.token);
    }
    const id = this.nextId++;
    const key = `${this.keyPrefix}-${id}`;
    return new Promise((resolve, reject) => {
      this.pending.set(id, { resolve, reject, command, key });
      socket.send(JSON.stringify({ type: 'command', id, key, command }));
    });
  }

  close() {
    this.stopped = true;
    this.socket?.close();
  }
}

const arrowId = (from, to) => JSON.stringify([from, to]);

/** The entry an arrow without votes or a mark has in the page's state. */
export function blankArrowNote(from, to) {
  return { from, to, flag: null, tally: { agree: 0, disagree: 0, unsure: 0, total: 0 }, votes: [] };
}

/**
 * Apply a patch (see app/workshop/views.py, change_patch) to the page's state, whose
 * `arrows` lists every drawn arrow in the document's order. Checks first and changes
 * nothing when the patch does not fit that state (the caller then asks for a resync).
 * @returns {boolean} whether it was applied
 */
export function applyPatch(state, patch) {
  const doc = state.document;
  const variables = new Map(doc.variables.map((v) => [v.name, v]));
  if ((patch.moves || []).some((m) => !variables.has(m.name))) return false;
  if ((patch.variables_added || []).some((v) => variables.has(v.name))) return false;
  const drawn = new Set(doc.arrows.map((a) => arrowId(a.from, a.to)));
  if (state.arrows.length !== doc.arrows.length) return false;
  const removed = new Set((patch.arrows_removed || []).map(([from, to]) => arrowId(from, to)));
  for (const id of removed) { if (!drawn.has(id)) return false; drawn.delete(id); }
  for (const [from, to] of patch.arrows_added || []) {
    const id = arrowId(from, to);
    if (drawn.has(id)) return false;
    drawn.add(id);
  }
  if ((patch.arrow_notes || []).some((n) => !drawn.has(arrowId(n.from, n.to)))) return false;

  for (const m of patch.moves || []) { const v = variables.get(m.name); v.x = m.x; v.y = m.y; }
  for (const v of patch.variables_added || []) doc.variables.push(v);
  if (removed.size || patch.arrows_added?.length) {
    // A reversed arrow keeps its place in the list, as on the server.
    const inPlace = new Map();
    const appended = [];
    for (const [from, to] of patch.arrows_added || []) {
      if (removed.has(arrowId(to, from))) inPlace.set(arrowId(to, from), [from, to]);
      else appended.push([from, to]);
    }
    const rebuild = (list, make) => {
      const out = [];
      for (const a of list) {
        const id = arrowId(a.from, a.to);
        if (inPlace.has(id)) out.push(make(...inPlace.get(id)));
        else if (!removed.has(id)) out.push(a);
      }
      return out.concat(appended.map(([from, to]) => make(from, to)));
    };
    doc.arrows = rebuild(doc.arrows, (from, to) => ({ from, to }));
    state.arrows = rebuild(state.arrows, blankArrowNote);
  }
  if (patch.arrow_notes?.length) {
    const notes = new Map(patch.arrow_notes.map((n) => [arrowId(n.from, n.to), n]));
    state.arrows = state.arrows.map((a) => notes.get(arrowId(a.from, a.to)) || a);
  }
  for (const p of patch.proposals || []) {
    const i = state.proposals.findIndex((x) => x.id === p.id);
    if (i >= 0) state.proposals[i] = p;
    else {
      const at = state.proposals.findIndex((x) => x.id > p.id);
      state.proposals.splice(at < 0 ? state.proposals.length : at, 0, p);
    }
  }
  if ('disputed' in patch) state.disputed = patch.disputed;
  if ('can_undo' in patch) state.can_undo = patch.can_undo;
  state.revision = patch.revision;
  return true;
}
