// The page's one state object and the reducers that change it. Reducers take the state
// and a message (a full state from the server, a patch, an analysis, a presence list or
// a choice made on this page), change the state and return what the page must redraw.

/**
 * @typedef {{selection: any, highlight: any, adjusted: string[]|null}} ViewState
 * @typedef {{shared: any, analysis: any, history: any[]|null, me: any, online: Set<string>,
 *            tab: string, view: ViewState, adjusted: any, status: string}} PageState
 */

// A patch with nothing but these only moves variables: the analysis stays valid.
const POSITION_PATCH_KEYS = new Set(['type', 'revision', 'base', 'moves', 'event']);

const arrowId = (from, to) => JSON.stringify([from, to]);

/** @returns {PageState} */
export function createPageState() {
  return {
    shared: null, analysis: null, history: null, me: null, online: new Set(), tab: 'analysis',
    view: { selection: null, highlight: null, adjusted: null }, adjusted: null, status: 'connecting',
  };
}

/** The entry an arrow without votes or a mark has in the page's state. */
export function blankArrowNote(from, to) {
  return { from, to, flag: null, tally: { agree: 0, disagree: 0, unsure: 0, total: 0 }, votes: [] };
}

/** Live pushes list only arrows with votes or marks; fill in the rest from the document. */
export function normalizeState(state) {
  if (!state.arrows_compact) return state;
  const notes = new Map(state.arrows.map((a) => [arrowId(a.from, a.to), a]));
  state.arrows = state.document.arrows.map((a) => notes.get(arrowId(a.from, a.to)) || blankArrowNote(a.from, a.to));
  state.arrows_compact = false;
  return state;
}

/** The first load of the session page. */
export function reduceLoaded(page, data) {
  page.me = data.member;
  page.shared = normalizeState(data.state);
  page.online = new Set(data.online);
}

/** A full state pushed by the server (after a reconnect or a change sent whole). */
export function reduceFullState(page, state) {
  const before = page.shared;
  if (!state.members && before) state.members = before.members;  // unchanged, so not sent
  page.shared = normalizeState(state);
  const me = state.members.find((m) => m.id === page.me.id);
  if (me) page.me = me;
  reduceSelectionCheck(page);
}

/**
 * A patch against the previous revision. Returns null when it does not fit (the caller
 * then asks for a resync), else whether it only moved variables.
 * @returns {null | {positionsOnly: boolean}}
 */
export function reducePatch(page, message) {
  if (!page.shared || !applyPatch(page.shared, message)) return null;
  const positionsOnly = Object.keys(message).every((k) => POSITION_PATCH_KEYS.has(k));
  if (positionsOnly && page.analysis && page.analysis.revision === message.base) page.analysis.revision = message.revision;
  if (!positionsOnly) reduceSelectionCheck(page);
  return { positionsOnly };
}

/** Add an event to the history list already loaded; false when the list must be fetched again. */
export function reduceEvent(page, event) {
  if (!event || !page.history) return true;
  if (event.kind === 'undo') return false;
  if (!page.history.some((e) => e.revision === event.revision)) page.history.push(event);
  return true;
}

/** Drop the selection when someone else deleted what it points at. */
export function reduceSelectionCheck(page) {
  const sel = page.view.selection;
  if (!sel) return;
  const s = page.shared;
  const exists = sel.kind === 'variable' ? s.document.variables.some((v) => v.name === sel.name)
    : sel.kind === 'arrow' ? s.arrows.some((a) => arrowId(a.from, a.to) === sel.key)
      : s.proposals.some((p) => p.id === sel.id);
  if (!exists) page.view.selection = null;
}

export function reduceSelection(page, selection) {
  page.view.selection = selection;
  if (selection) page.tab = 'selection';
}

export function reduceHighlight(page, path) {
  page.view.highlight = path ? { nodes: path.nodes, causal: path.causal } : null;
}

