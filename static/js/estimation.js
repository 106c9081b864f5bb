// The estimation stage panel: attach data, map measures, estimate, test the diagram
// against the data (with a verdict), sensitivity, and the disputed-arrow forest plot.
// Mounted by the session page through mountEstimation(element, context).

import { el, clear, independenceText } from './dom.js';
import {
  fetchEstimation, uploadEstimationData, saveEstimationMapping, runEstimation, readValidationRun, stopValidation,
  postCommand,
} from './api.js';
import { vocabulary } from './vocabulary.js';
import { confirmStep } from './dialogs.js';

// The stages data may be attached in (the server's rule table).
const DATA_STAGES = new Set(vocabulary.permissions?.attach_data?.stages || []);

/** Format a number for people: 3 significant digits, no exponent for ordinary sizes. */
function fmt(value, digits = 3) {
  if (value === null || value === undefined || Number.isNaN(value)) return '–';
  if (typeof value !== 'number') return String(value);
  if (value !== 0 && (Math.abs(value) < 0.001 || Math.abs(value) >= 1e6)) return value.toExponential(2);
  return Number(value.toPrecision(digits)).toString();
}

function pct(value) { return value === null || value === undefined ? '–' : `${(100 * value).toFixed(1)}%`; }

/** Put a server-built SVG string into the page (parsed as XML, never as HTML). */
function chart(svgText, label) {
  const box = el('figure', { class: 'am-figure' });
  if (!svgText) return box;
  const parsed = new DOMParser().parseFromString(svgText, 'image/svg+xml');
  const root = parsed.documentElement;
  if (root.nodeName !== 'svg') return box;
  box.append(document.importNode(root, true));
  if (label) box.append(el('figcaption', { class: 'note', text: label }));
  return box;
}

/** How the estimate will read a column, from its profile, in a few words. */
function columnKind(p) {
  if (!p) return '';
  if (p.kind === 'number') return 'number';
  if (p.kind === 'binary') return p.examples?.length ? `two categories (${p.examples.join(' / ')})` : 'two values (0/1)';
  if (p.kind === 'empty') return 'empty';
  if (p.text_cells) return `numbers, with text in ${p.text_cells} row${p.text_cells === 1 ? '' : 's'}`;
  return `text: ${p.level_count ?? p.distinct} categories`;
}

/** How the estimate coded each text or two-valued column, in words (null when all were numbers). */
function codingText(columns) {
  const lines = Object.values(columns || {}).map((c) => {
    if (c.kind === 'categorical') return `${c.variable} (column ${c.column}): ${c.levels.length} categories (${c.levels.join(', ')}); reference level ${c.reference_level}, one indicator for each other level`;
    if (c.kind === 'binary' && c.level_coded_1 && c.level_coded_1 !== '1') return `${c.variable} (column ${c.column}): ${c.level_coded_1} coded 1, ${c.reference_level} coded 0 (reference level)`;
    return null;
  }).filter(Boolean);
  return lines.length ? lines : null;
}

function table(headers, rows, cls = '') {
  return el('table', { class: `am-table ${cls}` },
    el('thead', {}, el('tr', {}, ...headers.map((h) => el('th', { text: h })))),
    el('tbody', {}, ...rows));
}

class EstimationPanel {
  constructor(root, context) {
    this.root = root;
    this.context = context;
    this.data = null;
    this.variables = [];
    this.results = { estimate: null, validation: null, sensitivity: null, disputes: null };
    this.checking = null; // the latest run of the checks against the data: progress and state
    this.busy = null;
    this.message = null;
    this.flagged = null;
    this.choice = { method: 'auto', correction: 'holm', adjust: null };
    this.pendingFile = null;
    this.draftMapping = {};
    this.version = 0;
    this.loaded = false;
  }

  get canEdit() {
    const id = this.context.member?.id;
    const me = this.context.state?.()?.members?.find((m) => m.id === id) || this.context.member;
    return me?.role === 'facilitator' || !!me?.analyst;
  }

  get stage() { return this.context.state?.()?.session?.stage; }

  /** Data is attached, mapped and estimated only once the diagram is agreed (locked). */
  get isOpenForData() { return DATA_STAGES.has(this.stage); }

  /** What the stage means for the data, said from what is attached now. */
  stageNote() {
    if (this.isOpenForData || !this.loaded) return null;
    const next = 'The facilitator moves the session to “Agreed” or “Estimation” first.';
    if (!this.data) return `Data is attached once the room has agreed the diagram. ${next}`;
    const mapped = Object.keys(this.data.mapping || {}).length;
    const what = mapped ? `attached, with ${mapped} variable${mapped === 1 ? '' : 's'} mapped to its columns` : 'attached but not yet mapped';
    return `${this.data.name} is ${what}; it is used once the room has agreed the diagram. ${next}`;
  }

