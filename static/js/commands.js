// What the people in the room can ask of the diagram, as named actions. Each builds a
// command for the server (see app/workshop/commands.py) from the page's state, sends it
// through the app, and says what went wrong in a toast when it is refused.

import { toast, askText } from './dom.js';
import { confirmStep } from './dialogs.js';
import { disputeTitle } from './panels.js';
import { LOCKED_STAGES as LOCKED } from './vocabulary.js';

const NUDGE_QUIET_MS = 150;
const arrowKey = (from, to) => JSON.stringify([from, to]);

/** Drawing an arrow: a proposal for the room while debating, a plain arrow before. */
export function arrowCommand(stage, from, to) {
  if (stage === 'debating') return { type: 'propose', kind: 'add', from, to };
  return { type: 'add_arrow', from, to };
}

export function isLocked(stage) { return LOCKED.has(stage); }

function selectedArrow(app) {
  const sel = app.view.selection;
  if (sel?.kind !== 'arrow') return null;
  return app.state.arrows.find((a) => arrowKey(a.from, a.to) === sel.key) || null;
}

function selectedVariable(app) {
  const sel = app.view.selection;
  if (sel?.kind !== 'variable') return null;
  return app.state.document.variables.find((v) => v.name === sel.name) || null;
}

/** Ask for an optional reason, then propose to add, remove or reverse an arrow. */
export async function proposeWithReason(app, kind, from, to) {
  const reason = await askText(`Propose to ${kind} ${from} → ${to}`, { label: 'Why? (optional, one line)', confirm: 'Propose' });
  if (reason === null) return;
  await app.send({ type: 'propose', kind, from, to, reason }).catch(() => {});
  app.tab = 'debate';
  app.renderAll();
}

export async function addVariableAt(app, x, y) {
  if (LOCKED.has(app.state.session.stage)) { toast(app.lockedReason(), 'error'); return; }
  const name = await askText('New variable', { label: 'Name', required: true, confirm: 'Add' });
  if (!name) return;
  const p = x === undefined ? app.canvas.visibleCentre() : { x, y };
  await app.send({ type: 'add_variable', name, x: Math.round(p.x), y: Math.round(p.y) })
    .then(() => app.select({ kind: 'variable', name })).catch(() => {});
}

export function tidyLayout(app) {
  app.send({ type: 'tidy' }).then(() => app.canvas.fit()).catch(() => {});
}

export function undoLast(app) {
  if (app.isFacilitator) app.send({ type: 'undo' }).catch(() => {});
  else toast('Only the facilitator can undo.', 'error');
}

/** Delete the selected variable or arrow (a participant proposes the removal while debating). */
export function deleteSelection(app) {
  const sel = app.view.selection;
  if (sel?.kind === 'variable') {
    app.send({ type: 'delete_variable', name: sel.name }).then(() => app.select(null)).catch(() => {});
    return;
  }
  const a = selectedArrow(app);
  if (!a) return;
  if (app.state.session.stage === 'debating' && !app.isFacilitator) proposeWithReason(app, 'remove', a.from, a.to);
  else app.send({ type: 'delete_arrow', from: a.from, to: a.to }).then(() => app.select(null)).catch(() => {});
}

export function reverseSelection(app) {
  const a = selectedArrow(app);
  if (!a) return;
  if (app.state.session.stage === 'debating' && !app.isFacilitator) proposeWithReason(app, 'reverse', a.from, a.to);
  else app.send({ type: 'reverse_arrow', from: a.from, to: a.to }).then(() => app.select({ kind: 'arrow', key: arrowKey(a.to, a.from) })).catch(() => {});
}

/** Move the selected variable by (dx, dy). @returns {boolean} whether a variable was selected */
export function nudgeSelection(app, dx, dy) {
  const v = selectedVariable(app);
  if (!v) return false;
  // Shown at once; key repeats within a moment go out as one move of the latest position.
  v.x = (v.x || 0) + dx;
  v.y = (v.y || 0) + dy;
  app.renderCanvas();
  clearTimeout(app.nudgeTimer);
  app.nudgeTimer = setTimeout(() => {
    app.send({ type: 'move_variable', name: v.name, x: v.x, y: v.y }).catch(() => {});
  }, NUDGE_QUIET_MS);
  return true;
}

/** Select the next (step 1) or previous (step -1) variable in the document's order. */
export function selectNextVariable(app, step) {
  const names = app.state.document.variables.map((v) => v.name);
  if (!names.length) return;
  const sel = app.view.selection;
  const at = sel?.kind === 'variable' ? names.indexOf(sel.name) : -1;
  const next = at < 0 ? (step > 0 ? 0 : names.length - 1) : (at + step + names.length) % names.length;
  app.focusSelection = true;
  app.select({ kind: 'variable', name: names[next] });
}

