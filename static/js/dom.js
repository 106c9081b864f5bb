// Small DOM helpers. User text only ever goes in through textContent.

/**
 * Create an element. attrs: plain attributes, plus `text`, `class`, `on` (event map), `dataset`.
 * @param {string} tag
 * @param {Record<string, any>} [attrs]
 * @param {...(Node|string|null|undefined|false)} children
 */
export function el(tag, attrs = {}, ...children) {
  const node = document.createElement(tag);
  applyAttributes(node, attrs);
  appendChildren(node, children);
  return node;
}

const SVG_NS = 'http://www.w3.org/2000/svg';

/** Create an SVG element (same attribute rules as el). */
export function svg(tag, attrs = {}, ...children) {
  const node = document.createElementNS(SVG_NS, tag);
  applyAttributes(node, attrs);
  appendChildren(node, children);
  return node;
}

function applyAttributes(node, attrs) {
  for (const [key, value] of Object.entries(attrs || {})) {
    if (value === undefined || value === null || value === false) continue;
    if (key === 'text') node.textContent = String(value);
    else if (key === 'on') for (const [type, fn] of Object.entries(value)) node.addEventListener(type, fn);
    else if (key === 'dataset') for (const [k, v] of Object.entries(value)) node.dataset[k] = String(v);
    else node.setAttribute(key, value === true ? '' : String(value));
  }
}

function appendChildren(node, children) {
  for (const child of children.flat()) {
    if (child === null || child === undefined || child === false) continue;
    node.append(typeof child === 'string' ? document.createTextNode(child) : child);
  }
}

/** Remove every child of a node. */
export function clear(node) {
  while (node.firstChild) node.removeChild(node.firstChild);
  return node;
}

/** Show a short message in the corner; kind is 'error' or 'info'. */
export function toast(message, kind = 'info') {
  let box = document.getElementById('toasts');
  if (!box) {
    box = el('div', { id: 'toasts', role: 'status', 'aria-live': 'polite' });
    document.body.append(box);
  }
  const item = el('div', { class: `toast toast-${kind}`, text: message });
  box.append(item);
  setTimeout(() => item.remove(), kind === 'error' ? 7000 : 3500);
}

/**
 * Ask for a line of text in a small dialog. Resolves to the text, or null when cancelled.
 * @param {string} title
 * @param {{label?: string, value?: string, required?: boolean, multiline?: boolean, confirm?: string}} options
 */
export function askText(title, options = {}) {
  return new Promise((resolve) => {
    const input = options.multiline
      ? el('textarea', { rows: 3, maxlength: 500 })
      : el('input', { type: 'text', maxlength: 200 });
    input.value = options.value || '';
    const error = el('p', { class: 'form-error' });
    const dialog = el('dialog', { class: 'ask' },
      el('form', { method: 'dialog', class: 'stack' },
        el('h2', { text: title }),
        el('label', {}, options.label || '', input),
        error,
        el('div', { class: 'row end' },
          el('button', { type: 'button', value: 'cancel', text: 'Cancel', on: { click: () => finish(null) } }),
          el('button', { type: 'submit', class: 'primary', text: options.confirm || 'OK' }))));
    dialog.querySelector('form').addEventListener('submit', (event) => {
      event.preventDefault();
      const value = input.value.trim();
      if (options.required && !value) { error.textContent = 'Please write something here.'; return; }
      finish(value);
    });
    dialog.addEventListener('cancel', (event) => { event.preventDefault(); finish(null); });
    function finish(value) { dialog.close(); dialog.remove(); resolve(value); }
    document.body.append(dialog);
    dialog.showModal();
    input.focus();
    input.select?.();
  });
}

/** Format a unix time (seconds) as a local clock time. */
export function clock(seconds) {
  const d = new Date(seconds * 1000);
  return d.toLocaleTimeString([], { hour: '2-digit', minute: '2-digit', second: '2-digit' });
}

/** How each role of a variable is written, on the canvas and in the panels alike. */
export const ROLE_WORDS = {
  treatment: 'treatment', outcome: 'outcome', confounder: 'confounder', mediator: 'mediator',
  collider: 'collider', treatment_descendant: 'descendant of treatment', instrument: 'instrument',
  outcome_descendant: 'descendant of outcome', treatment_cause: 'cause of treatment only',
  outcome_cause: 'cause of outcome only', unrelated: 'not on any path',
};

/**
 * How an independence the diagram implies is written: `a and b independent given {c, d}`.
 * The server sends it ready-made as `text`; results saved before it did are written here the same way.
 * @param {{x: string, y: string, given: string[], text?: string}} item
 */
export function independenceText(item) {
  if (item.text) return item.text;
  return `${item.x} and ${item.y} independent${item.given?.length ? ` given {${item.given.join(', ')}}` : ''}`;
}