  /** Fetch the shared state; with quiet, render only if something changed. */
  async load({ quiet = false } = {}) {
    const version = this.version;
    try {
      const data = await fetchEstimation(this.context.sessionId, this.context.token);
      if (version !== this.version) return; // an action answered meanwhile; its result is newer
      const signature = (value) => JSON.stringify(value, (key, v) => (key === 'stale' ? undefined : v));
      const before = signature([this.data, this.variables, this.results]);
      const results = {};
      for (const key of Object.keys(this.results)) results[key] = data[key];
      const changed = signature([data.data, data.variables, results]) !== before
        || Object.values(results).some((r) => r?.stale);
      this.data = data.data;
      this.variables = data.variables;
      this.uploadLimit = data.upload_limit_bytes;
      this.results = results;
      this.loaded = true;
      if (data.validation_run?.state === 'running' && !this.polling) this.followValidation(data.validation_run);
      if (quiet && !changed) return;
    } catch (err) {
      if (quiet) return;
      this.message = { kind: 'error', text: err.message };
    }
    this.render();
  }

  async act(name, work) {
    this.version += 1;
    this.busy = name;
    this.message = null;
    this.render();
    try {
      await work();
    } catch (err) {
      this.message = { kind: 'error', text: err.message || String(err) };
    }
    this.busy = null;
    this.render();
    this.onIdle?.();
  }

  /** Attach a file: refused at once when over the server's limit; confirmed first when results would be discarded. */
  async upload(file) {
    const held = Object.entries(this.results).filter(([, r]) => r).map(([k]) => k);
    if (held.length) {
      const ok = await confirmStep('Attach a new data file?', {
        text: [`Attaching ${file.name} discards the results computed on ${this.data?.name || 'the current file'}:`],
        items: held, after: 'They can be computed again on the new file.', confirm: 'Attach and discard them' });
      if (!ok) return;
    }
    return this.act('upload', async () => {
      let body;
      try {
        body = await uploadEstimationData(this.context.sessionId, this.context.token, file);
      } catch (err) {
        this.pendingFile = null; // a refused file is not offered again
        throw err;
      }
      this.data = body.data;
      this.pendingFile = null;
      this.draftMapping = {};
      for (const key of Object.keys(this.results)) this.results[key] = null;
      this.message = { kind: 'ok', text: `Attached ${file.name}: ${body.data.rows} rows, ${body.data.columns.length} columns.` };
    });
  }

  /** A file picked: refused here, before sending, when it is over the size limit. */
  choose(file) {
    const limit = this.uploadLimit;
    this.pendingFile = file;
    if (file && limit && file.size > limit) {
      this.pendingFile = null;
      this.message = { kind: 'error', text: `${file.name} is ${(file.size / 1048576).toFixed(1)} MB; the limit is ${(limit / 1048576).toFixed(1)} MB. Nothing was sent.` };
    } else {
      this.message = null;
    }
    this.render();
  }

  saveMapping(textAsMissing) {
    const mapping = {};
    for (const select of this.root.querySelectorAll('select[data-variable]')) {
      if (select.value) mapping[select.dataset.variable] = select.value;
    }
    return this.act('mapping', async () => {
      const body = await saveEstimationMapping(this.context.sessionId, this.context.token, mapping, textAsMissing);
      this.data = body.data;
      this.draftMapping = {};
      const n = body.data.warnings?.filter((w) => w.severity === 'warning').length || 0;
      const what = textAsMissing ? 'Text cells now count as missing; mapping saved' : 'Mapping saved';
      this.message = n ? { kind: 'error', text: `${what}, with ${n} warning${n === 1 ? '' : 's'}: see beside the mapping.` }
        : { kind: 'ok', text: `${what}.` };
    });
  }

  /** Count the text cells of these mostly-numeric columns as missing (and save the mapping shown). */
  blankText(column) {
    return this.saveMapping([...new Set([...(this.data.text_as_missing || []), column])]);
  }

  options() {
    const method = this.choice.method;
    return { method: method === 'auto' ? null : method, correction: this.choice.correction, adjust: this.choice.adjust };
  }

  run(kind) {
    const opts = this.options();
    return this.act(kind, async () => {
      const body = kind === 'estimate' ? opts : { method: opts.method, adjust: opts.adjust };
      try {
        const out = await runEstimation(this.context.sessionId, this.context.token, kind, body);
        this.results[kind] = out.result;
        if (kind === 'estimate') this.results.validation = null;
      } catch (err) {
        if (kind === 'estimate' && opts.method) {
          const shown = this.results.estimate;
          this.choice.method = shown ? shown.method : 'auto';
          const tail = shown ? ` The result shown is still the earlier one, by ${shown.method_label}.` : '';
          throw new Error(`${err.message || err} (${opts.method} refused).${tail}`);
        }
        throw err;
      }
    }).then(() => { if (kind === 'estimate' && this.results.estimate && !this.message) this.startValidation(); });
  }

  /** Start the checks against the data in the background; the page stays usable meanwhile. */
  async startValidation() {
    const opts = this.options();
    try {
      const out = await runEstimation(this.context.sessionId, this.context.token, 'validation',
        { method: opts.method, adjust: opts.adjust, correction: opts.correction });
      this.followValidation(out.run);
    } catch (err) {
      this.message = { kind: 'error', text: err.message || String(err) };
      this.render();
    }
  }

  /** Poll the run's progress until it ends, then load the stored result. */
  async followValidation(run) {
    this.checking = run;
    this.polling = true;
    this.render();
    while (this.checking?.state === 'running') {
      await new Promise((resolve) => { setTimeout(resolve, 400); });
      try {
        this.checking = (await readValidationRun(this.context.sessionId, this.context.token)).run;
      } catch (err) {
        this.checking = { state: 'failed', message: err.message || String(err) };
      }
      this.renderProgress();
    }
    this.polling = false;
    if (this.checking?.state === 'finished') await this.load();
    else this.render();
  }

