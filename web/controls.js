// The instructor's controls: the token, then session, area, unit and tie controls sent over HTTP
// (each refusal lands beside the control that sent it, each applied action is acknowledged, trips,
// reset and loading are confirmed first), and the checks of numeric fields.
import { app, $ } from '/state.js';
import { api, apiFor, ApiError } from '/api.js';
import { sendAuth } from '/connection.js';
import { sendCommand as command, sendChange, confirmAction, AGC_MODE_NAMES } from '/commands.js';

const CONTROL_WORDS = { pause: 'paused', resume: 'resumed', reset: 'reset to t = 0' };
const control = (body, what) => sendChange('session', '/api/v1/control', body, what ?? CONTROL_WORDS[body.action]);

// Numeric fields are checked here, before anything is sent: a blank or non-numeric field would
// otherwise reach the server as 0. The problem shows beside the field itself.
export function numberProblem(input) {
  if (input.validity.badInput) return 'not a number';
  if (input.value.trim() === '') return 'optional' in input.dataset ? '' : 'enter a number';
  const v = Number(input.value);
  if (!Number.isFinite(v)) return 'not a number';
  if (input.min !== '' && v < Number(input.min)) return `at least ${input.min}`;
  if (input.max !== '' && v > Number(input.max)) return `at most ${input.max}`;
  if (input.step === '1' && !Number.isInteger(v)) return 'a whole number';
  return '';
}

/** Shows `problem` beside `input` (below it, inside its label); '' clears it. */
export function showFieldProblem(input, problem) {
  let note = input.parentElement.querySelector('.field-error');
  if (!note && problem) {
    note = Object.assign(document.createElement('span'), { className: 'field-error', id: `${input.id}-error` });
    note.setAttribute('role', 'alert');
    input.after(note);
    input.setAttribute('aria-describedby', note.id);
  }
  if (note) note.textContent = problem;
  if (problem) input.setAttribute('aria-invalid', 'true');
  else input.removeAttribute('aria-invalid');
}

/**
 * The values of the fields by id (null for a blank optional one), or null when any is refused;
 * every refused field shows its problem.
 */
export function readNumbers(...ids) {
  const values = {};
  let ok = true;
  for (const id of ids) {
    const input = $(id);
    const problem = numberProblem(input);
    showFieldProblem(input, problem);
    if (problem) ok = false;
    else values[id] = input.value.trim() === '' ? null : Number(input.value);
  }
  return ok ? values : null;
}

/**
 * The MW a start loads the unit to, from the field `id`: a number above 0, else null with the
 * problem shown beside the field (an off-line unit's setpoint box holds 0, and a start to 0 MW
 * synchronises the unit and leaves it idle, which no operator means).
 */
export function readStartMw(id) {
  const v = readNumbers(id);
  if (!v) return null;
  if (!(v[id] > 0)) {
    showFieldProblem($(id), 'enter the MW to load the unit to once it is synchronised (above 0)');
    return null;
  }
  return v[id];
}

// A click handler that reads the fields and calls `build` with their values when all are good.
const numeric = (ids, build) => () => {
  const v = readNumbers(...ids);
  if (v) build(v);
};
const unitId = () => $('unit-select').value;
const areaId = () => $('area-select').value;

/** The unit form shows the chosen unit's live (else scenario) setpoint and governor. */
export function syncUnitForm() {
  const u = app.scenario?.units.find((x) => x.id === unitId());
  if (!u) return;
  const live = app.last?.units?.[u.id];
  $('set-mw').value = live ? live.setpoint_mw.toFixed(1) : u.setpoint_mw;
  $('gov-droop').value = live ? live.droop : u.governor.droop;
  $('gov-db').value = live ? live.deadband_hz : u.governor.deadband_hz;
  $('gov-kind').value = u.governor.deadband;
  $('gov-mode').value = live ? live.mode : u.governor.mode;
  $('start-mw').value = u.setpoint_mw;
}

/** The area, unit and tie choices of a new scenario (a choice that still exists stays). */
export function fillChoices(sc) {
  const fill = (sel, items) => {
    const keep = sel.value;
    sel.replaceChildren(...items.map((i) => new Option(i, i)));
    if (items.includes(keep)) sel.value = keep;
  };
  fill($('area-select'), sc.areas.map((a) => a.id));
  fill($('unit-select'), sc.units.map((u) => u.id));
  fill($('tie-select'), sc.ties.map((t) => t.id));
  syncUnitForm();
}

async function unlock(ev) {
  ev.preventDefault();
  $('auth-error').textContent = '';
  try {
    await unlockWith($('token').value.trim());
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    $('auth-error').textContent = e.status
      ? 'That token was refused: check it with the instructor who started the session.' : e.message;
    return false;
  }
  return true;
}

/** Proves the instructor token: the role, the stream's auth, the controls shown. */
export async function unlockWith(token) {
  await api('/api/v1/role', { token });
  app.token = token;
  app.role = 'instructor';
  app.instructor = true;
  sessionStorage.setItem(app.tokenKey, token);
  sendAuth();
  $('controls').hidden = false;
  $('auth-form').querySelector('button').textContent = 'Unlocked';
}

