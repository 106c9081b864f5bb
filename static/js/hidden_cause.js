// The room's stated hidden causes: each member says how strong the strongest hidden
// common cause of treatment and outcome could be, compared with a measured variable.
// Members see their own statement and a count; the facilitator sees the spread.
// The words and choices come from the server (state.hidden_causes).

import { el } from './dom.js';
import { LOCKED_STAGES } from './vocabulary.js';

/** What the member has picked but not yet sent; kept across live re-renders. */
const draft = { variable: null, times: null };

function candidates(doc) {
  const roles = new Set([...(doc.treatment || []), ...(doc.outcome || [])]);
  return (doc.variables || []).filter((v) => !v.latent && !roles.has(v.name)).map((v) => v.name);
}

function spreadGrid(info) {
  const choices = info.choices;
  const byVariable = new Map();
  for (const s of info.statements) {
    if (!byVariable.has(s.variable)) byVariable.set(s.variable, new Map());
    const row = byVariable.get(s.variable);
    row.set(s.times, [...(row.get(s.times) || []), s.by]);
  }
  const head = el('tr', {}, el('th', { text: 'compared with' }), ...choices.map(([, words]) => el('th', { text: words.replace(' as strong as', '') })));
  const rows = [...byVariable.entries()].map(([variable, row]) => el('tr', {},
    el('th', { text: variable }),
    ...choices.map(([times]) => {
      const who = row.get(times) || [];
      return el('td', { title: who.join(', '), text: who.length ? '●'.repeat(Math.min(who.length, 8)) + (who.length > 8 ? '+' : '') : '' });
    })));
  const odd = info.statements.filter((s) => !choices.some(([t]) => t === s.times));
  return el('div', {},
    el('table', { class: 'hidden-cause-spread' }, el('thead', {}, head), el('tbody', {}, ...rows)),
    odd.length ? el('p', { class: 'muted', text: odd.map((s) => `${s.by}: ${s.words}`).join('; ') } ) : null);
}

/** The section shown in the debate panel. */
export function renderHiddenCauses(app) {
  const info = app.state.hidden_causes;
  const box = el('section', { class: 'hidden-causes', 'aria-label': 'Hidden common cause' });
  if (!info) return box;
  const doc = app.state.document;
  const t = (doc.treatment || []).join(', ') || 'the treatment';
  const o = (doc.outcome || []).join(', ') || 'the outcome';
  const locked = LOCKED_STAGES.has(app.state.session.stage);
  const mine = info.statements.find((s) => s.member === app.me?.id);
  box.append(el('h3', { text: `How strong could a hidden common cause be? (${info.statements.length} stated)` }),
    el('p', { class: 'muted', text: `Something unmeasured that drives both ${t} and ${o}. ${info.meaning}` }));
  if (mine) {
    box.append(el('p', { class: 'hidden-cause-mine' }, el('strong', { text: 'You said: ' }),
      el('span', { text: `the strongest I can imagine is ${mine.words}.` }),
      locked ? null : el('button', { type: 'button', class: 'quiet', text: 'Withdraw', on: { click: () => app.send({ type: 'state_hidden_cause', times: null }) } })));
  }
  const names = candidates(doc);
  if (!locked && names.length) {
    if (!names.includes(draft.variable)) draft.variable = mine?.variable && names.includes(mine.variable) ? mine.variable : names[0];
    if (draft.times === null) draft.times = mine?.times ?? 1;
    const times = el('select', { name: 'hidden-cause-times', 'aria-label': 'How strong', on: { change: (e) => { draft.times = Number(e.target.value); } } },
      ...info.choices.map(([value, words]) => el('option', { value: String(value), text: words, selected: value === draft.times })));
    const variable = el('select', { name: 'hidden-cause-variable', 'aria-label': 'Compared with', on: { change: (e) => { draft.variable = e.target.value; } } },
      ...names.map((n) => el('option', { value: n, text: n, selected: n === draft.variable })));
    box.append(el('div', { class: 'row hidden-cause-form' },
      el('span', { text: 'The strongest I can imagine is' }), times, variable,
      el('button', { type: 'button', 'data-action': 'state-hidden-cause', text: mine ? 'Change' : 'State it',
        on: { click: () => app.send({ type: 'state_hidden_cause', variable: draft.variable, times: draft.times }) } })));
  } else if (!locked) {
    box.append(el('p', { class: 'muted', text: 'Add a measured variable besides the treatment and the outcome to compare with.' }));
  }
  if (app.isFacilitator && info.statements.length) box.append(spreadGrid(info));
  return box;
}
