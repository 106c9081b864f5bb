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
