// Side panels: what the diagram implies, the debate, the selection, history, people.
// Each function takes the app object and returns DOM built with textContent only.

import { el, clock, ROLE_WORDS, independenceText, askText } from './dom.js';
import { draftField } from './drafts.js';
import { renderHiddenCauses } from './hidden_cause.js';
import { VOTE_LABELS, LOCKED_STAGES } from './vocabulary.js';

function setChips(app, sets, label) {
  if (!sets?.length) return el('p', { class: 'muted', text: 'none' });
  return el('div', { class: 'chips' }, sets.map((set) => {
    const key = JSON.stringify(set);
    const active = app.view.adjusted !== null && JSON.stringify(app.view.adjusted) === key;
    return el('button', {
      class: `chip${active ? ' chip-active' : ''}`, type: 'button', 'aria-pressed': active ? 'true' : 'false',
      title: `Show ${label} on the diagram`,
      text: set.length ? `{ ${set.join(', ')} }` : '{ } (nothing to adjust for)',
      on: { click: () => app.showAdjusted(active ? null : set) },
    });
  }));
}

function pathText(nodes, arrowsSet) {
  const parts = [nodes[0]];
  for (let i = 1; i < nodes.length; i++) {
    const forward = arrowsSet.has(JSON.stringify([nodes[i - 1], nodes[i]]));
    parts.push(forward ? ' → ' : ' ← ', nodes[i]);
  }
  return parts.join('');
}

/** The analysis of the current diagram. */
export function renderAnalysis(app) {
  const box = el('div', { class: 'panel-body' });
  const info = app.analysis;
  const stale = info && info.revision !== app.state.revision;
  if (!info) return el('div', { class: 'panel-body' }, el('p', { class: 'muted', text: 'Working out what the diagram implies…' }));
  if (stale) box.append(el('p', { class: 'updating', text: 'Updating for the latest edit…' }));
  if (!info.analysis) {
    box.append(el('p', { class: 'notice', text: info.problem || 'No analysis yet.' }));
    return box;
  }
  const a = info.analysis;
  const verdict = a.identifiable
    ? `Identified${a.strategy ? ` by ${a.strategy === 'adjustment' ? 'adjustment' : a.strategy === 'front-door' ? 'the front-door criterion' : 'an instrument'}` : ''}`
    : 'Not identified from this diagram';
  box.append(el('div', { class: `verdict ${a.identifiable ? 'verdict-yes' : 'verdict-no'}` },
    el('span', { class: 'verdict-mark', 'aria-hidden': 'true', text: a.identifiable ? '◆' : '◇' }),
    el('strong', { text: verdict })));
  box.append(el('p', { class: 'summary', text: a.summary }));

  box.append(el('h3', { text: 'Smallest sets to adjust for' }));
  box.append(setChips(app, a.minimal_adjustment_sets, 'this adjustment set'));
  if (a.more_sets_exist) box.append(el('p', { class: 'muted', text: 'More sets exist; the first ones are listed.' }));
  // The paths and the check for the set shown, worked out for this very revision and set.
  const given = app.adjustedView();
  if (given?.adjustment_check) {
    const check = given.adjustment_check;
    box.append(el('div', { class: `set-check ${check.valid ? 'set-valid' : 'set-invalid'}` },
      el('strong', { text: `{ ${check.set.join(', ')} } ${check.valid ? 'is a valid adjustment set' : 'is not a valid adjustment set'}` }),
      check.reasons?.length ? el('ul', {}, check.reasons.map((r) => el('li', { text: r }))) : null));
  }
  box.append(el('h3', { text: 'The most precise set to adjust for' }));
  if (a.optimal_adjustment_set) box.append(setChips(app, [a.optimal_adjustment_set], 'the optimal set'));
  else box.append(el('p', { class: 'muted', text: 'none' }));
  if (a.optimal_note) box.append(el('p', { class: 'note', text: a.optimal_note }));
  if (!a.optimal_adjustment_set && a.best_minimal_set) {
    box.append(setChips(app, [a.best_minimal_set], 'the most precise minimal set'));
    box.append(el('p', { class: 'note', text: a.best_minimal_note }));
  }
  if (a.front_door_sets?.length) {
    box.append(el('h3', { text: 'Through mediators (front-door criterion)' }));
    box.append(el('ul', {}, a.front_door_sets.map((s) => el('li', { text: `{ ${s.join(', ')} }` }))));
  }
  if (a.instruments?.length) {
    box.append(el('h3', { text: 'Possible instruments' }));
    box.append(el('ul', {}, a.instruments.map((i) => el('li', { text: i.given.length ? `${i.instrument} (given ${i.given.join(', ')})` : i.instrument }))));
  }

  const arrowsSet = new Set(app.state.document.arrows.map((x) => JSON.stringify([x.from, x.to])));
  const pending = app.view.adjusted !== null && !given;
  const shown = given || a;
  const paths = shown.paths || [];
  const openNonCausal = paths.filter((p) => !p.causal && p.open);
  const blocked = paths.filter((p) => !p.causal && !p.open);
  const causal = paths.filter((p) => p.causal);
  const adjustedText = app.view.adjusted?.length ? ` given { ${app.view.adjusted.join(', ')} }` : ' (adjusting for nothing)';
  box.append(el('h3', { text: `Non-causal paths left open${adjustedText}` }));
  if (pending) box.append(el('p', { class: 'muted', text: 'Working out which paths this set blocks…' }));
  else box.append(pathList(app, openNonCausal, arrowsSet, 'No open non-causal path: nothing biases the comparison.'));
  box.append(el('h3', { text: 'Paths that carry the effect' }));
  box.append(pathList(app, causal, arrowsSet, 'No causal path: the diagram says the treatment does not affect the outcome.'));
  if (blocked.length) {
    box.append(el('details', {}, el('summary', { text: `Non-causal paths already blocked (${blocked.length})` }), pathList(app, blocked, arrowsSet, '')));
  }
  if (shown.paths_capped) box.append(el('p', { class: 'muted', text: `Showing ${paths.length} of ${shown.paths_total} paths.` }));

  box.append(el('h3', { text: 'What each variable is for this question' }));
  const roles = Object.entries(a.roles || {}).sort(([x], [y]) => x.localeCompare(y));
  box.append(el('table', { class: 'roles' }, el('tbody', {}, roles.map(([name, words]) => el('tr', {},
    el('th', { text: name }), el('td', { text: words.map((w) => ROLE_WORDS[w] || w.replaceAll('_', ' ')).join(', ') }))))));

  box.append(el('h3', { text: `What the data could contradict (${a.implications_total ?? (a.implications || []).length})` }));
  const imps = a.implications || [];
  if (!imps.length) box.append(el('p', { class: 'muted', text: 'The diagram implies no independence among measured variables.' }));
  else box.append(el('ul', { class: 'implications' }, imps.slice(0, 40).map((i) => el('li', {
    text: independenceText(i),
  }))));
  if (imps.length > 40) box.append(el('p', { class: 'muted', text: `…and ${imps.length - 40} more.` }));
  box.append(caution());
  return box;
}

