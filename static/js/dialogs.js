// Dialogs that ask the facilitator to confirm a step, listing what it leaves behind.

import { el } from './dom.js';

/**
 * Ask to confirm a step. Resolves true when confirmed, false when cancelled.
 * Without `confirm` the dialog only informs (one button that closes it).
 * @param {string} title
 * @param {{text?: string[], items?: string[], after?: string, confirm?: string, cancel?: string}} options
 */
export function confirmStep(title, options = {}) {
  return new Promise((resolve) => {
    const finish = (value) => { dialog.close(); dialog.remove(); resolve(value); };
    const buttons = options.confirm
      ? [el('button', { type: 'button', text: options.cancel || 'Cancel', on: { click: () => finish(false) } }),
        el('button', { type: 'button', class: 'primary', text: options.confirm, on: { click: () => finish(true) } })]
      : [el('button', { type: 'button', class: 'primary', text: options.cancel || 'Close', on: { click: () => finish(false) } })];
    const dialog = el('dialog', { class: 'ask confirm-step', 'aria-labelledby': 'confirm-step-title' },
      el('h2', { id: 'confirm-step-title', text: title }),
      (options.text || []).map((t) => el('p', { text: t })),
      options.items?.length ? el('ul', { class: 'confirm-items' }, options.items.map((t) => el('li', { text: t }))) : null,
      options.after ? el('p', { text: options.after }) : null,
      el('div', { class: 'row end' }, buttons));
    dialog.addEventListener('cancel', (event) => { event.preventDefault(); finish(false); });
    document.body.append(dialog);
    dialog.showModal();
    buttons[buttons.length - 1].focus();
  });
}