/** Wires the controls; `onUnlock()` runs once the token was accepted. */
export function wireControls({ onUnlock }) {
  // A field's problem goes as soon as it is edited (fields made later included).
  document.addEventListener('input', (ev) => {
    const input = ev.target;
    if (input.matches?.('input[type=number][aria-invalid]')) showFieldProblem(input, '');
  });
  $('auth-form').addEventListener('submit', async (ev) => { if (await unlock(ev)) onUnlock(); });
  for (const b of document.querySelectorAll('[data-control]')) {
    const send = () => control({ action: b.dataset.control });
    const reset = async () => {
      if (await confirmAction('Reset the session to t = 0? The run so far, its save points and every seat\'s progress are lost.', 'Reset to t = 0')) send();
    };
    b.addEventListener('click', b.dataset.control === 'reset' ? reset : send);
  }
  $('speed-select').addEventListener('change', () => control({ action: 'speed', speed: Number($('speed-select').value) }, `speed ${$('speed-select').value}x`));
  $('scenario-file').addEventListener('change', async () => {
    const file = $('scenario-file').files[0];
    if (!file) return;
    $('scenario-file').value = '';
    if (!await confirmAction(`Load the scenario in "${file.name}"? The running session ends and a new run starts at t = 0.`, 'Load scenario')) return;
    await sendChange('session', '/api/v1/scenario', await file.text(), `scenario from "${file.name}" loaded`, 'PUT');
  });
  const modeSelect = $('agc-mode');
  modeSelect.replaceChildren(new Option('(unchanged)', ''), ...AGC_MODE_NAMES.map(([name, words]) => new Option(words, name)));
  const agc = (enabled) => () => {
    const c = { kind: 'agc', area: areaId(), enabled };
    if (modeSelect.value) c.mode = modeSelect.value;
    command('area', c);
  };
  $('do-schedule').addEventListener('click', numeric(['sched-mw', 'sched-s'], (v) => {
    const c = { kind: 'schedule', area: areaId(), mw: v['sched-mw'] };
    if (v['sched-s'] > 0) c.over_s = v['sched-s'];
    command('area', c);
  }));
  $('do-shed').addEventListener('click', numeric(['shed-mw'], (v) => command('area', { kind: 'shed', area: areaId(), mw: v['shed-mw'] })));
  $('do-restore').addEventListener('click', () => command('area', { kind: 'restore', area: areaId() }));
  $('do-step').addEventListener('click', numeric(['step-mw'], (v) => command('area', { kind: 'load_step', area: areaId(), mw: v['step-mw'] })));
  $('do-ramp').addEventListener('click', numeric(['ramp-mw', 'ramp-s'], (v) => command('area', {
    kind: 'load_ramp', area: areaId(), mw: v['ramp-mw'], over_s: v['ramp-s'],
  })));
  $('agc-on').addEventListener('click', agc(true));
  $('agc-off').addEventListener('click', agc(false));
  $('unit-select').addEventListener('change', syncUnitForm);
  $('do-setpoint').addEventListener('click', numeric(['set-mw', 'set-ramp'], (v) => {
    const c = { kind: 'setpoint', unit: unitId(), mw: v['set-mw'] };
    if (v['set-ramp'] > 0) c.ramp_mw_per_s = v['set-ramp']; // blank or 0: at once
    command('unit', c);
  }));
  $('do-governor').addEventListener('click', numeric(['gov-droop', 'gov-db'], (v) => command('unit', {
    kind: 'governor', unit: unitId(), droop: v['gov-droop'], deadband_hz: v['gov-db'],
    deadband: $('gov-kind').value, mode: $('gov-mode').value,
  })));
  $('do-trip').addEventListener('click', async () => {
    const unit = unitId();
    if (await confirmAction(`Trip unit ${unit}? It goes offline at once, without unloading.`, `Trip ${unit}`)) command('unit', { kind: 'unit_trip', unit });
  });
  $('do-start').addEventListener('click', () => {
    const mw = readStartMw('start-mw');
    if (mw != null) command('unit', { kind: 'unit_start', unit: unitId(), mw });
  });
  $('do-stop').addEventListener('click', numeric(['set-ramp'], (v) => {
    const c = { kind: 'unit_stop', unit: unitId() };
    if (v['set-ramp'] > 0) c.ramp_mw_per_s = v['set-ramp'];
    command('unit', c);
  }));
  $('do-tie-trip').addEventListener('click', async () => {
    const tie = $('tie-select').value;
    if (await confirmAction(`Trip tie ${tie}? The areas it joins lose their exchange over it at once.`, `Trip ${tie}`)) command('tie', { kind: 'tie_trip', tie });
  });
  $('do-tie-close').addEventListener('click', () => command('tie', { kind: 'tie_close', tie: $('tie-select').value }));
  if (app.token) $('token').value = app.token;
}
