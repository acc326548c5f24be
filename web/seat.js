// The seat view: a trainee joins with the seat's code and their name, reads the briefing, follows the
// seat's own objectives (polled every 2 s) and runs the seat's own
// areas: per area its frequency, ACE, schedule (and a ramped change of it), upward reserve, shed
// load (shed and restore by hand) and secondary control (on/off, mode); per unit its state and its
// own setpoint (optionally ramped), start and controlled stop. Only the seat's areas are offered;
// whatever the server refuses shows in its words beside the control that sent it.
import { app, $, fmt, el, button, unitStatusWords } from '/state.js';
import { api, ApiError } from '/api.js';
import { sendAuth } from '/connection.js';
import { sendCommand, AGC_MODE_NAMES, agcModeWords } from '/commands.js';
import { readNumbers, readStartMw } from '/controls.js';
import { alarmsNow, renderAlarms, onAlarms, concernsSeat, fetchAlarms, wireTone } from '/alarms.js';
import { loadExercise } from '/exercise.js';
import { objectivesBlock, fetchObjectives } from '/objectives.js';

const POLL_MS = 2000;
const nameKey = () => `${app.tokenKey}:name`;

// A number field in its label; an optional one may stay blank.
function field(id, label, { optional = false, ...attrs } = {}) {
  const input = el('input', { id, type: 'number', step: 'any', ...attrs });
  if (optional) input.dataset.optional = '';
  return el('label', {}, label, input);
}
const errorFor = (group) => {
  const out = el('output', { className: 'error' });
  out.dataset.errorFor = group;
  out.setAttribute('role', 'alert');
  return out;
};
// The figures of an area: label and value, one cell each (the value stays under its label).
const AREA_FIGURES = [
  ['frequency', (s) => `${fmt(s.f_hz, 3)} Hz`],
  ['ACE', (s) => `${fmt(s.ace_mw, 1)} MW`],
  ['net export', (s) => `${fmt(s.export_mw, 1)} MW`],
  ['scheduled export', (s) => `${fmt(s.scheduled_export_mw, 1)} MW`],
  ['upward reserve', (s, units) => `${fmt(units.reduce((sum, u) => sum + u.headroom_up_mw, 0), 1)} MW`],
  ['load shed', (s) => `${fmt(s.shed_mw ?? 0, 1)} MW`],
  ['secondary control', (s) => (s.agc_enabled ? `on${s.agc_mode ? `, ${agcModeWords(s.agc_mode)}` : ''}, ${fmt(s.agc_mw, 1)} MW` : 'off')],
];
const UNIT_FIGURES = [
  ['state', (s) => unitStatusWords(s.status)],
  ['output', (s) => `${fmt(s.p_mw, 1)} MW`],
  ['setpoint', (s) => `${fmt(s.setpoint_mw, 1)} MW`],
  ['headroom ↑', (s) => `${fmt(s.headroom_up_mw, 1)} MW`],
];
const figures = (list) => el('dl', { className: 'figures' },
  ...list.map(([label]) => el('div', { className: 'pair' }, el('dt', { textContent: label }), el('dd', { textContent: '-' }))));
const fillFigures = (dl, list, ...args) => list.forEach(([, value], i) => { dl.children[i].lastChild.textContent = value(...args); });

const OFF = ['offline', 'tripped'];

// The commands of one unit row: the unit is read from the row when sent.
function unitRow(u) {
  const row = el('div', { className: 'unit-row' });
  row.dataset.unit = u.id;
  const unit = () => row.dataset.unit;
  const group = `unit:${u.id}`;
  const ids = { set: `seat-set-${u.id}`, ramp: `seat-ramp-${u.id}` };
  const send = (c) => sendCommand(group, c);
  row.append(
    el('div', { className: 'unit-name' }, el('strong', { textContent: u.id }), el('small', { textContent: ` ${u.turbine.type}, ${fmt(u.rating_mw, 0)} MW` })),
    figures(UNIT_FIGURES),
    el('div', { className: 'unit-controls' },
      field(ids.set, 'setpoint MW', { value: u.setpoint_mw }),
      field(ids.ramp, 'ramp MW/s', { min: 0, placeholder: 'at once', optional: true }),
      button('Set', () => {
        const v = readNumbers(ids.set, ids.ramp);
        if (!v) return;
        const c = { kind: 'setpoint', unit: unit(), mw: v[ids.set] };
        if (v[ids.ramp] > 0) c.ramp_mw_per_s = v[ids.ramp];
        send(c);
      }),
      button('Start', () => {
        const mw = readStartMw(ids.set);
        if (mw != null) send({ kind: 'unit_start', unit: unit(), mw });
      }, 'start'),
      button('Stop', () => {
        const v = readNumbers(ids.ramp);
        if (!v) return;
        const c = { kind: 'unit_stop', unit: unit() };
        if (v[ids.ramp] > 0) c.ramp_mw_per_s = v[ids.ramp];
        send(c);
      }, 'stop')),
    errorFor(group));
  return row;
}

