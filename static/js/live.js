// The live connection: a WebSocket that says hello with the key, resyncs from the last
// revision after a drop, and carries commands (falling back to HTTP while it is down).

import { postCommand } from './api.js';

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
      return postCommand(this.sessionId, this.token, command);
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