  get isFacilitator() {
    const id = this.context.member?.id;
    const me = this.context.state?.()?.members?.find((m) => m.id === id) || this.context.member;
    return me?.role === 'facilitator';
  }

  /**
   * Send one change the data point to back to the debate as a proposal, its evidence as the
   * reason; a locked diagram is reopened first, with that evidence as the recorded reason.
   */
  sendRepair(repair) {
    return this.act('repair', async () => {
      const send = (command) => postCommand(this.context.sessionId, this.context.token, command);
      if (this.stage !== 'debating') {
        await send({ type: 'set_stage', stage: 'debating', reason: `Reopened to weigh a check against the data. ${repair.evidence}` });
      }
      await send({ type: 'propose', kind: repair.kind, from: repair.from, to: repair.to, reason: repair.evidence });
      this.sent = new Set([...(this.sent || []), `${repair.kind}:${repair.from}:${repair.to}`]);
      this.message = { kind: 'ok', text: `Proposed in the debate: ${repair.kind === 'reverse' ? `reverse ${repair.from} → ${repair.to}` : `add ${repair.from} → ${repair.to}`}, with the evidence as its reason.` };
    });
  }

  repairList(item) {
    if (!item.repairs?.length) return null;
    const rows = item.repairs.slice(0, 12).map((r) => {
      const key = `${r.kind}:${r.from}:${r.to}`;
      const done = this.sent?.has(key);
      return el('li', { title: r.evidence },
        el('span', { text: `${r.kind === 'reverse' ? 'reverse' : 'add'} ${r.from} → ${r.to} ` }),
        this.isFacilitator ? el('button', {
          type: 'button', class: 'quiet', text: done ? 'proposed' : 'Propose in the debate', disabled: done || !!this.busy,
          dataset: { action: 'propose-repair', repair: key }, on: { click: () => this.sendRepair(r) } }) : null);
    });
    return el('div', { class: 'am-repairs' },
      el('p', { class: 'note', text: 'One arrow each that would reconcile the diagram with this result (the facilitator can send one back to the debate, with the evidence as its reason):' }),
      el('ul', {}, ...rows));
  }

  async stopChecks() {
    try {
      this.checking = (await stopValidation(this.context.sessionId, this.context.token)).run;
    } catch (err) {
      this.message = { kind: 'error', text: err.message || String(err) };
    }
    this.render();
  }

  /** Show a failing implication on the diagram: the two variables and the conditioning set. */
  flag(test) {
    const same = this.flagged && this.flagged.x === test.x && this.flagged.y === test.y;
    this.flagged = same ? null : test;
    const detail = same ? null : { nodes: [test.x, test.y], given: test.given, causal: false, kind: 'implication' };
    if (typeof this.context.highlight === 'function') this.context.highlight(detail);
    window.dispatchEvent(new CustomEvent('arrowmoot:highlight', { detail }));
    this.markCanvas();
    this.render();
  }

  /** Mark the flagged variables on the diagram (nodes carry data-name); kept across canvas redraws. */
  markCanvas() {
    const pair = new Set(this.flagged ? [this.flagged.x, this.flagged.y] : []);
    const given = new Set(this.flagged ? this.flagged.given : []);
    for (const node of document.querySelectorAll('.canvas .node[data-name]')) {
      const name = node.dataset.name;
      node.classList.toggle('am-flag-pair', pair.has(name));
      node.classList.toggle('am-flag-given', given.has(name));
    }
    const canvas = document.querySelector('.canvas');
    if (canvas && !this.canvasObserver) {
      this.canvasObserver = new MutationObserver(() => { if (this.flagged) this.markCanvas(); });
      this.canvasObserver.observe(canvas, { childList: true, subtree: true });
    }
  }

  // -- rendering --------------------------------------------------------------------
  render() {
    const parts = [el('h3', { text: 'Estimation' })];
    const stageNote = this.stageNote();
    if (stageNote) parts.push(el('p', { class: 'note', dataset: { note: 'stage' }, text: stageNote }));
    if (!this.canEdit) parts.push(el('p', { class: 'note', text: 'You can read the results here; the facilitator or an analyst attaches data and runs the estimates.' }));
    if (this.message) parts.push(el('p', { class: `am-message am-${this.message.kind}`, role: this.message.kind === 'error' ? 'alert' : 'status', text: this.message.text }));
    parts.push(this.renderData(), this.renderMapping(), this.renderEstimate(), this.renderChecks(),
      this.renderValidation(), this.renderSensitivity(), this.renderDisputes());
    clear(this.root).append(...parts.filter(Boolean));
  }

  button(text, name, onClick, primary = false) {
    return el('button', {
      type: 'button', class: primary ? 'primary' : '', text: this.busy === name ? 'Working…' : text,
      disabled: !this.canEdit || !this.isOpenForData || !!this.busy, dataset: { action: name }, on: { click: onClick },
      title: this.isOpenForData ? null : 'Opens once the room has agreed the diagram',
    });
  }