function areaCard(a) {
  const group = `area:${a.id}`;
  const card = el('section', { className: 'desk-area' });
  card.dataset.area = a.id;
  const id = (x) => `seat-${x}-${a.id}`;
  const send = (c) => sendCommand(group, c);
  const mode = el('select', { id: id('agc-mode') }, ...AGC_MODE_NAMES.map(([name, words]) => new Option(words, name)));
  if (a.agc?.mode) mode.value = a.agc.mode;
  const agc = (enabled) => () => send({ kind: 'agc', area: a.id, enabled, mode: mode.value });
  const number = (x, label, attrs) => field(id(x), label, attrs);
  card.append(
    el('h3', { textContent: `Area ${a.id}` }),
    figures(AREA_FIGURES),
    el('div', { className: 'area-controls' },
      el('fieldset', {}, el('legend', { textContent: 'Secondary control' }),
        el('label', {}, 'mode', mode), button('On', agc(true)), button('Off', agc(false), 'quiet')),
      el('fieldset', {}, el('legend', { textContent: 'Scheduled export' }),
        number('sched', 'new schedule MW', { value: 0 }),
        number('sched-s', 'over s', { min: 0, placeholder: 'at once', optional: true }),
        button('Change schedule', () => {
          const v = readNumbers(id('sched'), id('sched-s'));
          if (!v) return;
          const c = { kind: 'schedule', area: a.id, mw: v[id('sched')] };
          if (v[id('sched-s')] > 0) c.over_s = v[id('sched-s')];
          send(c);
        })),
      el('fieldset', {}, el('legend', { textContent: 'Load' }),
        number('shed', 'shed MW', { min: 0, value: 10 }),
        button('Shed', () => {
          const v = readNumbers(id('shed'));
          if (v) send({ kind: 'shed', area: a.id, mw: v[id('shed')] });
        }, 'danger'),
        number('restore', 'restore MW', { min: 0, placeholder: 'all', optional: true }),
        button('Restore', () => {
          const v = readNumbers(id('restore'));
          if (!v) return;
          const c = { kind: 'restore', area: a.id };
          if (v[id('restore')] != null) c.mw = v[id('restore')];
          send(c);
        })),
      errorFor(group)),
    el('div', { className: 'units' }, ...app.scenario.units.filter((u) => u.area === a.id).map(unitRow)));
  return card;
}

/**
 * The seat's areas for the scenario of the latest greeting (again after each new greeting). Another
 * exercise may have been loaded meanwhile: a seat that is no longer in it is asked for a new code.
 */
export async function buildSeat() {
  if (!app.seat || !app.scenario) return;
  if (!app.exercise?.seats?.some((x) => x.id === app.seat.id)) {
    leave('The instructor loaded another exercise: join with your new code.');
    return;
  }
  $('seat-title').textContent = `${app.seat.name} (${app.seat.areas.join(', ')})${app.trainee ? `: ${app.trainee}` : ''}`;
  $('seat-briefing').textContent = app.exercise?.briefing || 'No briefing: no exercise is running.';
  $('seat-areas').replaceChildren(...app.scenario.areas.filter((a) => app.seat.areas.includes(a.id)).map(areaCard));
  renderSeatAlarms();
}

// The fields of a new card start from the live values (the setpoints and schedule as they are now).
function prefill(card, f) {
  card.dataset.filled = '1';
  const a = card.dataset.area;
  $(`seat-sched-${a}`).value = f.areas[a].scheduled_export_mw.toFixed(1);
  for (const row of card.querySelectorAll('.unit-row')) {
    const s = f.units[row.dataset.unit];
    if (s && s.setpoint_mw > 0) $(`seat-set-${row.dataset.unit}`).value = s.setpoint_mw.toFixed(1);
  }
}

