// Keeping what someone is typing while the panel around it is rebuilt by a live update.
//
// A field that holds text the person may be writing carries `data-draft` (a key that
// names what it edits, stable across rebuilds) and `data-base` (the value the server
// holds for it). Before a rebuild the panel's drafts, focus and caret are read; after
// it they are put back. Where the server's value moved underneath the draft, or the
// thing edited is gone, a note beside the field says so and the draft is kept.

import { el } from './dom.js';

/** Mark a field as one whose typing must survive rebuilds. */
export function draftField(field, key, base) {
  field.dataset.draft = key;
  field.dataset.base = base ?? '';
  return field;
}

/** A key for a focusable element that names the same control after a rebuild. */
function focusKey(node) {
  if (node.dataset?.draft) return `draft:${node.dataset.draft}`;
  if (node.dataset?.focus) return `focus:${node.dataset.focus}`;
  const owner = node.closest?.('[data-proposal], [data-pair], [data-variable]');
  const where = owner ? Object.entries(owner.dataset).map(([k, v]) => `${k}=${v}`).join(',') : '';
  return `${where}|${node.tagName}|${node.getAttribute('role') || ''}|${(node.textContent || node.getAttribute('aria-label') || '').trim()}`;
}

const FOCUSABLE = 'input, textarea, select, button, a[href], [tabindex]';

/**
 * What the person has under way in a panel: drafts that differ from their base, the
 * focused control and its caret.
 * @param {HTMLElement} root
 * @param {Map<string, {value: string, base: string, label: string, tab: string}>} drafts kept across rebuilds
 * @param {string} tab the panel these fields were shown in
 */
export function readPanel(root, drafts, tab) {
  for (const field of root.querySelectorAll('[data-draft]')) {
    const key = field.dataset.draft;
    if (field.value !== field.dataset.base) {
      // The base stays the value the person started from, so a change underneath keeps its note.
      const base = drafts.get(key)?.base ?? field.dataset.base;
      drafts.set(key, { value: field.value, base, label: fieldLabel(field), tab });
    } else drafts.delete(key);
  }
  const active = document.activeElement;
  if (!active || !root.contains(active) || !active.matches(FOCUSABLE)) return { focus: null };
  const caret = typeof active.selectionStart === 'number'
    ? { start: active.selectionStart, end: active.selectionEnd, direction: active.selectionDirection } : null;
  return { focus: focusKey(active), caret, scroll: active.scrollTop };
}

function fieldLabel(field) {
  return field.getAttribute('aria-label') || field.closest('label')?.firstChild?.textContent?.trim() || 'a field';
}

/**
 * Put drafts, focus and caret back into a rebuilt panel. Drafts whose field is not in
 * the panel any more stay in `drafts` (the panel may show them again later).
 * @returns {string[]} keys of drafts whose field is missing from this panel
 */
export function restorePanel(root, drafts, before) {
  for (const field of root.querySelectorAll('[data-draft]')) {
    const draft = drafts.get(field.dataset.draft);
    if (!draft) continue;
    const base = field.dataset.base;
    if (draft.value === base) { drafts.delete(field.dataset.draft); continue; }
    field.value = draft.value;
    if (draft.base !== base) field.after(changedNote(base));
    if (field.disabled) field.after(closedNote());
  }
  if (before?.focus) {
    const target = [...root.querySelectorAll(FOCUSABLE)].find((node) => focusKey(node) === before.focus);
    if (target && !target.disabled) {
      target.focus({ preventScroll: true });
      if (before.caret && typeof target.setSelectionRange === 'function') {
        try { target.setSelectionRange(before.caret.start, before.caret.end, before.caret.direction); } catch { /* not a text field */ }
      }
      if (before.scroll) target.scrollTop = before.scroll;
    }
  }
  const shown = new Set([...root.querySelectorAll('[data-draft]')].map((f) => f.dataset.draft));
  return [...drafts.keys()].filter((key) => !shown.has(key));
}

function changedNote(base) {
  return el('p', { class: 'draft-note', role: 'status', text: base
    ? `Someone else changed this while you were typing; it now reads “${base}”. Your text is kept here until you save or clear it.`
    : 'Someone else cleared this while you were typing. Your text is kept here until you save or clear it.' });
}

function closedNote() {
  return el('p', { class: 'draft-note', role: 'status', text: 'This can no longer be changed here, so your text cannot be sent; it is kept so you can copy it.' });
}

/**
 * Notes for drafts whose field left the panel because what they edited is gone: each
 * says why and shows the text to copy.
 * @param {string} why what happened, in words
 */
export function orphanNotes(drafts, keys, why, onDismiss) {
  return keys.map((key) => {
    const draft = drafts.get(key);
    const copy = el('textarea', { rows: 2, readonly: true, class: 'draft-orphan-text', 'aria-label': `Your unsent text for ${draft.label}` });
    copy.value = draft.value;
    return el('div', { class: 'draft-note draft-orphan', role: 'status' },
      el('p', { text: `${why} What you typed in “${draft.label}” was not sent; here it is to copy:` }),
      copy,
      el('button', { type: 'button', class: 'quiet', text: 'Dismiss', on: { click: () => { drafts.delete(key); onDismiss(); } } }));
  });
}