  renderData() {
    const box = el('section', { class: 'am-section', 'aria-label': 'Data' }, el('h4', { text: '1. Data' }));
    if (this.canEdit) {
      const input = el('input', {
        type: 'file', accept: '.csv,.parquet,text/csv', name: 'data-file', 'aria-label': 'Data file (CSV or Parquet)',
        disabled: !this.isOpenForData,
        on: { change: (e) => this.choose(e.target.files?.[0] || null) },
      });
      const attach = this.button('Attach', 'upload', () => { if (this.pendingFile) this.upload(this.pendingFile); }, true);
      if (!this.pendingFile) attach.disabled = true;
      box.append(el('div', { class: 'row' }, input, attach));
      if (this.pendingFile) box.append(el('p', { class: 'note', text: `Chosen: ${this.pendingFile.name} (${(this.pendingFile.size / 1048576).toFixed(1)} MB)` }));
    }
    if (!this.data) {
      box.append(el('p', { class: 'note', text: 'No data attached yet.' }));
      return box;
    }
    if (this.data.sample_data) box.append(el('p', { class: 'am-sample', role: 'note', text: 'Demo data: this file is the invented sample shipped with Arrowmoot (recognised by its fingerprint). Its numbers illustrate the method and describe no real people.' }));
    box.append(el('p', { class: 'note', text: `${this.data.name}: ${this.data.rows.toLocaleString()} rows, ${this.data.columns.length} columns.` }));
    const rows = this.data.profile.map((p) => el('tr', {},
      el('th', { text: p.name }), el('td', { text: p.kind }), el('td', { text: pct(p.missing_share) }),
      el('td', { text: String(p.distinct) }),
      el('td', { text: p.min !== null ? `${fmt(p.min)} – ${fmt(p.max)}` : p.examples.join(', ') })));
    box.append(el('details', {}, el('summary', { text: 'Column profile' }),
      table(['column', 'kind', 'missing', 'distinct', 'range / values'], rows, 'am-profile')));
    return box;
  }

  renderMapping() {
    if (!this.data) return null;
    const mapping = this.data.mapping || {};
    const box = el('section', { class: 'am-section', 'aria-label': 'Measures' }, el('h4', { text: '2. Which column measures which variable' }));
    const profile = Object.fromEntries((this.data.profile || []).map((p) => [p.name, p]));
    const warnings = Object.fromEntries((this.data.warnings || []).map((w) => [w.variable, w]));
    const rows = this.variables.map((v) => {
      const kindCell = el('td', { class: 'am-kind', dataset: { kindOf: v.name } });
      const showKind = (column) => { kindCell.textContent = column ? columnKind(profile[column]) : ''; };
      // an unsaved choice survives a redraw (another member's update arriving meanwhile)
      const current = v.name in this.draftMapping ? this.draftMapping[v.name] : mapping[v.name];
      const select = el('select', { dataset: { variable: v.name }, disabled: !this.canEdit || !this.isOpenForData, 'aria-label': `Column for ${v.name}`,
        on: { change: (e) => { this.draftMapping[v.name] = e.target.value; showKind(e.target.value); } } },
        el('option', { value: '', text: '— not measured —' }),
        ...this.data.columns.map((c) => el('option', { value: c, text: c, selected: current === c })));
      showKind(current);
      const tag = v.role ? ` (${v.role})` : v.latent ? ' (unmeasured in the diagram)' : '';
      const row = [el('tr', { class: warnings[v.name]?.severity === 'warning' ? 'am-warn' : '' }, el('th', { text: v.name + tag }), el('td', {}, select), kindCell)];
      const w = warnings[v.name];
      if (w) {
        row.push(el('tr', { class: 'am-warn-row' }, el('td', { colspan: '3' },
          w.severity === 'warning' ? el('p', { class: 'notice', role: 'alert', dataset: { warning: v.name }, text: `Check this: ${w.text}.` })
            : el('p', { class: 'note', dataset: { coding: v.name }, text: `Read as categories: ${w.text}.` }),
          w.text_cells && this.canEdit ? el('button', { type: 'button', dataset: { action: 'text-as-missing', column: w.column }, disabled: !!this.busy || !this.isOpenForData,
            text: `Treat the ${w.text_cells} text cell${w.text_cells === 1 ? '' : 's'} of ${w.column} as missing`, on: { click: () => this.blankText(w.column) } }) : null)));
      }
      return row;
    }).flat();
    box.append(table(['variable', 'column', 'read as'], rows, 'am-mapping'));
    const blanked = this.data.text_as_missing || [];
    if (blanked.length) box.append(el('p', { class: 'note', dataset: { note: 'text-as-missing' }, text: `Text cells count as missing in: ${blanked.join(', ')} (those rows are left out of what uses the column).` }));
    if (this.canEdit) box.append(el('div', { class: 'row end' }, this.button('Save mapping', 'mapping', () => this.saveMapping())));
    return box;
  }

  /** A note when a result was computed on another version of the diagram or another data file. */
  staleNote(result) {
    if (!result?.stale) return null;
    return el('p', { class: 'notice', text: 'Computed on another version of the diagram or another data file; run it again.' });
  }