/** A frame on the seat's cards. */
export function renderSeat(f) {
  for (const card of $('seat-areas').children) {
    if (!card.dataset.filled) prefill(card, f);
    const units = app.scenario.units.filter((u) => u.area === card.dataset.area).map((u) => f.units[u.id]);
    fillFigures(card.querySelector('.figures'), AREA_FIGURES, f.areas[card.dataset.area], units);
    for (const row of card.querySelectorAll('.unit-row')) {
      const s = f.units[row.dataset.unit];
      if (!s) continue;
      fillFigures(row.querySelector('.figures'), UNIT_FIGURES, s);
      row.dataset.status = s.status;
      // Start is for a unit that is off, stop for one that runs; the server checks again.
      row.querySelector('button.start').disabled = !OFF.includes(s.status);
      row.querySelector('button.stop').disabled = OFF.includes(s.status) || s.status === 'stopping';
    }
  }
}

function renderSeatAlarms() {
  renderAlarms($('seat-alarms'), alarmsNow('open', concernsSeat), { canAck: () => true });
}

// The seat's own objectives as they stand (the server gives a seat nothing else).
async function refreshSeatObjectives() {
  if (!app.seat || !app.exercise) return;
  const r = await fetchObjectives($('seat-objectives-error'));
  const mine = r?.seats.find((x) => x.seat === app.seat.id);
  if (!mine) return;
  $('seat-objectives-body').replaceChildren(objectivesBlock(mine, `${app.seat.name}: your objectives`));
}

async function join(code, name) {
  $('seat-error').textContent = '';
  let r;
  try {
    r = await api('/api/v1/role', { token: code });
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    $('seat-error').textContent = e.status
      ? 'That code was refused: check it with the instructor (codes change when an exercise is loaded).' : e.message;
    return false;
  }
  if (r.role !== 'seat') {
    $('seat-error').textContent = r.role === 'instructor'
      ? 'That is the instructor token: open the instructor view instead.' : 'That is no seat\'s code.';
    return false;
  }
  // The trainee's name goes with the seat (the server trims it and keeps at most 60 bytes).
  try {
    const joined = await api('/api/v1/seats/join', { method: 'POST', body: { name }, token: code });
    name = joined.name;
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    $('seat-error').textContent = `Your name was refused: ${e.message}`;
    return false;
  }
  Object.assign(app, { token: code, role: 'seat', seat: r.seat, trainee: name });
  sessionStorage.setItem(app.tokenKey, code);
  sessionStorage.setItem(nameKey(), name);
  sendAuth();
  await loadExercise();
  $('seat-join').hidden = true;
  $('seat-desk').hidden = false;
  buildSeat();
  refreshSeatObjectives();
  await fetchAlarms();
  return true;
}

// Back to the join form (the code forgotten), with a reason when there is one.
function leave(why = '') {
  sessionStorage.removeItem(app.tokenKey);
  sessionStorage.removeItem(nameKey());
  Object.assign(app, { token: '', role: 'viewer', seat: null });
  $('seat-objectives-body').replaceChildren();
  $('seat-desk').hidden = true;
  $('seat-join').hidden = false;
  $('seat-error').textContent = why;
  $('seat-code').value = '';
  app.rejoin = true;
  app.ws?.close(); // the stream as a viewer again
}

/** Wires the join form, the tone and the leave button; joins at once with a code kept from before. */
export function wireSeat() {
  onAlarms(renderSeatAlarms);
  wireTone($('alarm-tone'));
  $('seat-join').addEventListener('submit', (ev) => {
    ev.preventDefault();
    const name = $('seat-name').value.trim();
    if (!name) {
      $('seat-error').textContent = 'Enter your name: it goes into the debrief and the training records.';
      return;
    }
    join($('seat-code').value.trim(), name);
  });
  $('seat-leave').addEventListener('click', () => leave());
  setInterval(() => { if (app.seat && !document.hidden) refreshSeatObjectives(); }, POLL_MS);
  // A reload joins again with the code and name kept in this tab.
  const kept = sessionStorage.getItem(nameKey());
  if (app.token && kept) join(app.token, kept);
  else if (app.token) $('seat-code').value = app.token;
}