function pathList(app, paths, arrowsSet, emptyText) {
  if (!paths.length) return el('p', { class: 'muted', text: emptyText });
  return el('ol', { class: 'paths' }, paths.map((p) => {
    const active = app.view.highlight && JSON.stringify(app.view.highlight.nodes) === JSON.stringify(p.nodes);
    return el('li', {},
      el('button', {
        type: 'button', class: `path${active ? ' path-active' : ''}`, 'aria-pressed': active ? 'true' : 'false',
        text: pathText(p.nodes, arrowsSet), title: p.why,
        on: { click: () => app.highlightPath(active ? null : p) },
      }),
      active && p.why ? el('p', { class: 'why', text: p.why }) : null);
  }));
}

export function caution() {
  return el('p', { class: 'caution', text:
    'A diagram records what the room assumes; the analysis is only as right as its arrows. '
    + 'Before any decision about people’s health, pay or jobs rests on it, have the assumptions and any estimate '
    + 'reviewed by someone qualified, and treat results from invented demo data as illustrations only.' });
}

function tallyLine(tally) {
  return `${tally.agree} agree · ${tally.disagree} disagree · ${tally.unsure} unsure`;
}

function voteDraftKey(target) {
  return JSON.stringify(target.proposal !== undefined ? ['proposal', target.proposal, 'reason'] : ['arrow', JSON.stringify([target.from, target.to]), 'reason']);
}