  renderEstimate() {
    if (!this.data) return null;
    const box = el('section', { class: 'am-section', 'aria-label': 'Estimate' }, el('h4', { text: '3. Estimate' }));
    const menu = vocabulary.methods || [];
    const fits = Object.fromEntries((this.data.methods || []).map((m) => [m.name, m]));
    const applies = menu.filter((m) => fits[m.name]?.applies !== false);
    const refused = menu.filter((m) => fits[m.name]?.applies === false).map((m) => ({ ...m, why: fits[m.name].why }));
    if (!applies.some((m) => m.name === this.choice.method)) this.choice.method = 'auto';
    const method = el('select', { name: 'method', 'aria-label': 'Method', on: { change: (e) => { this.choice.method = e.target.value; this.render(); } } },
      ...applies.map((m) => el('option', { value: m.name, text: m.label, selected: this.choice.method === m.name })));
    const correction = el('select', { name: 'correction', 'aria-label': 'Multiple-testing correction', on: { change: (e) => { this.choice.correction = e.target.value; } } },
      el('option', { value: 'holm', text: 'Holm', selected: this.choice.correction === 'holm' }),
      el('option', { value: 'bh', text: 'Benjamini–Hochberg', selected: this.choice.correction === 'bh' }));
    const last = this.results.estimate;
    box.append(el('div', { class: 'row' }, el('label', {}, 'Method', method), el('label', {}, 'Correction', correction)),
      el('div', { class: 'row end' }, this.button('Estimate', 'estimate', () => this.run('estimate'), true)));
    if (refused.length) {
      box.append(el('details', { class: 'am-not-offered', dataset: { notOffered: refused.length } },
        el('summary', { text: `${refused.length} method${refused.length === 1 ? '' : 's'} not offered for this diagram and these columns` }),
        el('ul', {}, ...refused.map((m) => el('li', { dataset: { method: m.name } }, el('strong', { text: m.label }), `: ${m.why}.`)))));
    }
    if (!last) return box;
    const r = last;
    if (this.choice.method !== 'auto' && this.choice.method !== r.method) {
      const wanted = menu.find((m) => m.name === this.choice.method)?.label || this.choice.method;
      box.append(el('p', { class: 'notice', dataset: { note: 'method-differs' }, text: `The result below is by ${r.method_label}, not by the method now chosen (${wanted}); press Estimate to compute that one.` }));
    }
    const card = el('div', { class: 'am-result', dataset: { result: 'estimate' } }, this.staleNote(r),
      el('p', { class: 'am-headline' },
        el('strong', { text: fmt(r.estimate) }),
        ` [${fmt(r.ci[0])}, ${fmt(r.ci[1])}]`,
        el('span', { class: 'note', text: ' 95% interval' })),
      this.verdictLine(),
      el('div', { class: 'am-caution' }, el('strong', { text: 'Caution. ' }), ...r.cautions.map((c) => el('span', { text: c + ' ' }))),
      el('p', { class: 'summary', text: r.explanation }));
    const facts = [
      ['method', r.method_label], ['strategy', r.strategy],
      r.adjustment_set ? ['adjusted for', r.adjustment_set.length ? r.adjustment_set.join(', ') : 'nothing (none needed)'] : null,
      r.instrument ? ['instrument', r.instrument + (r.given?.length ? ` given ${r.given.join(', ')}` : '')] : null,
      r.mediators ? ['mediators', r.mediators.join(', ')] : null,
      ['standard error', fmt(r.std_error)], ['rows used', `${r.n_used} (${r.n_dropped} dropped)`],
      r.unmeasured?.length ? ['unmeasured', r.unmeasured.join(', ')] : null,
      r.details?.risk_ratio !== undefined ? ['risk ratio', `${fmt(r.details.risk_ratio)} [${fmt(r.details.risk_ratio_ci?.[0])}, ${fmt(r.details.risk_ratio_ci?.[1])}]`] : null,
      r.details?.odds_ratio !== undefined ? ['odds ratio', `${fmt(r.details.odds_ratio)} [${fmt(r.details.odds_ratio_ci?.[0])}, ${fmt(r.details.odds_ratio_ci?.[1])}]`] : null,
      r.details?.first_stage_f !== undefined ? ['first-stage F', fmt(r.details.first_stage_f)] : null,
    ].filter(Boolean);
    card.append(el('dl', { class: 'am-facts' }, ...facts.flatMap(([k, v]) => [el('dt', { text: k }), el('dd', { text: String(v) })])));
    const coding = codingText(r.columns);
    if (coding) card.append(el('div', { class: 'am-coding', dataset: { result: 'coding' } }, el('p', { class: 'note', text: 'How text columns were coded:' }), el('ul', {}, ...coding.map((c) => el('li', { text: c })))));
    const sets = (r.strategy === 'adjustment' && r.other_valid_sets) || [];
    if (sets.length > 1 || this.choice.adjust) {
      const same = (a, b) => JSON.stringify([...a].sort()) === JSON.stringify([...b].sort());
      card.append(el('p', { class: 'note', text: 'Other adjustment sets the diagram accepts (click to estimate with one):' }),
        el('div', { class: 'chips' },
          ...sets.map((set) => el('button', {
            type: 'button', class: `chip${same(set, r.adjustment_set) ? ' chip-active' : ''}`, disabled: !this.canEdit || !!this.busy,
            text: `{${set.join(', ') || 'nothing'}}`,
            on: { click: () => { this.choice.adjust = set; this.run('estimate'); } },
          })),
          this.choice.adjust ? el('button', { type: 'button', class: 'quiet', text: 'back to the default set', disabled: !!this.busy,
            on: { click: () => { this.choice.adjust = null; this.run('estimate'); } } }) : null));
    }
    if (r.fixes?.length) card.append(el('p', { class: 'notice', text: `Adjustment is not possible with what is measured. Measuring ${r.fixes.map((g) => `{${g.join(', ')}}`).join(' or ')} would allow it.` }));
    for (const w of r.warnings || []) card.append(el('p', { class: 'notice', role: 'alert', text: w }));
    card.append(el('details', {}, el('summary', { text: 'What must be true for this to be a causal effect' }),
      el('ul', {}, ...r.assumptions.map((a) => el('li', { text: a })))));
    if (r.charts?.overlap) {
      card.append(chart(r.charts.overlap, 'Overlap: where both arms have people with similar chances of treatment.'));
      const o = r.details.overlap;
      card.append(el('p', { class: 'note', text: `Largest weight ${fmt(o.largest_weight)} (${pct(o.largest_weight_share)} of the total); effective sizes ${fmt(o.effective_n_treated)} treated, ${fmt(o.effective_n_untreated)} untreated; ${o.near_zero_or_one} scores below 0.01 or above 0.99.` }));
      const rows = r.details.balance.map((b) => el('tr', { class: b.balanced_after ? '' : 'am-fail' },
        el('th', { text: b.column }), el('td', { text: fmt(b.smd_before, 2) }), el('td', { text: fmt(b.smd_after, 2) })));
      card.append(el('details', {}, el('summary', { text: 'Balance before and after weighting (standardized mean differences; below 0.1 is the usual target)' }),
        table(['column', 'before', 'after'], rows)));
    }
    box.append(card);
    return box;
  }

