// The one way to call the HTTP API: adds the instructor token or seat code once it was accepted, sends objects
// as JSON, parses the JSON answer and turns any failure into an ApiError with a readable message
// (the server's `error` and its `issues`, or why the server did not answer).
import { app, errorOutput } from '/state.js';

export class ApiError extends Error {
  constructor(message, status, headline = message, lines = []) {
    super(message);
    this.status = status; // the HTTP status; 0 when the server did not answer
    this.headline = headline; // the server's `error` alone
    this.lines = lines; // the server's `issues` (or `details`), one problem each
  }
}

// The server's list of problems: `issues` on most routes, `details` on some; text only.
const problemLines = (answer) => (Array.isArray(answer.issues) ? answer.issues : Array.isArray(answer.details) ? answer.details : [])
  .map((x) => (typeof x === 'string' ? x : JSON.stringify(x)));

/**
 * Calls `path` and resolves to the parsed JSON answer; throws an ApiError on failure.
 * `body`: an object (sent as JSON) or a string (sent as it is); `token` replaces the session's.
 */
export async function api(path, { method = 'GET', body, token } = {}) {
  const bearer = token ?? (app.role === 'viewer' ? '' : app.token);
  const headers = {};
  if (bearer) headers.Authorization = `Bearer ${bearer}`;
  if (body !== undefined) headers['Content-Type'] = 'application/json';
  let res;
  try {
    res = await fetch(path, {
      method, headers, body: body === undefined || typeof body === 'string' ? body : JSON.stringify(body),
    });
  } catch (e) {
    throw new ApiError(`the server did not answer (${e.message})`, 0);
  }
  const answer = await res.json().then((a) => (a && typeof a === 'object' ? a : {}), () => ({}));
  if (!res.ok) {
    const headline = typeof answer.error === 'string' && answer.error ? answer.error : `HTTP ${res.status}`;
    const lines = problemLines(answer);
    throw new ApiError(`${headline}${lines.length ? `: ${lines.join('; ')}` : ''}`, res.status, headline, lines);
  }
  return answer;
}

/** What a viewer is told where a route is the instructor's (the server answered 401). */
export const FOR_INSTRUCTOR = 'This is for the instructor: unlock with the instructor token to run it.';

/**
 * The same, for a control or study with a `data-error-for` output: the output is cleared first and
 * shows the message of a failure, which resolves to null.
 */
export async function apiFor(group, path, options) {
  const out = errorOutput(group);
  if (out) out.textContent = '';
  try {
    return await api(path, options);
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    if (out) out.textContent = e.status === 401 ? FOR_INSTRUCTOR : e.message;
    return null;
  }
}

/**
 * Fetches `path` with the instructor's token for a file (a report, a CSV) and resolves to its Blob
 * URL; throws an ApiError (the server's `error`, or why it did not answer). A plain link could not
 * carry the token, so the file is fetched here and handed out from a Blob URL.
 */
export async function fetchFile(path, type) {
  let res;
  try {
    res = await fetch(path, { headers: { Authorization: `Bearer ${app.token}` } });
  } catch (e) {
    throw new ApiError(`the server did not answer (${e.message})`, 0);
  }
  if (!res.ok) {
    const answer = await res.json().catch(() => ({}));
    throw new ApiError(answer.error || `HTTP ${res.status}`, res.status);
  }
  return URL.createObjectURL(new Blob([await res.text()], { type }));
}

/** A file name's stem from free text: letters and figures, the rest as dashes. */
export const fileStem = (text) => text.replace(/[^A-Za-z0-9]+/g, '-').slice(0, 40);

/**
 * Opens the debrief (HTML) at `path` in a new tab and points the `save` link beside the button at
 * it, named `debrief-<name>.html`; a failure shows in `out`. The link's previous Blob is released.
 */
export async function openDebrief(path, out, save, name) {
  out.textContent = '';
  let url;
  try {
    url = await fetchFile(path, 'text/html');
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    out.textContent = e.status ? `No debrief: ${e.message}` : e.message;
    return;
  }
  if (save.href.startsWith('blob:')) URL.revokeObjectURL(save.href);
  save.href = url;
  save.download = `debrief-${fileStem(name || 'run')}.html`;
  save.hidden = false;
  window.open(url, '_blank', 'noopener');
}