function voteBox(app, target, votes, closed) {
  const mine = votes.find((v) => v.member === app.me.id);
  const key = voteDraftKey(target);
  // A closed vote still shows a reason someone was typing, so it is not lost.
  const showReason = !closed || app.drafts.has(key);
  const reason = draftField(el('input', { type: 'text', maxlength: 200, placeholder: 'Reason (optional, one line)', class: 'vote-reason', 'aria-label': 'Reason for your vote', disabled: closed }), key, mine?.reason || '');
  reason.value = mine?.reason || '';
  const vote = (choice) => {
    const sent = reason.value;
    reason.dataset.base = sent;
    app.drafts.delete(key);
    app.send({ type: 'vote', ...target, choice, reason: sent }).catch(() => {});
  };
  const buttons = Object.entries(VOTE_LABELS).map(([choice, label]) => el('button', {
    type: 'button', class: `vote vote-${choice}${mine?.choice === choice ? ' vote-mine' : ''}`,
    'aria-pressed': mine?.choice === choice ? 'true' : 'false', disabled: closed,
    text: label, dataset: { choice },
    on: { click: () => vote(choice) },
  }));
  const list = votes.length ? el('ul', { class: 'votes' }, votes.map((v) => el('li', {},
    el('span', { class: `vote-word vote-word-${v.choice}`, text: VOTE_LABELS[v.choice] }),
    el('span', { class: 'voter', text: ` ${v.name}` }),
    v.reason ? el('span', { class: 'vote-why', text: ` — ${v.reason}` }) : null))) : null;
  return el('div', { class: 'vote-box' }, closed ? null : el('div', { class: 'vote-buttons' }, buttons),
    showReason ? reason : null, list);
}

/** Proposals, disputes and the absent-arrow check. */
export function renderDebate(app) {
  const box = el('div', { class: 'panel-body' });
  const s = app.state;
  const stage = s.session.stage;
  if (app.analysis && app.analysis.revision !== s.revision) box.append(el('p', { class: 'updating', text: 'Updating for the latest edit…' }));
  if (stage === 'drafting') box.append(el('p', { class: 'notice', text: 'Drafting: everyone draws directly. When the facilitator moves to debating, arrow changes become proposals the room votes on.' }));
  const open = s.proposals.filter((p) => p.status === 'open' || p.status === 'disputed');
  const done = s.proposals.filter((p) => !(p.status === 'open' || p.status === 'disputed'));
  box.append(el('h3', { text: `Proposals (${open.length} open or disputed)` }));
  if (!open.length) box.append(el('p', { class: 'muted', text: stage === 'debating' ? 'No open proposals. Draw an arrow, or select one to propose removing or reversing it.' : 'None.' }));
  for (const p of open) box.append(proposalCard(app, p));
  // Opened when a reason someone was typing sits in a proposal settled meanwhile.
  const typing = done.some((p) => app.drafts.has(voteDraftKey({ proposal: p.id })));
  if (done.length) box.append(el('details', { open: typing }, el('summary', { text: `Settled (${done.length})` }), done.map((p) => proposalCard(app, p))));
  box.append(renderDisputes(app));
  box.append(renderAbsent(app));
  box.append(renderHiddenCauses(app));
  return box;
}

export function proposalCard(app, p) {
  const closed = !['open', 'disputed'].includes(p.status) || LOCKED_STAGES.has(app.state.session.stage) || app.readOnly;
  const card = el('article', { class: `proposal proposal-${p.status}`, dataset: { proposal: p.id } },
    el('header', {},
      el('span', { class: 'proposal-id', text: `#${p.id}` }),
      el('strong', { text: ` ${p.summary}` }),
      el('span', { class: `status status-${p.status}`, text: p.status })),
    el('p', { class: 'byline', text: `by ${p.by_name}${p.reason ? ` — “${p.reason}”` : ''}` }),
    el('p', { class: 'tally', text: tallyLine(p.tally) }),
    voteBox(app, { proposal: p.id }, p.votes, closed));
  const actions = el('div', { class: 'row actions' });
  if (app.isFacilitator && app.state.session.stage === 'debating' && ['open', 'disputed'].includes(p.status)) {
    actions.append(
      el('button', { type: 'button', class: 'primary', text: 'Accept', on: { click: () => app.send({ type: 'settle', proposal: p.id, decision: 'accept' }) } }),
      el('button', { type: 'button', text: 'Reject', on: { click: () => app.send({ type: 'settle', proposal: p.id, decision: 'reject' }) } }));
    if (p.status === 'open') actions.append(el('button', { type: 'button', text: 'Leave disputed', on: { click: () => app.send({ type: 'settle', proposal: p.id, decision: 'dispute' }) } }));
  }
  if (p.status === 'open' && (p.by === app.me.id || app.isFacilitator)) {
    actions.append(el('button', { type: 'button', class: 'quiet', text: 'Withdraw', on: { click: () => app.send({ type: 'withdraw_proposal', proposal: p.id }) } }));
  }
  if (actions.childElementCount) card.append(actions);
  return card;
}

