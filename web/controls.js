// The instructor's controls: the token, then session, area, unit and tie controls sent over HTTP
// (each answer lands beside the control that sent it), and the checks of numeric fields.
import { app, $ } from '/state.js';
import { api, apiFor, ApiError } from '/api.js';
import { sendAuth } from '/connection.js';

const command = (group, c) => apiFor(group, '/api/v1/commands', { method: 'POST', body: c });
const control = (body) => apiFor('session', '/api/v1/control', { method: 'POST', body });

// Numeric fields are checked here, before anything is sent: a blank or non-numeric field would
// otherwise reach the server as 0. The problem shows beside the field itself.
export function numberProblem(input) {
  if (input.validity.badInput) return 'not a number';
  if (input.value.trim() === '') return 'optional' in input.dataset ? '' : 'enter a number';
  const v = Number(input.value);
  if (!Number.isFinite(v)) return 'not a number';
  if (input.min !== '' && v < Number(input.min)) return `at least ${input.min}`;
  return '';
}

function showFieldProblem(input, problem) {
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
  const token = $('token').value.trim();
  try {
    await api('/api/v1/role', { token });
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    $('auth-error').textContent = e.status
      ? 'That token was refused: check it with the instructor who started the session.' : e.message;
    return false;
  }
  app.token = token;
  app.instructor = true;
  sessionStorage.setItem('droopline.token', token);
  sendAuth();
  $('controls').hidden = false;
  $('auth-form').querySelector('button').textContent = 'Unlocked';
  return true;
}

/** Wires the controls; `onUnlock()` runs once the token was accepted. */
export function wireControls({ onUnlock }) {
  $('auth-form').addEventListener('submit', async (ev) => { if (await unlock(ev)) onUnlock(); });
  for (const b of document.querySelectorAll('[data-control]'))
    b.addEventListener('click', () => control({ action: b.dataset.control }));
  $('speed-select').addEventListener('change', () => control({ action: 'speed', speed: Number($('speed-select').value) }));
  $('scenario-file').addEventListener('change', async () => {
    const file = $('scenario-file').files[0];
    if (!file) return;
    await apiFor('session', '/api/v1/scenario', { method: 'PUT', body: await file.text() });
    $('scenario-file').value = '';
  });
  $('do-step').addEventListener('click', numeric(['step-mw'], (v) => command('area', { kind: 'load_step', area: areaId(), mw: v['step-mw'] })));
  $('do-ramp').addEventListener('click', numeric(['ramp-mw', 'ramp-s'], (v) => command('area', {
    kind: 'load_ramp', area: areaId(), mw: v['ramp-mw'], over_s: v['ramp-s'],
  })));
  $('agc-on').addEventListener('click', () => command('area', { kind: 'agc', area: areaId(), enabled: true }));
  $('agc-off').addEventListener('click', () => command('area', { kind: 'agc', area: areaId(), enabled: false }));
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
  $('do-trip').addEventListener('click', () => command('unit', { kind: 'unit_trip', unit: unitId() }));
  $('do-start').addEventListener('click', numeric(['start-mw'], (v) => command('unit', { kind: 'unit_start', unit: unitId(), mw: v['start-mw'] })));
  // A field's problem goes as soon as it is edited.
  for (const input of document.querySelectorAll('input[type=number]'))
    input.addEventListener('input', () => { if (input.hasAttribute('aria-invalid')) showFieldProblem(input, ''); });
  $('do-tie-trip').addEventListener('click', () => command('tie', { kind: 'tie_trip', tie: $('tie-select').value }));
  $('do-tie-close').addEventListener('click', () => command('tie', { kind: 'tie_close', tie: $('tie-select').value }));
  if (app.token) $('token').value = app.token;
}