  renderChecks() {
    const checks = this.results.estimate?.checks;
    if (!checks) return null;
    const box = el('section', { class: 'am-section', 'aria-label': 'Diagram against the data' },
      el('h4', { text: '4. Does the data contradict the diagram?' }),
      el('p', { class: `summary ${checks.failing ? 'am-bad' : ''}`, text: checks.summary }));
    const rows = checks.tests.map((t) => {
      const claim = independenceText(t);
      const active = this.flagged && this.flagged.x === t.x && this.flagged.y === t.y;
      const verdict = t.verdict === 'fails'
        ? el('button', { type: 'button', class: `am-flag${active ? ' chip-active' : ''}`, text: active ? 'shown' : 'fails: show', title: 'Show these variables on the diagram', on: { click: () => this.flag(t) } })
        : el('span', { text: t.verdict });
      return el('tr', { class: t.verdict === 'fails' ? 'am-fail' : '', title: t.test || t.reason || '' },
        el('td', { class: 'am-claim', text: claim }), el('td', { text: String(t.n) }),
        el('td', { text: t.statistic === null ? '–' : fmt(t.statistic) }), el('td', { text: fmt(t.p_adjusted) }), el('td', {}, verdict));
    });
    box.append(table(['independence claimed', 'n', 'statistic', 'adjusted p', 'verdict'], rows, 'am-checks'));
    if (this.flagged) {
      box.append(el('p', { class: 'note', text: `On the diagram: ${this.flagged.x} and ${this.flagged.y} (solid red outline) should be independent${this.flagged.given.length ? ` given ${this.flagged.given.join(', ')} (dashed red outline)` : ''}, but the data say otherwise. An arrow or a common cause between them may be missing.` }));
    }
    const untested = {};
    for (const t of checks.tests) if (t.verdict === 'not tested' && t.reason) untested[t.reason] = (untested[t.reason] || 0) + 1;
    for (const [reason, count] of Object.entries(untested)) {
      box.append(el('p', { class: 'notice', dataset: { untested: reason } }, `${count} of ${checks.tests.length} implications not tested: ${reason}.`,
        reason.includes('text') && this.data?.warnings?.some((w) => w.text_cells) ? ' A numeric column holds text cells: see the mapping above, where they can be treated as missing.' : ''));
    }
    if (checks.total > checks.listed) box.append(el('p', { class: 'note', text: `${checks.listed} of ${checks.total} implications listed.` }));
    return box;
  }

  /** The verdict of the checks against the data, for the line under the headline number. */
  verdictLine() {
    const v = this.results.validation;
    if (this.checking?.state === 'running') return el('p', { class: 'am-verdict am-verdict-running', text: 'Checking the diagram against the data…' });
    if (!v) return el('p', { class: 'am-verdict', text: 'Checks against the data: not run yet. Until they run, the number rests on the diagram alone.' });
    return el('p', { class: `am-verdict am-verdict-${v.verdict.replaceAll(' ', '-')}`, dataset: { verdict: v.verdict }, role: 'status' },
      el('strong', { text: `Checks against the data: ${v.verdict}` }),
      ` (${v.contradicted} of ${v.run} contradict the diagram). ${v.reading}`);
  }