function optionText(option) {
  return option ? `${option[0]} → ${option[1]}` : 'no arrow';
}

const STRATEGY_WORDS = { adjustment: 'adjustment', 'front-door': 'the front-door criterion', instrument: 'an instrument' };
const braced = (set) => (set.length ? `{ ${set.join(', ')} }` : '{ } (nothing)');

/** A dispute's alternatives, arrows written in their direction, the drawn one marked. */
export function disputeTitle(options, currentIndex = 0) {
  const order = options.map((o, i) => [o, i]).sort(([a], [b]) => Number(!a) - Number(!b));
  return order.map(([o, i]) => `${optionText(o)}${i === currentIndex ? ' (as drawn)' : ''}`).join(' or ');
}

/** What settling a dispute the other way would change, spelled out against the answer now. */
export function explainEffect(base, effect) {
  if (effect.current) return 'the answer shown now';
  if (effect.cycle || effect.identifiable === null || effect.identifiable === undefined || !base) return effect.text;
  if (Boolean(base.identifiable) !== Boolean(effect.identifiable)) {
    return effect.identifiable ? 'the effect becomes identified' : 'the effect is no longer identified: no way of estimating it from this diagram remains';
  }
  if (effect.strategy && base.strategy && effect.strategy !== base.strategy) {
    return `identified by ${STRATEGY_WORDS[effect.strategy] || effect.strategy} instead of ${STRATEGY_WORDS[base.strategy] || base.strategy}`;
  }
  const now = (base.minimal_adjustment_sets || []).map((x) => JSON.stringify(x));
  const then = (effect.minimal_adjustment_sets || []).map((x) => JSON.stringify(x));
  const joins = then.filter((x) => !now.includes(x)).map((x) => braced(JSON.parse(x)));
  const leaves = now.filter((x) => !then.includes(x)).map((x) => braced(JSON.parse(x)));
  if (!joins.length && !leaves.length) return 'the same answer';
  const change = [joins.length ? `${joins.join(', ')} ${joins.length > 1 ? 'join' : 'joins'}` : null,
    leaves.length ? `${leaves.join(', ')} ${leaves.length > 1 ? 'leave' : 'leaves'}` : null].filter(Boolean).join('; ');
  let text = `the list of minimal adjustment sets changes (${change})`;
  const valid = effect.sets_still_valid;
  if (Array.isArray(valid) && now.length) {
    const kept = valid.map((x) => JSON.stringify(x));
    const broken = now.filter((x) => !kept.includes(x)).map((x) => braced(JSON.parse(x)));
    text += broken.length
      ? `. ${broken.join(', ')} would no longer be valid, so the adjustment shown now would be wrong`
      : '. Every set listed now stays valid, so adjusting as shown now would still be right: the dispute decides only which sets are the smallest choices';
  }
  return text;
}

