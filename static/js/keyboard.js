// The session page's keyboard shortcuts: one table of keys, each calling a named action.

import { el } from './dom.js';
import * as commands from './commands.js';

const SHORTCUTS = [
  ['N', 'new variable (or double-click empty space)'], ['C', 'arrow mode on/off (or Shift-drag)'],
  ['Delete', 'delete the selection (proposes while debating)'], ['R', 'reverse the selected arrow'],
  ['E / F2', 'rename the selected variable'], ['L', 'mark the selected variable unmeasured / measured'],
  ['Arrow keys', 'nudge the selected variable (Shift: finer)'], ['[ / ]', 'select the previous / next variable'],
  ['T', 'tidy the layout'], ['F', 'fit to screen'], ['+ / −', 'zoom'], ['G', 'legend'],
  ['P', 'larger text for a projector'], ['Ctrl+Z', 'undo (facilitator)'], ['Esc', 'clear the selection'],
];

/** Listen for the shortcuts on the whole page (never while typing in a field or a dialog). */
export function attachKeyboard(app) {
  document.addEventListener('keydown', (event) => handleKey(app, event));
}

export function handleKey(app, event) {
  const target = event.target;
  if (target.closest?.('input, textarea, select, dialog')) return;
  const key = event.key;
  if ((event.ctrlKey || event.metaKey) && key.toLowerCase() === 'z') {
    event.preventDefault();
    commands.undoLast(app);
    return;
  }
  if (event.ctrlKey || event.metaKey || event.altKey) return;
  switch (key) {
    case 'n': case 'N': event.preventDefault(); commands.addVariableAt(app); break;
    case 'c': case 'C': app.toggleConnect(); break;
    case 't': case 'T': commands.tidyLayout(app); break;
    case 'f': case 'F': app.canvas.fit(); break;
    case 'g': case 'G': app.toggleLegend(); break;
    case '+': case '=': app.canvas.zoomBy(1.2); break;
    case '-': app.canvas.zoomBy(1 / 1.2); break;
    case '?': showShortcuts(); break;
    case 'p': case 'P': app.toggleProjector(); break;
    case 'Escape': app.view.highlight = null; app.select(null); break;
    case '[': case ']': commands.selectNextVariable(app, key === ']' ? 1 : -1); break;
    case 'Delete': case 'Backspace':
      if (!app.view.selection) break;
      event.preventDefault();
      commands.deleteSelection(app);
      break;
    case 'r': case 'R': commands.reverseSelection(app); break;
    case 'ArrowUp': case 'ArrowDown': case 'ArrowLeft': case 'ArrowRight': {
      const step = event.shiftKey ? 5 : 20;
      const dx = { ArrowLeft: -step, ArrowRight: step }[key] || 0;
      const dy = { ArrowUp: -step, ArrowDown: step }[key] || 0;
      if (commands.nudgeSelection(app, dx, dy)) event.preventDefault();
      break;
    }
    case 'l': case 'L': commands.toggleLatent(app); break;
    case 'e': case 'E': case 'F2':
      if (commands.renameSelection(app)) event.preventDefault();
      break;
    default: break;
  }
}

export function showShortcuts() {
  const dialog = el('dialog', { class: 'ask' }, el('h2', { text: 'Keyboard shortcuts' }),
    el('table', { class: 'keys' }, el('tbody', {}, SHORTCUTS.map(([k, v]) => el('tr', {}, el('th', {}, el('kbd', { text: k })), el('td', { text: v }))))),
    el('div', { class: 'row end' }, el('button', { type: 'button', class: 'primary', text: 'Close', on: { click: () => { dialog.close(); dialog.remove(); } } })));
  document.body.append(dialog);
  dialog.showModal();
}