  /** Progress of a running check, with a stop button; updated in place while polling. */
  progressBox() {
    const run = this.checking;
    if (!run || run.state !== 'running') {
      if (run && ['stopped', 'failed'].includes(run.state)) return el('p', { class: run.state === 'failed' ? 'notice' : 'note', dataset: { progress: 'ended' }, text: `The checks ${run.state === 'failed' ? 'failed' : 'were stopped'}: ${run.message || ''}` });
      return null;
    }
    const share = Math.round(100 * (run.share || 0));
    return el('div', { class: 'am-progress', dataset: { progress: 'running' } },
      el('progress', { max: '100', value: String(share), 'aria-label': 'Progress of the checks' }),
      el('span', { class: 'note', text: ` ${share}% — ${run.step || ''}` }),
      el('button', { type: 'button', text: 'Stop', disabled: !this.canEdit, dataset: { action: 'stop-checks' }, on: { click: () => this.stopChecks() } }));
  }

  renderProgress() {
    const slot = this.root.querySelector('[data-slot="progress"]');
    if (!slot) return;
    const box = this.progressBox();
    clear(slot);
    if (box) slot.append(box);
  }

  renderValidation() {
    if (!this.data) return null;
    const box = el('section', { class: 'am-section', 'aria-label': 'Checks against the data' },
      el('h4', { text: '5. Checks that could contradict the diagram' }),
      el('div', { class: 'row end' }, el('button', {
        type: 'button', text: 'Run the checks', disabled: !this.canEdit || !!this.busy || this.checking?.state === 'running',
        dataset: { action: 'validation' }, on: { click: () => this.startValidation() } })));
    const slot = el('div', { dataset: { slot: 'progress' } });
    const progress = this.progressBox();
    if (progress) slot.append(progress);
    box.append(slot);
    const v = this.results.validation;
    if (!v) return box;
    { const note = this.staleNote(v); if (note) box.append(note); }
    box.append(el('p', { class: `summary ${v.verdict === 'contradicted' ? 'am-bad' : ''}`, text: `${v.verdict[0].toUpperCase()}${v.verdict.slice(1)}: ${v.reading}` }));
    const rows = v.items.map((i) => el('tr', { class: i.status === 'contradicted' ? 'am-fail' : '', dataset: { check: i.check } },
      el('th', { text: i.label }), el('td', { class: `am-status am-status-${i.status.replaceAll(' ', '-')}`, text: i.status }), el('td', { text: i.why })));
    box.append(table(['check', 'result', 'why'], rows, 'am-validation'));
    for (const item of v.items.filter((i) => i.status === 'contradicted' && i.repairs?.length)) {
      box.append(el('details', { open: true, dataset: { repairs: item.check } }, el('summary', { text: `${item.label}: what would explain it` }), this.repairList(item)));
    }
    const sets = v.items.find((i) => i.check === 'set-agreement');
    if (sets?.sets?.length) {
      const setRows = sets.sets.map((s) => el('tr', { class: s.status === 'differs' ? 'am-fail' : '' },
        el('td', { text: s.set ? `{${s.set.join(', ')}}` : 'further sets' }), el('td', { text: fmt(s.estimate) }),
        el('td', { text: s.difference === undefined ? '' : fmt(s.difference) }), el('td', { text: s.p_adjusted === undefined ? '' : fmt(s.p_adjusted, 2) }),
        el('td', { text: s.status + (s.why ? `: ${s.why}` : '') })));
      box.append(el('details', { open: sets.status === 'contradicted' }, el('summary', { text: `The estimate with each valid adjustment set (${sets.rows?.toLocaleString?.() ?? ''} shared rows, ${sets.resamples ?? ''} paired resamples)` }),
        table(['adjusted for', 'estimate', 'difference', 'p (Holm)', 'result'], setRows, 'am-sets')));
    }
    for (const i of v.items.filter((x) => x.controls?.length)) {
      const controlRows = i.controls.map((c) => el('tr', { class: c.status === 'contradicted' ? 'am-fail' : '' },
        el('td', { text: c.variable }), el('td', { text: c.ci ? `${fmt(c.estimate)} [${fmt(c.ci[0])}, ${fmt(c.ci[1])}]` : '–' }),
        el('td', { text: c.p_adjusted === undefined ? '' : fmt(c.p_adjusted, 2) }), el('td', { text: c.status + (c.why ? `: ${c.why}` : '') })));
      box.append(el('details', { open: i.status === 'contradicted' }, el('summary', { text: i.label }),
        table(['variable', 'estimated effect', 'p (Holm)', 'result'], controlRows, 'am-controls')));
    }
    return box;
  }