function renderDisputes(app) {
  const box = el('section', { class: 'disputes' }, el('h3', { text: 'Which disputes matter' }));
  const d = app.analysis?.disputes;
  const items = app.state.disputed;
  if (!items.length) { box.append(el('p', { class: 'muted', text: 'No arrow is in dispute. Arrows someone votes against, open proposals and arrows the facilitator marks disputed are checked here.' })); return box; }
  if (!d) { box.append(el('p', { class: 'muted', text: app.analysis?.problem || 'Checking the disputes…' })); return box; }
  box.append(el('p', { class: 'note', text: d.note }));
  const ordered = [...d.items].sort((x, y) => Number(y.decisive) - Number(x.decisive));  // the ones that matter first
  const base = app.analysis?.analysis;
  for (const item of ordered) {
    const current = Math.max(0, item.effects.findIndex((e) => e.current));
    box.append(el('article', { class: `dispute ${item.decisive ? 'dispute-decisive' : 'dispute-idle'}` },
      el('header', {},
        el('span', { class: 'dispute-mark', 'aria-hidden': 'true', text: item.decisive ? '!' : '–' }),
        el('strong', { text: ` ${disputeTitle(item.effects.map((e) => e.option), current)}: ${item.decisive ? 'decisive' : 'does not change the answer'}` })),
      el('ul', {}, item.effects.map((e) => el('li', { text: e.current ? `${optionText(e.option)} (as drawn): the answer shown now`
        : `With ${e.option ? `${optionText(e.option)} instead` : 'no arrow'}: ${explainEffect(base, e)}` }))),
      el('p', { class: 'muted', text: item.why.join('; ') })));
  }
  box.append(el('h4', { text: 'Adjustment sets valid whatever the disputes decide' }));
  if (d.robust_sets.length) box.append(setChips(app, d.robust_sets, 'this set'));
  else box.append(el('p', { class: 'notice', text: d.robust_complete
    ? 'No adjustment set works in every combination: settle the decisive disputes first.'
    : 'No adjustment set was found that works in every combination (the search was not complete; see below). Settling the decisive disputes gives a definite answer.' }));
  if (d.robust_note) box.append(el('p', { class: 'muted', text: d.robust_note }));
  box.append(el('h4', { text: `Combinations where the effect is not identified (${d.not_identified_count} of ${d.combinations_checked})` }));
  if (!d.not_identified.length) box.append(el('p', { class: 'muted', text: 'None: the effect is identified in every combination checked.' }));
  else box.append(el('ul', { class: 'combos' }, d.not_identified.map((c) => el('li', { text: c.map(optionText).join('; ') }))));
  if (d.other_strategies_unchecked) box.append(el('p', { class: 'muted', text: `${d.other_strategies_unchecked} combination(s) without an adjustment set were not checked for other ways of identifying the effect (time limit) and are counted as not identified.` }));
  if (d.cycle_count) box.append(el('p', { class: 'notice', text: `${d.cycle_count} combination(s) would make a cycle (e.g. ${d.cycle_examples[0].join(' → ')}) and cannot all be true at once.` }));
  return box;
}

function renderAbsent(app) {
  const box = el('section', { class: 'absent' }, el('h3', { text: 'Arrows left out that would change the answer' }));
  const a = app.analysis?.absent;
  if (!a) { box.append(el('p', { class: 'muted', text: app.analysis?.problem || 'Checking…' })); return box; }
  box.append(el('p', { class: 'note', text: a.note }));
  if (!a.arrows.length) return box;
  const s = app.state;
  const marks = new Map((s.absent_marks || []).map((m) => [JSON.stringify([m.from, m.to]), m]));
  const canMark = app.isFacilitator && !LOCKED_STAGES.has(s.session.stage) && !app.readOnly;
  const disputedPairs = new Set(s.disputed.map((item) => JSON.stringify(item.pair)));
  // What is still to look at first, the arrows that would change most at the top.
  const open = a.arrows.filter((x) => !marks.has(JSON.stringify([x.from, x.to])))
    .sort((x, y) => (y.severity ?? 0) - (x.severity ?? 0));
  const considered = a.arrows.filter((x) => marks.has(JSON.stringify([x.from, x.to])));
  const keepOut = (x) => askText(`Keep ${x.from} → ${x.to} out`, { label: 'Why does the room keep it out? (optional, one line; goes in the history and the report)', confirm: 'Considered, stays out' })
    .then((reason) => { if (reason !== null) app.send({ type: 'mark_absent', from: x.from, to: x.to, reason }).catch(() => {}); });
  if (open.length) {
    box.append(el('ul', { class: 'absent-list' }, open.slice(0, 30).map((x) => el('li', {},
      el('strong', { text: `${x.from} → ${x.to}` }), el('span', { text: ` — ${x.text}` }),
      disputedPairs.has(JSON.stringify([x.from, x.to].sort())) ? el('span', { class: 'muted', text: ' (already under dispute)' }) : null,
      canMark ? el('button', { type: 'button', class: 'quiet', text: 'Considered, stays out', title: 'Record that the room looked at this arrow and keeps it out', on: { click: () => keepOut(x) } }) : null))));
    if (open.length > 30) box.append(el('p', { class: 'muted', text: `…and ${open.length - 30} more.` }));
  } else box.append(el('p', { class: 'muted', text: 'The room has considered every arrow listed and keeps each out.' }));
  if (considered.length) {
    box.append(el('details', { class: 'absent-considered' }, el('summary', { text: `Considered, stays out (${considered.length})` }),
      el('ul', { class: 'absent-list' }, considered.map((x) => {
        const m = marks.get(JSON.stringify([x.from, x.to]));
        return el('li', {},
          el('strong', { text: `${x.from} → ${x.to}` }),
          el('span', { text: ` — ${m.by_name}${m.reason ? `: “${m.reason}”` : ''}` }),
          canMark ? el('button', { type: 'button', class: 'quiet', text: 'Take back', on: { click: () => app.send({ type: 'mark_absent', from: x.from, to: x.to, considered: false }).catch(() => {}) } }) : null);
      }))));
  }
  return box;
}