export function reduceAdjusted(page, set) {
  page.view.adjusted = set;
  page.view.highlight = null;
}

/**
 * The paths as they stand given the adjustment set shown, answered for one revision.
 * Kept beside the analysis, never written into it, so showing no set lists the
 * analysis's own paths again.
 */
export function reduceAdjustedPaths(page, revision, set, result) {
  if (!page.analysis?.analysis || page.analysis.revision !== revision || page.view.adjusted !== set) return false;
  page.adjusted = { key: JSON.stringify(set), revision, result };
  return true;
}

/** The paths and check given the set shown, if worked out for this set and revision; else null. */
export function adjustedPaths(page) {
  const a = page.adjusted;
  if (page.view.adjusted === null || !a || !page.analysis) return null;
  return a.key === JSON.stringify(page.view.adjusted) && a.revision === page.analysis.revision ? a.result : null;
}

/**
 * Apply a patch (see app/workshop/views.py, change_patch) to the page's state, whose
 * `arrows` lists every drawn arrow in the document's order. Checks first and changes
 * nothing when the patch does not fit that state (the caller then asks for a resync).
 * @returns {boolean} whether it was applied
 */
export function applyPatch(state, patch) {
  const doc = state.document;
  const variables = new Map(doc.variables.map((v) => [v.name, v]));
  if ((patch.moves || []).some((m) => !variables.has(m.name))) return false;
  if ((patch.variables_added || []).some((v) => variables.has(v.name))) return false;
  const drawn = new Set(doc.arrows.map((a) => arrowId(a.from, a.to)));
  if (state.arrows.length !== doc.arrows.length) return false;
  const removed = new Set((patch.arrows_removed || []).map(([from, to]) => arrowId(from, to)));
  for (const id of removed) { if (!drawn.has(id)) return false; drawn.delete(id); }
  for (const [from, to] of patch.arrows_added || []) {
    const id = arrowId(from, to);
    if (drawn.has(id)) return false;
    drawn.add(id);
  }
  if ((patch.arrow_notes || []).some((n) => !drawn.has(arrowId(n.from, n.to)))) return false;

  for (const m of patch.moves || []) { const v = variables.get(m.name); v.x = m.x; v.y = m.y; }
  for (const v of patch.variables_added || []) doc.variables.push(v);
  if (removed.size || patch.arrows_added?.length) {
    // A reversed arrow keeps its place in the list, as on the server.
    const inPlace = new Map();
    const appended = [];
    for (const [from, to] of patch.arrows_added || []) {
      if (removed.has(arrowId(to, from))) inPlace.set(arrowId(to, from), [from, to]);
      else appended.push([from, to]);
    }
    const rebuild = (list, make) => {
      const out = [];
      for (const a of list) {
        const id = arrowId(a.from, a.to);
        if (inPlace.has(id)) out.push(make(...inPlace.get(id)));
        else if (!removed.has(id)) out.push(a);
      }
      return out.concat(appended.map(([from, to]) => make(from, to)));
    };
    doc.arrows = rebuild(doc.arrows, (from, to) => ({ from, to }));
    state.arrows = rebuild(state.arrows, blankArrowNote);
  }
  if (patch.arrow_notes?.length) {
    const notes = new Map(patch.arrow_notes.map((n) => [arrowId(n.from, n.to), n]));
    state.arrows = state.arrows.map((a) => notes.get(arrowId(a.from, a.to)) || a);
  }
  for (const p of patch.proposals || []) {
    const i = state.proposals.findIndex((x) => x.id === p.id);
    if (i >= 0) state.proposals[i] = p;
    else {
      const at = state.proposals.findIndex((x) => x.id > p.id);
      state.proposals.splice(at < 0 ? state.proposals.length : at, 0, p);
    }
  }
  if ('disputed' in patch) state.disputed = patch.disputed;
  if ('can_undo' in patch) state.can_undo = patch.can_undo;
  state.revision = patch.revision;
  return true;
}
