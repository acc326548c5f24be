// Sending what changes the session: commands and control actions go out through `apiFor` (a
// refusal shows in the server's words beside the control that sent it), an applied one is
// acknowledged with a transient note saying what was applied and when, and the drastic ones (trips,
// reset, loading, going back in time) wait for a confirmation that names what will happen. Also
// the words for a command, shared by the notes and the script's timeline.
import { $, fmt, el } from '/state.js';
import { apiFor } from '/api.js';

const AGC_MODES = { tie_line_bias: 'tie-line bias', constant_frequency: 'constant frequency', constant_interchange: 'constant net interchange' };
/** The secondary-control modes: the name the server takes and its words. */
export const AGC_MODE_NAMES = Object.entries(AGC_MODES);
export const agcModeWords = (m) => AGC_MODES[m] ?? m ?? '';

const mw = (v) => `${fmt(v, 1)} MW`;

/** A command in words ("trip unit G3", "setpoint of V1 to 120.0 MW at 2.0 MW/s"). */
export function describeCommand(c) {
  switch (c.kind) {
    case 'load_step': return `load step ${mw(c.mw)} in area ${c.area}`;
    case 'load_ramp': return `load ramp ${mw(c.mw)} over ${fmt(c.over_s, 0)} s in area ${c.area}`;
    case 'unit_trip': return `trip unit ${c.unit}`;
    case 'unit_start': return `start unit ${c.unit}${c.mw != null ? ` to ${mw(c.mw)}` : ''}`;
    case 'unit_stop': return `stop unit ${c.unit}${c.ramp_mw_per_s ? ` at ${fmt(c.ramp_mw_per_s, 1)} MW/s` : ''}`;
    case 'setpoint': return `setpoint of ${c.unit} to ${mw(c.mw)}${c.ramp_mw_per_s ? ` at ${fmt(c.ramp_mw_per_s, 1)} MW/s` : ''}`;
    case 'governor': return `governor of ${c.unit}: droop ${c.droop}, deadband ${c.deadband_hz} Hz, ${c.mode}`;
    case 'tie_trip': return `trip tie ${c.tie}`;
    case 'tie_close': return `close tie ${c.tie}`;
    case 'agc': return `secondary control ${c.enabled ? 'on' : 'off'} in area ${c.area}${c.mode ? ` (${agcModeWords(c.mode)})` : ''}`;
    case 'schedule': return `scheduled export of area ${c.area} to ${mw(c.mw)}${c.over_s ? ` over ${fmt(c.over_s, 0)} s` : ''}`;
    case 'shed': return `shed ${mw(c.mw)} of load in area ${c.area}`;
    case 'restore': return c.mw == null ? `restore all shed load in area ${c.area}` : `restore ${mw(c.mw)} of shed load in area ${c.area}`;
    case 'fluctuation': return `load fluctuation in area ${c.area}`;
    default: return c.kind;
  }
}

/**
 * A transient note that `what` was applied at simulation time `t_s` (kept 8 s, newest on top).
 * Notes from later than `t_s` go: after a reset or a step back they told of a run that is gone.
 */
export function noteApplied(what, t_s) {
  const box = $('applied');
  if (t_s != null) dropNotesAfter(t_s);
  const note = el('p', { className: 'note', textContent: `Applied${t_s != null ? ` at t = ${fmt(t_s, 2)} s` : ''}: ${what}` });
  if (t_s != null) note.dataset.t = String(t_s);
  box.prepend(note);
  while (box.children.length > 4) box.lastChild.remove();
  setTimeout(() => note.remove(), 8000);
}

/** Removes the notes of changes applied after simulation time `t_s` (the session went back before them). */
export function dropNotesAfter(t_s) {
  for (const note of [...$('applied').children]) if (note.dataset.t != null && Number(note.dataset.t) > t_s) note.remove();
}

/**
 * Asks before a drastic action: a modal dialog naming what will happen, with `yes` as the
 * confirming button's words. Resolves to true when confirmed.
 */
export function confirmAction(text, yes) {
  const dialog = $('confirm');
  $('confirm-text').textContent = text;
  $('confirm-yes').textContent = yes;
  dialog.returnValue = '';
  dialog.showModal();
  return new Promise((resolve) => dialog.addEventListener('close', () => resolve(dialog.returnValue === 'yes'), { once: true }));
}

/** Sends commands (one or a list); an applied one is acknowledged. Resolves to the answer or null. */
export async function sendCommand(group, c) {
  const r = await apiFor(group, '/api/v1/commands', { method: 'POST', body: c });
  if (r) noteApplied((Array.isArray(c) ? c : [c]).map(describeCommand).join('; '), r.t_s);
  return r;
}

/** Calls an instructor route that changes the session and acknowledges it with `what`. */
export async function sendChange(group, path, body, what, method = 'POST') {
  const r = await apiFor(group, path, { method, body });
  if (r) noteApplied(what, r.t_s);
  return r;
}