/** Every variable and arrow as a button: choosing what to work on without a pointer. */
function pickList(app) {
  const s = app.state;
  const pick = (text, selection) => el('li', {}, el('button', { type: 'button', class: 'quiet pick', text,
    on: { click: () => { app.focusSelection = true; app.select(selection); } } }));
  return el('div', { class: 'pick' },
    el('h3', { text: `Variables (${s.document.variables.length})` }),
    el('ul', { class: 'pick-list' }, s.document.variables.map((v) => pick(v.name, { kind: 'variable', name: v.name }))),
    el('h3', { text: `Arrows (${s.document.arrows.length})` }),
    s.document.arrows.length
      ? el('ul', { class: 'pick-list' }, s.document.arrows.map((a) => pick(`${a.from} → ${a.to}`, { kind: 'arrow', key: JSON.stringify([a.from, a.to]) })))
      : el('p', { class: 'muted', text: 'No arrow yet.' }));
}

/** Draw (or, while debating, propose) an arrow from the selected variable, by keyboard too. */
function arrowFrom(app, v) {
  const s = app.state;
  const linked = new Set(s.document.arrows.filter((a) => a.from === v.name || a.to === v.name).map((a) => (a.from === v.name ? a.to : a.from)));
  const targets = s.document.variables.map((x) => x.name).filter((n) => n !== v.name && !linked.has(n));
  if (!targets.length) return el('p', { class: 'muted', text: `${v.name} is linked to every other variable already.` });
  const debating = s.session.stage === 'debating';
  const target = el('select', { 'aria-label': `Draw an arrow from ${v.name} to` }, targets.map((n) => el('option', { value: n, text: n })));
  const go = () => {
    const command = app.arrowCommand(v.name, target.value);
    if (command.type === 'propose') app.proposeWithReason('add', v.name, target.value);
    else app.send(command).catch(() => {});
  };
  return el('div', { class: 'row arrow-from' },
    el('label', {}, `Arrow from ${v.name} to `, target),
    el('button', { type: 'button', text: debating ? 'Propose this arrow' : 'Draw this arrow', on: { click: go } }));
}