export function toggleLatent(app) {
  const v = selectedVariable(app);
  if (v) app.send({ type: 'update_variable', name: v.name, latent: !v.latent }).catch(() => {});
}

/** @returns {boolean} whether a variable was selected */
export function renameSelection(app) {
  const sel = app.view.selection;
  if (sel?.kind !== 'variable') return false;
  askText(`Rename ${sel.name}`, { label: 'New name', value: sel.name, required: true, confirm: 'Rename' }).then((name) => {
    if (name && name !== sel.name) app.send({ type: 'update_variable', name: sel.name, new_name: name }).then(() => app.select({ kind: 'variable', name })).catch(() => {});
  });
  return true;
}

export async function moveStage(app, stage, stageNames) {
  if (!app.isFacilitator || stage === app.state.session.stage) return;
  const plan = stageMovePlan(app.state, stage, stageNames);
  if (plan) {
    const go = await confirmStep(plan.title, plan);
    if (!go) return;
  }
  let reason = '';
  const reopening = LOCKED.has(app.state.session.stage) && !LOCKED.has(stage);
  if (reopening) {
    reason = await askText(`Reopen the diagram (${stageNames[stage]})`, { label: 'Why is it being reopened? This goes in the log.', required: true, multiline: true, confirm: 'Reopen' });
    if (reason === null) return;
  }
  app.send({ type: 'set_stage', stage, reason }).catch(() => {});
}

/**
 * What moving to `target` leaves behind, for the facilitator to confirm: stages a jump
 * skips, and, when the move locks the diagram, the proposals and disputes still open.
 * Null when there is nothing to say. Without `confirm` the move cannot go ahead yet.
 */
export function stageMovePlan(state, target, stageNames) {
  const current = state.session.stage;
  const order = state.session.stages;
  const from = order.indexOf(current), to = order.indexOf(target);
  const text = [];
  const skipped = to > from + 1 ? order.slice(from + 1, to) : [];
  const skipWords = {
    debating: 'Debating is skipped: nobody will have proposed or voted on the arrows, so the record shows the diagram as drawn, without the room’s votes.',
    agreed: 'Agreed is skipped: the diagram is locked for estimation without a moment where the room sees it as final.',
  };
  for (const stage of skipped) text.push(skipWords[stage] || `${stageNames[stage]} is skipped.`);
  const locking = LOCKED.has(target) && !LOCKED.has(current);
  if (locking) {
    const open = state.proposals.filter((p) => p.status === 'open');
    if (open.length) {
      return {
        title: `${open.length} proposal${open.length > 1 ? 's are' : ' is'} still open`,
        text: [...text, 'The diagram cannot be locked while proposals wait for a decision. Accept, reject or leave each one disputed first:'],
        items: open.map((p) => `#${p.id} ${p.summary} (${p.tally.agree} agree, ${p.tally.disagree} disagree, ${p.tally.unsure} unsure)`),
      };
    }
    const disputed = state.disputed || [];
    if (disputed.length) {
      text.push(`${disputed.length === 1 ? 'One arrow is' : `${disputed.length} arrows are`} still in dispute. Locking keeps each as drawn now and records it as unsettled:`);
    }
    if (!text.length) return null;
    return {
      title: `Move to ${stageNames[target]} and lock the diagram?`,
      text,
      items: disputed.map((item) => `${disputeTitle(item.options, item.current ?? 0)} — ${item.why.join('; ')}`),
      confirm: `Lock it (${stageNames[target]})`,
      cancel: 'Not yet',
    };
  }
  if (!text.length) return null;
  return { title: `Jump to ${stageNames[target]}?`, text, confirm: `Go to ${stageNames[target]}`, cancel: 'Stay' };
}

export async function renameSession(app) {
  const title = await askText('Rename the session', { label: 'Title', value: app.state.session.title, required: true, confirm: 'Rename' });
  if (title && title !== app.state.session.title) app.send({ type: 'rename_session', title }).catch(() => {});
}

/** Replace the diagram with one read from a file (JSON, GraphML or DOT). */
export async function importFile(app, file) {
  if (!file) { toast('Choose a file first.', 'error'); return; }
  const lower = file.name.toLowerCase();
  const format = lower.endsWith('.graphml') || lower.endsWith('.xml') ? 'graphml' : lower.endsWith('.dot') || lower.endsWith('.gv') ? 'dot' : 'json';
  const text = await file.text();
  await app.send({ type: 'import_document', text, format }).then(() => { app.canvas.fitted = false; app.canvas.fit(); toast(`Imported ${file.name}.`); }).catch(() => {});
}