  renderSensitivity() {
    if (!this.data) return null;
    const box = el('section', { class: 'am-section', 'aria-label': 'Sensitivity' }, el('h4', { text: '6. How strong would a hidden common cause have to be?' }),
      el('div', { class: 'row end' }, this.button('Analyse sensitivity', 'sensitivity', () => this.run('sensitivity'))));
    const s = this.results.sensitivity;
    if (!s) return box;
    { const note = this.staleNote(s); if (note) box.append(note); }
    if (s.regression) {
      const g = s.regression;
      const room = g.room || { statements: [] };
      box.append(el('p', { class: 'am-room-reading summary', text: room.reading || '' }),
        el('div', { class: 'am-caution' }, el('strong', { text: 'Caution. ' }),
          el('span', { text: 'These figures say what a hidden cause of a given strength would do, not that none exists, and assume it acts like the measured variables. A decision about people\'s health or livelihood should not rest on them alone.' })));
      if (room.statements.length) {
        box.append(table(['stated by', 'a hidden cause…', 'effect if adjusted for [95% interval]', 'then'],
          room.statements.map((r) => el('tr', { class: r.usable && room.strongest && r.by === room.strongest.by && r.phrase === room.strongest.phrase ? 'am-strongest' : '' },
            el('td', { text: r.by || '–' }), el('td', { text: r.phrase }),
            ...(r.usable
              ? [el('td', { text: `${fmt(r.estimate_if_present)} [${fmt(r.interval_if_present[0])}, ${fmt(r.interval_if_present[1])}]` }), el('td', { text: r.standing })]
              : [el('td', { colspan: '2', class: 'note', text: r.why })]))), 'am-room'));
      }
      box.append(el('dl', { class: 'am-facts' },
        el('dt', { text: 'robustness value (estimate reaches 0)' }), el('dd', { text: pct(g.robustness_value) }),
        el('dt', { text: `… interval reaches 0 (α = ${g.alpha})` }), el('dd', { text: pct(g.robustness_value_alpha) }),
        el('dt', { text: 'partial R² of the treatment' }), el('dd', { text: pct(g.partial_r2_treatment) })),
      el('p', { class: 'summary', text: g.reading }),
      chart(s.charts?.hidden_cause, 'Line: the effect that would remain had a hidden common cause of that strength been adjusted for; band: its 95% interval. Orange bars: the causes the room stated, each with its own interval (Cinelli & Hazlett 2020 formulas, ordinary least-squares fit).'));
      const firsts = (g.benchmarks || []).filter((b) => b.k === 1);
      if (firsts.length) {
        box.append(el('details', {}, el('summary', { text: 'A hidden cause as strong as each measured variable' }),
          table(['as strong as', 'share of treatment', 'share of outcome', 'effect if adjusted for', 'its standard error'],
            (g.benchmarks || []).map((b) => el('tr', {}, el('td', { text: `${fmt(b.k)} × ${b.variable}` }),
              el('td', { text: pct(b.r2_with_treatment) }), el('td', { text: pct(b.r2_with_outcome) }),
              el('td', { text: fmt(b.estimate_if_present) }), el('td', { text: fmt(b.std_error_if_present) }))), 'am-yardsticks')));
      }
    } else if (s.not_applicable?.regression) {
      box.append(el('p', { class: 'note', text: s.not_applicable.regression }));
    }
    if (s.e_value) {
      const ev = s.e_value;
      box.append(el('dl', { class: 'am-facts' },
        el('dt', { text: 'E-value, estimate' }), el('dd', { text: fmt(ev.e_value) }),
        el('dt', { text: 'E-value, interval limit nearest no effect' }), el('dd', { text: fmt(ev.e_value_ci) })),
      el('p', { class: 'summary', text: `${ev.reading || ''} (VanderWeele & Ding 2017${ev.approximation ? `; ${ev.approximation}` : ''}.)` }));
    }
    if (s.note) box.append(el('p', { class: 'note', text: s.note }));
    return box;
  }

  renderDisputes() {
    if (!this.data) return null;
    const box = el('section', { class: 'am-section', 'aria-label': 'Disputed arrows' }, el('h4', { text: '7. Does the disagreement change the answer?' }),
      el('div', { class: 'row end' }, this.button('Estimate under each version', 'disputes', () => this.run('disputes'))));
    const d = this.results.disputes;
    if (!d) return box;
    { const note = this.staleNote(d); if (note) box.append(note); }
    if (!d.rows.length || !d.disputed.length) {
      box.append(el('p', { class: 'note', text: 'No arrow is in dispute: there is one version of the diagram.' }));
    }
    if (d.charts?.forest) box.append(chart(d.charts.forest, 'One row per way of settling the disputed arrows; the shaded row is the diagram as drawn.'));
    return box;
  }
}

function loadStyles() {
  if (document.querySelector('link[data-estimation-styles]')) return;
  document.head.append(el('link', { rel: 'stylesheet', href: '/static/estimation.css', dataset: { estimationStyles: '1' } }));
}

/**
 * Entry point called by the session page.
 * @param {HTMLElement} element the panel to fill
 * @param {{sessionId: string, token: string, member: any, state: () => any, subscribe?: (listener: (kind: string, message: any) => void) => () => void, highlight?: Function}} context
 */
export function mountEstimation(element, context) {
  loadStyles();
  element.classList.add('am-estimation');
  const panel = new EstimationPanel(element, context);
  const widen = () => document.body.classList.toggle('am-estimation-open', !element.hidden);
  new MutationObserver(() => { widen(); if (!element.hidden) panel.load(); }).observe(element, { attributes: true, attributeFilter: ['hidden'] });
  widen();
  panel.render();
  if (!element.hidden) panel.load();
  // Others' uploads and estimates arrive as new session revisions: reload when one
  // lands while the panel is open (no request otherwise; a hidden panel reloads on opening).
  // A revision that lands while an action runs is read once the action is done.
  let seen = context.state?.()?.revision;
  const check = () => {
    const now = context.state?.()?.revision;
    if (now !== seen && !element.hidden && !panel.busy) { seen = now; panel.load({ quiet: true }); }
  };
  panel.onIdle = check;
  context.subscribe?.((kind) => { if (kind === 'state' || kind === 'patch') check(); });
  return panel;
}
