// Talking to the server: keys kept in this browser, fetch wrappers that surface the server's message.

export const TOKEN_HEADER = 'X-Arrowmoot-Token';
const KEY_PREFIX = 'arrowmoot:key:';
const INDEX_KEY = 'arrowmoot:sessions';

/** The key this browser holds for a session (or null). */
export function loadKey(sessionId) {
  return localStorage.getItem(KEY_PREFIX + sessionId);
}

/** Remember a key and the session's title for the start page list. */
export function saveKey(sessionId, token, title, role) {
  localStorage.setItem(KEY_PREFIX + sessionId, token);
  const index = listSessions().filter((s) => s.id !== sessionId);
  index.unshift({ id: sessionId, title: title || sessionId, role: role || 'participant' });
  localStorage.setItem(INDEX_KEY, JSON.stringify(index.slice(0, 20)));
}

export function forgetKey(sessionId) {
  localStorage.removeItem(KEY_PREFIX + sessionId);
  localStorage.setItem(INDEX_KEY, JSON.stringify(listSessions().filter((s) => s.id !== sessionId)));
}

/** @returns {{id: string, title: string, role: string}[]} */
export function listSessions() {
  try { return JSON.parse(localStorage.getItem(INDEX_KEY) || '[]'); } catch { return []; }
}

export class ApiError extends Error {
  constructor(body, status) {
    super(body?.error || `request failed (${status})`);
    this.status = status;
    this.code = body?.code;
    this.body = body;
  }
}

/**
 * Call the JSON API. Throws ApiError with the server's message on failure.
 * @param {string} method
 * @param {string} path
 * @param {any} [body]
 * @param {string|null} [token]
 */
export async function callApi(method, path, body, token) {
  const headers = { Accept: 'application/json' };
  if (body !== undefined) headers['Content-Type'] = 'application/json';
  if (token) headers[TOKEN_HEADER] = token;
  let response;
  try {
    response = await fetch(path, { method, headers, body: body === undefined ? undefined : JSON.stringify(body) });
  } catch (err) {
    throw new ApiError({ error: 'cannot reach the server; check the connection' }, 0);
  }
  let data = null;
  try { data = await response.json(); } catch { data = null; }
  if (!response.ok) throw new ApiError(data, response.status);
  return data;
}

const sessionPath = (sessionId) => `/api/sessions/${encodeURIComponent(sessionId)}`;

/** The session page's starting data: the member, the shared state and who is online. */
export function fetchSession(sessionId, token) {
  return callApi('GET', sessionPath(sessionId), undefined, token);
}

/** The session's history of events. */
/** The join link the room can reach (with its QR code), or how to make one. */
export function fetchJoinAddress(sessionId, token) {
  return callApi('GET', `${sessionPath(sessionId)}/join-address`, undefined, token);
}

export function fetchHistory(sessionId, token) {
  return callApi('GET', `${sessionPath(sessionId)}/history`, undefined, token);
}

/** Paths and the check of one adjustment set, for a document (no session needed). */
export function checkAdjustmentSet(document, set) {
  return callApi('POST', '/api/identify', { ...document, adjust: set });
}

/** A short-lived link to the session's report (a new tab cannot send the key). */
export function createReportLink(sessionId, token) {
  return callApi('POST', `${sessionPath(sessionId)}/report/link`, undefined, token);
}

/** Fetch a file the server builds (a document export, the record bundle) as a Blob. */
async function fetchFile(path, token) {
  const response = await fetch(path, { headers: { [TOKEN_HEADER]: token } });
  if (!response.ok) throw new ApiError(await response.json().catch(() => ({ error: 'export failed' })), response.status);
  return response.blob();
}

/** The diagram in GraphML or DOT, as the server writes it. */
export function fetchDocumentExport(sessionId, token, format) {
  return fetchFile(`${sessionPath(sessionId)}/document?format=${encodeURIComponent(format)}`, token);
}

/** The versioned record bundle of the whole workshop. */
export function fetchRecordBundle(sessionId, token) {
  return fetchFile(`${sessionPath(sessionId)}/export/bundle`, token);
}

/** Send a command over HTTP (the live connection falls back to this while it is down). */
export function postCommand(sessionId, token, command) {
  return callApi('POST', `${sessionPath(sessionId)}/commands`, command, token);
}

/** The estimation stage's shared state: data, variables and the latest results. */
export function fetchEstimation(sessionId, token) {
  return callApi('GET', `${sessionPath(sessionId)}/estimation`, undefined, token);
}

/** Attach a data file (sent as it is, not as a form). */
export async function uploadEstimationData(sessionId, token, file) {
  const response = await fetch(`${sessionPath(sessionId)}/estimation/data?name=${encodeURIComponent(file.name)}`, {
    method: 'PUT', body: file,
    headers: { [TOKEN_HEADER]: token, 'Content-Type': 'application/octet-stream', Accept: 'application/json' },
  });
  let body = null;
  try { body = await response.json(); } catch { body = null; }
  if (!response.ok) throw new ApiError(body, response.status);
  return body;
}

/** Save which column measures which variable. */
export function saveEstimationMapping(sessionId, token, mapping, textAsMissing) {
  const body = textAsMissing ? { mapping, text_as_missing: textAsMissing } : { mapping };
  return callApi('PUT', `${sessionPath(sessionId)}/estimation/mapping`, body, token);
}

/** Run one of the estimation stage's analyses: 'estimate', 'validation', 'sensitivity' or 'disputes'. */
export function runEstimation(sessionId, token, kind, body) {
  return callApi('POST', `${sessionPath(sessionId)}/estimation/${encodeURIComponent(kind)}`, body, token);
}

/** Progress of the latest run of the checks against the data. */
export function readValidationRun(sessionId, token) {
  return callApi('GET', `${sessionPath(sessionId)}/estimation/validation/run`, undefined, token);
}

/** Stop the running checks against the data. */
export function stopValidation(sessionId, token) {
  return callApi('POST', `${sessionPath(sessionId)}/estimation/validation/stop`, {}, token);
}
