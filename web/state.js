// The page's shared state and the small helpers every module uses. The state object is also
// `window.droopline`, for the browser tests and the curious.

export const app = {
  scenario: null,
  columns: [],         // the series columns the hello names ("t_s", "<area>.f_hz", ...)
  last: null,          // the latest frame
  charts: {},
  data: {},            // chart data arrays
  token: sessionStorage.getItem('droopline.token') || '',
  instructor: false,   // true once the token was accepted
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
