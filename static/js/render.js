// Drawing the session page's frame from the state: the session bar, the stage banner,
// the tab row, the legend and the model the canvas draws. Nothing here changes state.

import { el, svg, clear } from './dom.js';
import { fetchJoinAddress } from './api.js';
import { SPEC, shapeAttributes, arrowAttributes } from './visual.js';
import { STAGE_NAMES, LOCKED_STAGES as LOCKED } from './vocabulary.js';

export { STAGE_NAMES };

export function statusText(status) {
  return { live: 'Live', connecting: 'Connecting…', reconnecting: 'Reconnecting…', offline: 'Offline' }[status] || status;
}

/** The bar above the workspace: title, stages, join code, who is here, the live badge. */
export function renderBar(app) {
  const s = app.state;
  document.title = `${s.session.title} · Arrowmoot`;
  const stage = s.session.stage;
  const stepper = el('ol', { class: 'stages', 'aria-label': 'Stages' }, s.session.stages.map((name, i) => {
    const current = name === stage;
    const item = el('li', { class: `stage${current ? ' stage-current' : ''}${s.session.stages.indexOf(stage) > i ? ' stage-done' : ''}` });
    const label = `${i + 1}. ${STAGE_NAMES[name]}`;
    if (app.isFacilitator && !current) item.append(el('button', { type: 'button', text: label, title: `Move the session to ${STAGE_NAMES[name]}${LOCKED.has(name) ? ' (locks the diagram)' : ''}`, on: { click: () => app.moveStage(name) } }));
    else item.append(el('span', { text: label, 'aria-current': current ? 'step' : null }));
    return item;
  }));
  const onlineCount = app.online.size;
  clear(app.bar).append(
    app.isFacilitator
      ? el('h1', { class: 'session-title' }, el('button', { type: 'button', class: 'title-button', text: s.session.title, title: 'Rename the session',
        on: { click: () => app.renameSession() } }))
      : el('h1', { class: 'session-title', text: s.session.title }),
    stepper,
    el('button', { type: 'button', class: 'join-code', title: 'Show the join address large, for the room',
      on: { click: () => showJoinScreen(app) } },
      el('span', { class: 'muted join-where', text: `${location.host}/join · ` }), el('span', { class: 'muted', text: 'code ' }), el('strong', { text: s.session.join_code })),
    el('div', { class: 'who' }, el('span', { text: `${app.me.name} · ${app.readOnly ? 'reader of a read-only record' : app.me.roles.join(', ')}` }),
      el('span', { class: 'muted', text: ` · ${onlineCount} online` })),
    app.statusBadge = el('span', { class: `live-status live-${app.status}`, text: statusText(app.status) }));
}

export function renderStatus(app) {
  if (!app.statusBadge) return;
  app.statusBadge.className = `live-status live-${app.status}`;
  app.statusBadge.textContent = statusText(app.status);
}

export function renderBanner(app) {
  const stage = app.state.session.stage;
  const text = app.readOnly ? READ_ONLY_WORDS : {
    debating: 'Debating: new arrows, removals and reversals become proposals for the room to vote on.',
    agreed: 'The diagram is agreed and locked. The facilitator can reopen it, with a reason for the log.',
    estimation: 'Estimation: the diagram is locked; the analyst works in the Estimation tab.',
  }[stage];
  app.banner.hidden = !text;
  app.banner.className = `stage-banner stage-banner-${app.readOnly ? 'read-only' : stage}`;
  app.banner.textContent = text || '';
}

const READ_ONLY_WORDS = 'A read-only copy of a workshop record: everything can be read, nothing can be changed '
  + 'or voted on, by anyone. To carry the work on, import the record again as a new session (Records page).';

export function renderTabs(app) {
  const open = app.state.proposals.filter((p) => p.status === 'open').length;
  const tabs = [
    ['analysis', 'Implications'], ['debate', `Debate${open ? ` (${open})` : ''}`], ['selection', 'Selection'],
    ['history', 'History'], ['people', 'People'],
  ];
  if (app.estimationMounted) tabs.push(['estimation', 'Estimation']);
  clear(app.tabs).append(...tabs.map(([id, text]) => el('button', {
    type: 'button', role: 'tab', class: `tab${app.tab === id ? ' tab-current' : ''}`, 'aria-selected': app.tab === id ? 'true' : 'false',
    text, dataset: { tab: id },
    on: { click: () => app.openTab(id) },
  })));
}

/** What the canvas draws: the document, each arrow's marks, pending proposals, the view. */
export function canvasModel(app, previousRoles) {
  const s = app.state;
  const pendingByArrow = new Map();
  for (const p of s.proposals) {
    if ((p.kind === 'remove' || p.kind === 'reverse') && ['open', 'disputed'].includes(p.status)) {
      const key = JSON.stringify([p.from, p.to]);
      if (!pendingByArrow.has(key)) pendingByArrow.set(key, []);
      pendingByArrow.get(key).push(p);
    }
  }
  const contested = new Set();
  for (const item of s.disputed) for (const opt of item.options) if (opt) contested.add(JSON.stringify(opt));
  const arrows = s.arrows.map((a) => ({ ...a, contested: contested.has(JSON.stringify([a.from, a.to])) && a.flag !== 'settled' && (a.tally.disagree > 0 || pendingByArrow.has(JSON.stringify([a.from, a.to]))) }));
  const decisive = new Set();
  const disputes = app.analysis?.disputes;
  if (disputes) for (const item of disputes.items) if (item.decisive) decisive.add(JSON.stringify(item.pair));
  return {
    document: s.document, arrows, proposals: s.proposals, pendingByArrow, decisive,
    selection: app.view.selection, highlight: app.view.highlight, adjusted: app.view.adjusted || [],
    roles: app.analysis?.revision === s.revision ? app.analysis?.analysis?.roles : previousRoles,
    locked: LOCKED.has(s.session.stage) || Boolean(app.readOnly),
  };
}

