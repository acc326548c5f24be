// The page's shared state and the small helpers every module uses. The state object is also
// `window.droopline`, for the browser tests and the curious.

// The view is chosen by how the page is entered: `/?view=wall`, `/?view=seat`, `/?view=instructor`,
// `/?view=records`; anything else is the overview.
const VIEWS = ['wall', 'seat', 'instructor', 'records'];
const asked = new URLSearchParams(location.search).get('view');
const view = VIEWS.includes(asked) ? asked : 'overview';
// A seat's join code and the instructor token are kept apart: one browser may hold both views.
const keyOf = view === 'seat' ? 'droopline.seat' : 'droopline.token';

export const app = {
  scenario: null,
  columns: [],         // the series columns the hello names ("t_s", "<area>.f_hz", ...)
  last: null,          // the latest frame
  formStale: false,    // the unit form waits for the first frame after a greeting
  charts: {},
  data: {},            // chart data arrays
  view,                // 'overview', 'wall', 'seat', 'instructor' or 'records'
  tokenKey: keyOf,     // where this view keeps its token or join code (sessionStorage)
  token: sessionStorage.getItem(keyOf) || '',
  role: 'viewer',      // 'viewer', 'seat' or 'instructor', once the server accepted the token
  instructor: false,   // true once the instructor token was accepted
  seat: null,          // the seat signed in: { id, name, areas }
  exercise: null,      // the running exercise (name, briefing, time_limit_s, seats), null without one
  alarms: new Map(),   // id -> alarm, as the stream tells them (active ones from the greeting)
  disturbances: new Map(), // key -> { d: latest message, el: its box }
  logged: new Map(),       // event log entries updated in place: key -> <li>
  retries: 0,
  connected: false,
  ws: null,
};
window.droopline = app;

export const $ = (id) => document.getElementById(id);

/** A number with `d` decimals, '-' when there is none, never "-0.0". */
export const fmt = (v, d = 1) => {
  if (v == null || Number.isNaN(v)) return '-';
  const text = Number(v).toFixed(d);
  return /^-0\.?0*$/.test(text) ? text.slice(1) : text;
};

/** The `<output>` beside the controls of a group (`data-error-for`), where its problems show. */
export const errorOutput = (group) => document.querySelector(`[data-error-for="${group}"]`);

/** An element of `tag` with properties (className, textContent, ...) and children. */
export function el(tag, props = {}, ...children) {
  const e = Object.assign(document.createElement(tag), props);
  e.append(...children.filter((c) => c != null));
  return e;
}

/** A button with its words and what a click does. */
export function button(text, onClick, className = '') {
  const b = el('button', { type: 'button', textContent: text, className });
  b.addEventListener('click', onClick);
  return b;
}

/** A seat's display name from its id ("instructor" and "script" as they are). */
export function authorName(by) {
  if (!by) return '';
  const seat = app.exercise?.seats?.find((s) => s.id === by);
  return seat ? seat.name : by;
}

/** A unit's state in words: at_max / at_min name the valve, whose limit it is. */
export function unitStatusWords(status) {
  return { at_max: 'valve at max', at_min: 'valve at min' }[status] ?? status.replace('_', ' ');
}
