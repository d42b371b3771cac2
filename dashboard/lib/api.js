// The HTTP API. Writes carry the write key (the daemon's http.token) when one is stored for this
// browser tab; the key lives in sessionStorage, so it is forgotten when the tab closes.

const KEY_STORAGE = 'plateau.writeKey';

export class ApiError extends Error {
  constructor(status, code, message) {
    super(message);
    this.status = status;
    this.code = code;
  }
}

export function writeKey() {
  try {
    return sessionStorage.getItem(KEY_STORAGE) ?? '';
  } catch {
    return '';
  }
}

export function setWriteKey(key) {
  try {
    if (key) sessionStorage.setItem(KEY_STORAGE, key);
    else sessionStorage.removeItem(KEY_STORAGE);
  } catch {
    // storage unavailable: the key is not kept
  }
}

async function request(method, path, body) {
  const headers = { accept: 'application/json' };
  if (body !== undefined) headers['content-type'] = 'application/json';
  const key = method === 'GET' ? '' : writeKey();
  if (key) headers.authorization = `Bearer ${key}`;
  let response;
  try {
    response = await fetch(path, { method, headers, body: body === undefined ? undefined : JSON.stringify(body), cache: 'no-store' });
  } catch {
    throw new ApiError(0, 'ERR_NETWORK', 'the daemon did not answer (network)');
  }
  let payload = null;
  try {
    payload = await response.json();
  } catch {
    payload = null;
  }
  if (!response.ok) {
    const code = payload && typeof payload.error === 'string' ? payload.error : `HTTP_${response.status}`;
    const message = payload && typeof payload.message === 'string' ? payload.message : `the daemon answered ${response.status}`;
    throw new ApiError(response.status, code, message);
  }
  return payload;
}

export const api = {
  server: () => request('GET', '/api/server'),
  channel: (name, trace = 2000) => request('GET', `/api/channels/${encodeURIComponent(name)}?trace=${trace}&events=100`),
  derived: (name, events = 100) => request('GET', `/api/derived/${encodeURIComponent(name)}?events=${events}`),
  testPoints: () => request('GET', '/api/test-points'),
  testPoint: (id) => request('GET', `/api/test-points/${encodeURIComponent(id)}`),
  startTestPoint: (body) => request('POST', '/api/test-points', body),
  stopTestPoint: (id) => request('POST', `/api/test-points/${encodeURIComponent(id)}/stop`),
  annotate: (id, text) => request('POST', `/api/test-points/${encodeURIComponent(id)}/annotations`, { text }),
  acknowledge: (eventId, note) => request('POST', `/api/events/${encodeURIComponent(eventId)}/acknowledge`, note ? { note } : {}),
  eventsAfter: (after) => request('GET', `/api/events?after=${after}&limit=1000`),
  records: () => request('GET', '/api/records'),
};

/** Every record of every test point as one CSV. */
export function recordsCsvUrl() {
  return '/api/records.csv';
}

export function recordUrl(id, format) {
  return `/api/test-points/${encodeURIComponent(id)}/record.${format}`;
}

/** The record's derived results as CSV (a file of its own beside record.csv). */
export function derivedRecordUrl(id) {
  return `/api/test-points/${encodeURIComponent(id)}/record-derived.csv`;
}

export function reportUrl(id) {
  return `/api/test-points/${encodeURIComponent(id)}/report`;
}