/** The key to the canvas's glyphs, drawn from the same specification as the canvas. */
export function buildLegend() {
  const v = SPEC.variables;
  const box = (flags) => svg('rect', { class: 'shape', x: 2, y: 3, width: 42, height: 18, rx: 4, ...shapeAttributes(flags, 'url(#hatch-latent)') });
  const line = (kind) => {
    const k = SPEC.arrows.kinds[kind];
    return [svg('line', { class: 'edge-line', x1: 2, y1: 12, x2: 38, y2: 12, ...arrowAttributes(kind) }),
      svg('path', { class: 'head', d: 'M35,7 L44,12 L35,17 L37,12 z', fill: k.head })];
  };
  const halo = (causal) => [svg('line', { class: 'halo', x1: 2, y1: 12, x2: 44, y2: 12, stroke: SPEC.halo.stroke, 'stroke-opacity': SPEC.halo.opacity,
    'stroke-width': 9, 'stroke-linecap': causal ? 'round' : 'butt', 'stroke-dasharray': causal ? undefined : SPEC.halo.noncausal_dash })];
  const ring = SPEC.rings.adjusted;
  const samples = {
    measured: () => [box({})],
    latent: () => [box({ latent: true })],
    treatment: () => [svg('polygon', { class: 'shape', points: '8,3 38,3 44,12 38,21 8,21 2,12', ...shapeAttributes({ treatment: true }) })],
    outcome: () => [box({ outcome: true }), svg('rect', { class: 'shape-inner', x: 5, y: 6, width: 36, height: 12, rx: 2, fill: 'none',
      stroke: v.outcome.stroke, 'stroke-width': v.outcome.inner_stroke_width })],
    adjusted: () => [svg('rect', { class: 'adjust-ring', x: 1, y: 1, width: 44, height: 22, rx: 7, fill: 'none', stroke: ring.stroke,
      'stroke-width': ring.stroke_width, 'stroke-dasharray': ring.dash, 'stroke-linecap': ring.linecap }),
    svg('rect', { class: 'shape', x: 6, y: 5, width: 34, height: 14, rx: 3, ...shapeAttributes({}) })],
    drawn: () => line('drawn'), disputed: () => line('disputed'), proposed: () => line('proposed'),
    causal: () => halo(true), noncausal: () => halo(false),
  };
  const sample = (kind, text) => el('li', {},
    svg('svg', { width: 46, height: 24, 'aria-hidden': 'true', class: `legend-sample legend-${kind}` }, samples[kind]()),
    el('span', { text }));
  // Folded on small screens unless someone opened it; the choice is remembered.
  const remembered = localStorage.getItem('arrowmoot:legend');
  const open = remembered ? remembered === 'open' : window.innerHeight >= 850 && window.innerWidth >= 1200;
  const legend = el('details', { class: 'legend', 'aria-label': 'Legend', open },
    el('summary', { text: 'Legend' }),
    el('ul', {},
      sample('measured', 'measured variable'),
      sample('latent', 'unmeasured (dashed, hatched)'),
      sample('treatment', 'treatment (pointed ends)'),
      sample('outcome', 'outcome (double border)'),
      sample('adjusted', 'in the set shown (dotted ring)'),
      sample('drawn', 'arrow'),
      sample('disputed', 'disputed arrow (long dashes, ?)'),
      sample('proposed', 'proposed arrow (short dashes)'),
      sample('causal', 'causal path shown (solid band)'),
      sample('noncausal', 'non-causal path shown (broken band)')));
  legend.addEventListener('toggle', () => localStorage.setItem('arrowmoot:legend', legend.open ? 'open' : 'closed'));
  return legend;
}

export function showJoinScreen(app) {
  const code = app.state.session.join_code;
  const where = el('div', { class: 'join-address' }, el('p', { class: 'muted', text: 'Finding the address the room can reach…' }));
  const dialog = el('dialog', { class: 'join-screen', 'aria-label': 'How to join this session' },
    where,
    el('p', { text: 'with the code' }),
    el('p', { class: 'join-big', text: code }),
    el('button', { type: 'button', class: 'primary', text: 'Close', on: { click: () => { dialog.close(); dialog.remove(); } } }));
  document.body.append(dialog);
  dialog.showModal();
  fetchJoinAddress(app.sessionId, app.token).then((data) => {
    const parts = [];
    if (data.url) {
      parts.push(el('p', { text: 'Join this session at' }), el('p', { class: 'join-url', text: data.url }));
      if (data.qr) parts.push(el('img', { class: 'join-qr', src: data.qr, width: 220, height: 220, alt: `QR code of ${data.url}` }));
    } else {
      parts.push(el('p', { class: 'notice join-advice', text: data.advice }),
        el('p', { class: 'muted', text: `On this computer only: ${location.origin}${data.path}` }));
    }
    clear(where).append(...parts);
  }).catch((err) => {
    clear(where).append(el('p', { text: 'Join this session at' }), el('p', { class: 'join-url', text: `${location.origin}/join` }),
      el('p', { class: 'muted', text: err.message }));
  });
}