/** Details of the selected variable, arrow or proposal. */
export function renderSelection(app) {
  const box = el('div', { class: 'panel-body' });
  const sel = app.view.selection;
  const s = app.state;
  const locked = LOCKED_STAGES.has(s.session.stage) || app.readOnly;
  if (!sel) {
    box.append(el('p', { class: 'muted', text: 'Select a variable or an arrow on the diagram to see and change it. Double-click empty space to add a variable; drag from the round handle (or Shift-drag) to draw an arrow.' }));
    box.append(pickList(app));
    return box;
  }
  if (sel.kind === 'variable') {
    const v = s.document.variables.find((x) => x.name === sel.name);
    if (!v) return box;
    const field = (node, what, base) => draftField(node, JSON.stringify(['variable', v.name, what]), base);
    const name = field(el('input', { type: 'text', maxlength: 64, value: v.name, disabled: locked, 'aria-label': 'Name' }), 'name', v.name);
    const label = field(el('input', { type: 'text', maxlength: 200, value: v.label || '', disabled: locked, 'aria-label': 'Label' }), 'label', v.label || '');
    const description = field(el('textarea', { rows: 3, maxlength: 2000, disabled: locked, 'aria-label': 'Description' }), 'description', v.description || '');
    description.value = v.description || '';
    const latent = el('input', { type: 'checkbox', disabled: locked });
    latent.checked = !!v.latent;
    const save = () => {
      // What is sent is no longer unsaved typing.
      for (const f of [name, label, description]) { f.dataset.base = f.value; app.drafts.delete(f.dataset.draft); }
      const cmd = { type: 'update_variable', name: v.name };
      if (label.value.trim() !== (v.label || '')) cmd.label = label.value.trim();
      if (description.value !== (v.description || '')) cmd.description = description.value;
      if (latent.checked !== !!v.latent) cmd.latent = latent.checked;
      if (name.value.trim() && name.value.trim() !== v.name) cmd.new_name = name.value.trim();
      if (Object.keys(cmd).length > 2) app.send(cmd).then(() => { if (cmd.new_name) app.select({ kind: 'variable', name: cmd.new_name }); }).catch(() => {});
    };
    box.append(el('h3', { class: 'selection-heading', tabindex: '-1', text: `Variable ${v.name}` }),
      el('form', { class: 'stack', on: { submit: (e) => { e.preventDefault(); save(); } } },
        el('label', {}, 'Name (used in the analysis)', name),
        el('label', {}, 'Label (shown on the diagram)', label),
        el('label', {}, 'Description', description),
        el('label', { class: 'check' }, latent, ' Unmeasured (no data will exist for it)'),
        locked ? null : el('div', { class: 'row' }, el('button', { type: 'submit', class: 'primary', text: 'Save' }),
          el('button', { type: 'button', class: 'danger', text: 'Delete variable', on: { click: () => app.send({ type: 'delete_variable', name: v.name }).then(() => app.select(null)) } }))));
    if (!locked) box.append(arrowFrom(app, v));
    if (!app.readOnly) box.append(el('p', { class: 'muted', text: 'With the variable selected and the focus outside a field, the arrow keys move it (Shift: finer steps).' }));
    const current = app.analysis?.revision === s.revision;
    const roles = current ? app.analysis?.analysis?.roles?.[v.name] : null;
    if (!current) box.append(el('p', { class: 'updating', text: 'Working out its role after the latest edit…' }));
    if (roles) box.append(el('p', { class: 'note', text: `Role for this question: ${roles.map((r) => ROLE_WORDS[r] || r).join(', ')}` }));
    if (app.isFacilitator && !locked) {
      const t = s.document.treatment.includes(v.name), o = s.document.outcome.includes(v.name);
      box.append(el('div', { class: 'row' },
        el('button', { type: 'button', text: t ? 'Unset treatment' : 'Make the treatment', on: { click: () => app.send({ type: 'set_question', treatment: t ? [] : [v.name], outcome: s.document.outcome.filter((n) => n !== v.name) }) } }),
        el('button', { type: 'button', text: o ? 'Unset outcome' : 'Make the outcome', on: { click: () => app.send({ type: 'set_question', outcome: o ? [] : [v.name], treatment: s.document.treatment.filter((n) => n !== v.name) }) } })));
    }
    return box;
  }
  if (sel.kind === 'proposal') {
    const p = s.proposals.find((x) => x.id === sel.id);
    if (p) box.append(proposalCard(app, p));
    return box;
  }
  const arrow = s.arrows.find((x) => JSON.stringify([x.from, x.to]) === sel.key);
  if (!arrow) return box;
  const debating = s.session.stage === 'debating';
  box.append(el('h3', { class: 'selection-heading', tabindex: '-1', text: `Arrow ${arrow.from} → ${arrow.to}` }));
  if (arrow.flag) box.append(el('p', { class: 'note', text: arrow.flag === 'disputed' ? 'Marked disputed by the facilitator.' : 'Marked settled by the facilitator.' }));
  box.append(el('p', { class: 'tally', text: tallyLine(arrow.tally) }));
  box.append(voteBox(app, { from: arrow.from, to: arrow.to }, arrow.votes, locked));
  if (!locked) {
    const direct = !debating || app.isFacilitator;
    const actions = el('div', { class: 'row actions' });
    if (debating) {
      actions.append(
        el('button', { type: 'button', text: 'Propose removing', on: { click: () => app.proposeWithReason('remove', arrow.from, arrow.to) } }),
        el('button', { type: 'button', text: 'Propose reversing', on: { click: () => app.proposeWithReason('reverse', arrow.from, arrow.to) } }));
    }
    if (direct) {
      actions.append(
        el('button', { type: 'button', text: 'Reverse', on: { click: () => app.send({ type: 'reverse_arrow', from: arrow.from, to: arrow.to }).then(() => app.select({ kind: 'arrow', key: JSON.stringify([arrow.to, arrow.from]) })) } }),
        el('button', { type: 'button', class: 'danger', text: 'Remove', on: { click: () => app.send({ type: 'delete_arrow', from: arrow.from, to: arrow.to }).then(() => app.select(null)) } }));
    }
    box.append(actions);
    if (app.isFacilitator) {
      box.append(el('div', { class: 'row actions' },
        el('button', { type: 'button', text: 'Mark disputed', disabled: arrow.flag === 'disputed', on: { click: () => app.send({ type: 'flag_arrow', from: arrow.from, to: arrow.to, flag: 'disputed' }) } }),
        el('button', { type: 'button', text: 'Mark settled', disabled: arrow.flag === 'settled', on: { click: () => app.send({ type: 'flag_arrow', from: arrow.from, to: arrow.to, flag: 'settled' }) } }),
        arrow.flag ? el('button', { type: 'button', class: 'quiet', text: 'Clear mark', on: { click: () => app.send({ type: 'flag_arrow', from: arrow.from, to: arrow.to, flag: null }) } }) : null));
    }
  }
  return box;
}

