// Start page: open a session (optionally from a graph document) or continue to a join code.

import { el, clear } from './dom.js';
import { callApi, saveKey, listSessions } from './api.js';

const createForm = document.getElementById('create-form');
const createError = document.getElementById('create-error');

createForm.addEventListener('submit', async (event) => {
  event.preventDefault();
  createError.textContent = '';
  const form = new FormData(createForm);
  const body = { title: form.get('title'), name: form.get('name') || undefined };
  const treatment = String(form.get('treatment') || '').trim();
  const outcome = String(form.get('outcome') || '').trim();
  if (treatment) body.treatment = treatment;
  if (outcome) body.outcome = outcome;
  const file = form.get('document');
  if (file && file.size) {
    body.document_text = await file.text();
    body.document_format = formatOf(file.name);
  }
  try {
    const data = await callApi('POST', '/api/sessions', body);
    saveKey(data.session_id, data.token, data.state.session.title, 'facilitator');
    location.href = data.session_page;
  } catch (err) {
    createError.textContent = err.message;
  }
});

const joinError = document.getElementById('join-error');
document.getElementById('join-code-form').addEventListener('submit', async (event) => {
  event.preventDefault();
  joinError.textContent = '';
  const code = String(new FormData(event.target).get('code') || '').trim().toUpperCase().replaceAll(' ', '');
  if (!code) return;
  // Checked here first, so a wrong code is answered beside the field, not on a page of its own.
  try {
    await callApi('GET', `/api/join/${encodeURIComponent(code)}`);
    location.href = `/join/${encodeURIComponent(code)}`;
  } catch (err) {
    joinError.textContent = err.status === 404
      ? `No session has the code ${code}. Check it with the facilitator: it is on their screen, six letters and digits.`
      : err.message;
    event.target.querySelector('input[name=code]').focus();
  }
});

const mine = listSessions();
if (mine.length) {
  const list = clear(document.getElementById('my-sessions-list'));
  for (const s of mine) {
    list.append(el('li', {}, el('a', { href: `/s/${encodeURIComponent(s.id)}`, text: s.title }), el('span', { class: 'muted', text: ` (${s.role})` })));
  }
  document.getElementById('my-sessions').hidden = false;
}

/** The import format from a file name: GraphML, DOT, or our JSON document. */
export function formatOf(name) {
  const lower = name.toLowerCase();
  if (lower.endsWith('.graphml') || lower.endsWith('.xml')) return 'graphml';
  if (lower.endsWith('.dot') || lower.endsWith('.gv')) return 'dot';
  return 'json';
}