/** The log of every change. */
export function renderHistory(app) {
  const box = el('div', { class: 'panel-body' });
  if (app.isFacilitator) {
    box.append(el('div', { class: 'row' }, el('button', { type: 'button', text: 'Undo the last change', disabled: !app.state.can_undo || LOCKED_STAGES.has(app.state.session.stage), on: { click: () => app.send({ type: 'undo' }) } })));
  }
  const events = app.history || app.state.recent || [];
  if (!app.history) box.append(el('p', { class: 'muted', text: 'Latest changes (loading the full log)…' }));
  box.append(el('ol', { class: 'history', reversed: true }, events.slice().reverse().map((e) => el('li', { class: e.undone ? 'undone' : '' },
    el('span', { class: 'when', text: clock(e.at) }), ' ',
    el('strong', { text: e.actor_name }), ' ',
    el('span', { text: e.summary }),
    e.undone ? el('span', { class: 'undone-tag', text: ' (undone)' }) : null))));
  return box;
}

/** Members, who is online, and the analyst role. */
export function renderPeople(app) {
  const box = el('div', { class: 'panel-body' });
  const s = app.state;
  box.append(el('p', { class: 'join-hint', text: `Participants join at ${location.origin}/join/${s.session.join_code}` }));
  box.append(el('ul', { class: 'people' }, s.members.map((m) => {
    const online = app.online.has(m.id);
    return el('li', {},
      el('span', { class: `presence ${online ? 'presence-on' : 'presence-off'}`, title: online ? 'online' : 'offline', text: online ? '●' : '○' }),
      el('span', { text: ` ${m.name}` }),
      el('span', { class: 'muted', text: ` ${m.roles.join(', ')}${m.id === app.me.id ? ' (you)' : ''}` }),
      app.isFacilitator && m.role !== 'facilitator'
        ? el('button', { type: 'button', class: 'quiet', text: m.analyst ? 'Withdraw analyst role' : 'Make analyst', on: { click: () => app.send({ type: 'grant_role', member: m.id, role: 'analyst', granted: !m.analyst }) } })
        : null);
  })));
  if (app.isFacilitator) {
    box.append(el('h3', { text: 'Your facilitator link' }),
      el('p', { class: 'muted', text: 'Anyone holding this link acts as facilitator. Keep it off the projector.' }),
      el('button', { type: 'button', text: 'Copy my facilitator link', on: { click: () => app.copyFacilitatorLink() } }));
  }
  box.append(el('h3', { text: 'Export the diagram' }),
    el('div', { class: 'row' },
      el('button', { type: 'button', text: 'Arrowmoot JSON', on: { click: () => app.downloadDocument('json') } }),
      el('button', { type: 'button', text: 'GraphML', on: { click: () => app.downloadDocument('graphml') } }),
      el('button', { type: 'button', text: 'DOT', on: { click: () => app.downloadDocument('dot') } })));
  if (app.isFacilitator || app.me?.analyst) {
    box.append(el('h3', { text: 'The workshop record' }),
      el('p', { class: 'muted', text: 'The report (prints to PDF) and the full record: diagram, votes, decisions, analysis and estimates.' }),
      el('div', { class: 'row' },
        el('button', { type: 'button', text: 'Open the report', on: { click: () => app.openReport() } }),
        el('button', { type: 'button', text: 'Download the record', on: { click: () => app.downloadBundle() } })));
  }
  if (app.isFacilitator && app.state.session.stage === 'drafting') {
    const file = el('input', { type: 'file', accept: '.json,.graphml,.xml,.dot,.gv', 'aria-label': 'Diagram file' });
    box.append(el('h3', { text: 'Replace the diagram from a file' }),
      el('p', { class: 'muted', text: 'Drafting only. The current diagram is replaced (undo brings it back); open proposals are withdrawn.' }),
      el('div', { class: 'row' }, file, el('button', { type: 'button', text: 'Import', on: { click: () => app.importFile(file.files[0]) } })));
  }
  return box;
}
