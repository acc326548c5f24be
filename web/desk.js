// The instructor view's panels (from the `desk-panels` template, made only in that view): the seats
// with their join codes, who has joined and their trainees' names, every seat's objectives, notes,
// ending the exercise and opening its debrief, the hidden script's timeline (fire now, skip, shift,
// add), save points (save, restore) and rewind, the action feed with each author's name and every
// alarm. Seats, script and save points are read again every few seconds while unlocked: their
// changes (a seat joining, a script event firing) are not all on the stream. A failed read shows
// in its panel's `-read` output, apart from the answers to the instructor's own actions.
import { app, $, fmt, el, button, authorName, errorOutput } from '/state.js';
import { apiFor, openDebrief } from '/api.js';
import { sendChange, confirmAction, describeCommand } from '/commands.js';
import { readNumbers } from '/controls.js';
import { alarmsNow, renderAlarms, onAlarms, fetchAlarms } from '/alarms.js';
import { loadExercise } from '/exercise.js';
import { objectivesBlock, fetchObjectives, showEnded, endedWords } from '/objectives.js';

const POLL_MS = 2000;

// ------------------------------------------------------------------ seats

let seatsSeen = '';

// Also whether an exercise runs (it has seats): only then is there one to ask for.
async function refreshSeats() {
  const r = await apiFor('seats-read', '/api/v1/seats');
  if (!r) return;
  if (r.seats.length) await loadExercise();
  else app.exercise = null;
  $('seats-none').hidden = r.seats.length > 0;
  const table = $('seats-table');
  table.hidden = r.seats.length === 0;
  // Rebuilt only when something changed: rows that stay put can be read (and selected) meanwhile.
  const seen = JSON.stringify(r.seats);
  if (seen === seatsSeen) return;
  seatsSeen = seen;
  table.tBodies[0].replaceChildren(...r.seats.map((s) => {
    const tr = el('tr', {},
      el('td', {}, el('strong', { textContent: s.name }), el('small', { textContent: ` ${s.id}` })),
      el('td', { className: 'trainee', textContent: s.trainee || '-' }),
      el('td', { textContent: s.areas.join(', ') }),
      el('td', { className: 'code', textContent: s.join_code }),
      el('td', { className: s.joined ? 'joined' : 'waiting', textContent: s.joined ? `yes${s.streams ? `, ${s.streams} screen${s.streams > 1 ? 's' : ''}` : ''}` : 'not yet' }));
    tr.dataset.seat = s.id;
    return tr;
  }));
}

// ------------------------------------------------------------------ objectives, notes, end, debrief

// Every seat's objectives, one table each, its trainee's name (from the seats table) in the header.
async function refreshObjectives() {
  const r = await fetchObjectives(errorOutput('objectives-read'));
  if (!r) return;
  const trainee = (id) => $('seats-table').querySelector(`tr[data-seat="${CSS.escape(id)}"] td.trainee`)?.textContent;
  const seatName = (id) => app.exercise?.seats.find((x) => x.id === id)?.name ?? id;
  $('desk-objectives').replaceChildren(...r.seats.map((seat) => {
    const who = trainee(seat.seat);
    return objectivesBlock(seat, `${seatName(seat.seat)}${who && who !== '-' ? `: ${who}` : ''}`);
  }));
  if (!r.seats.length) $('desk-objectives').replaceChildren(el('p', { className: 'empty', textContent: 'no objectives in this exercise' }));
  $('do-end').disabled = r.ended;
}

async function refreshNotes() {
  const r = await apiFor('notes', '/api/v1/notes');
  if (!r) return;
  $('notes-list').replaceChildren(...r.notes.slice().reverse().map((n) => el('li', {},
    el('span', { className: 't', textContent: `${fmt(n.t_s, 1)} s` }), el('span', { className: 'note-text', textContent: n.text }))));
}

async function addNote() {
  const text = $('note-text').value.trim();
  if (!text) {
    errorOutput('notes').textContent = 'Type the note first.';
    return;
  }
  const r = await sendChange('notes', '/api/v1/notes', { text }, 'note kept');
  if (!r) return;
  $('note-text').value = '';
  refreshNotes();
}

async function endExercise() {
  if (!(await confirmAction('End the exercise now? The simulation pauses, the seats can send nothing more, and the run is kept as complete.', 'End exercise'))) return;
  const r = await sendChange('end', '/api/v1/control', { action: 'end' }, 'exercise ended');
  if (r) showEnded(true, endedWords(r.t_s, r.why));
  refreshObjectives();
}

// The run's debrief in a new tab, with a "save report" link (api.js: the records view shares it).
const openRunDebrief = () => openDebrief('/api/v1/debrief', errorOutput('debrief'), $('debrief-save'), app.exercise?.name);

// ------------------------------------------------------------------ script

const whenWords = (e) => {
  if (e.at_s != null) return `t = ${fmt(e.at_s, 1)} s`;
  const w = e.when;
  if (!w) return '-';
  if (w.kind === 'frequency_below') return `when ${w.area} stays below ${w.below_hz} Hz for ${w.for_s} s`;
  if (w.kind === 'tie_above') return `when tie ${w.tie} exceeds ${w.above_pct} % of pull-out`;
  return w.kind;
};
const stateWords = (e) => (e.state === 'fired' ? `fired at ${fmt(e.fired_at_s, 1)} s` : e.state);
let scriptSeen = '';

function scriptActions(e) {
  if (e.state !== 'pending') return [];
  const go = (verb, body, what) => sendChange('script', `/api/v1/script/${encodeURIComponent(e.id)}/${verb}`, body, what).then(refreshScript);
  const out = [
    button('Fire now', () => go('fire', {}, `script event ${e.id} fired: ${describeCommand(e.command)}`)),
    button('Skip', () => go('skip', {}, `script event ${e.id} skipped`), 'quiet'),
  ];
  if (e.at_s != null) {
    const id = `shift-${e.id}`;
    out.push(el('label', { className: 'inline' }, 'to t =', el('input', { id, type: 'number', step: 'any', min: 0, value: e.at_s })),
      button('Shift', () => {
        const v = readNumbers(id);
        if (v) go('shift', { at_s: v[id] }, `script event ${e.id} moved to t = ${fmt(v[id], 1)} s`);
      }, 'quiet'));
  }
  return out;
}

// The add form starts from an example: a load step a minute from now in the first area.
function exampleEvent() {
  if (!$('script-command').value && app.scenario) $('script-command').value = JSON.stringify({ kind: 'load_step', area: app.scenario.areas[0].id, mw: 50 });
  if (!$('script-at').value && app.last) $('script-at').value = Math.ceil(app.last.t_s / 10) * 10 + 60;
}

async function refreshScript() {
  exampleEvent();
  const r = await apiFor('script-read', '/api/v1/script');
  if (!r) return;
  const text = JSON.stringify(r.events);
  if (text === scriptSeen) return; // unchanged: typed shift times stay as they are
  scriptSeen = text;
  $('script-none').hidden = r.events.length > 0;
  const table = $('script-table');
  table.hidden = r.events.length === 0;
  table.tBodies[0].replaceChildren(...r.events.map((e) => {
    const tr = el('tr', { className: `script-${e.state}` },
      el('td', { textContent: e.id }),
      el('td', { textContent: whenWords(e) }),
      el('td', { textContent: describeCommand(e.command) }),
      el('td', { className: 'note', textContent: e.note + (e.added_by ? ` (added by ${authorName(e.added_by)})` : '') }),
      el('td', { className: 'state', textContent: stateWords(e) }),
      el('td', { className: 'actions' }, ...scriptActions(e)));
    tr.dataset.event = e.id;
    return tr;
  }));
}

// A plain scenario runs: no script to show (the route answers 404).
function showNoScript() {
  $('desk-objectives').replaceChildren(el('p', { className: 'empty', textContent: 'no exercise is running' }));
  scriptSeen = '';
  $('script-none').hidden = false;
  $('script-table').hidden = true;
}

async function addScriptEvent() {
  const v = readNumbers('script-at');
  if (!v) return;
  const out = document.querySelector('[data-error-for="script"]');
  let command;
  try {
    command = JSON.parse($('script-command').value);
  } catch {
    out.textContent = 'command: not JSON (for example {"kind": "load_step", "area": "west", "mw": 50})';
    return;
  }
  const r = await sendChange('script', '/api/v1/script', { at_s: v['script-at'], command, note: $('script-note').value },
    `script event added at t = ${fmt(v['script-at'], 1)} s: ${describeCommand(command)}`);
  if (r) refreshScript();
}

// ------------------------------------------------------------------ save points and rewind

async function refreshSavepoints() {
  const r = await apiFor('timeline-read', '/api/v1/savepoints');
  if (!r) return;
  $('rewind-range').textContent = r.rewind_from_s != null ? `from ${fmt(r.rewind_from_s, 1)} s to ${fmt(r.t_s, 1)} s` : '';
  $('rewind-s').min = r.rewind_from_s ?? 0;
  const table = $('savepoints-table');
  table.hidden = r.savepoints.length === 0;
  table.tBodies[0].replaceChildren(...r.savepoints.map((s) => el('tr', {},
    el('td', { textContent: s.name }), el('td', { textContent: fmt(s.t_s, 2) }),
    el('td', {}, button('Restore', async () => {
      if (!await confirmAction(`Restore save point "${s.name}"? The session goes back to t = ${fmt(s.t_s, 2)} s; what happened since is undone on every screen.`, 'Restore')) return;
      sendChange('timeline', `/api/v1/savepoints/${s.id}/restore`, {}, `save point "${s.name}" restored`);
    }, 'danger')))));
}

async function save() {
  const name = $('savepoint-name').value.trim() || `at ${fmt(app.last?.t_s, 1)} s`;
  const r = await sendChange('timeline', '/api/v1/savepoints', { name }, `save point "${name}" kept`);
  if (r) refreshSavepoints();
}

async function rewind() {
  const v = readNumbers('rewind-s');
  if (!v) return;
  const to = v['rewind-s'];
  if (!await confirmAction(`Rewind the session to t = ${fmt(to, 1)} s? What happened after it is undone on every screen.`, `Rewind to ${fmt(to, 1)} s`)) return;
  sendChange('timeline', '/api/v1/control', { action: 'rewind', to_s: to }, `rewound to t = ${fmt(to, 1)} s`);
}

// ------------------------------------------------------------------ exercise file

async function loadExerciseFile() {
  const file = $('exercise-file').files[0];
  if (!file) return;
  $('exercise-file').value = '';
  if (!await confirmAction(`Load the exercise in "${file.name}"? The running session ends, a new run starts at t = 0 and every seat gets a new join code.`, 'Load exercise')) return;
  await sendChange('exercise', '/api/v1/exercise', await file.text(), `exercise from "${file.name}" loaded`, 'PUT');
}

// ------------------------------------------------------------------ feed

/**
 * An event with an author goes to the action feed with the author's name, newest first in the
 * order they happened (the server's `seq`: after a rewind simulation time runs again). A restore
 * marks the actions it undid: those before it in order but after it in simulation time.
 */
export function feedEvent(e) {
  if (!e.by || app.view !== 'instructor') return;
  const feed = $('action-feed');
  const t = e.t_s ?? 0;
  const seq = e.seq ?? Number.MAX_SAFE_INTEGER;
  if (feed.querySelector(`li[data-seq="${seq}"]`)) return; // seen already (a greeting after a message)
  const li = el('li', {}, el('span', { className: 't', textContent: `${fmt(t, 2)} s` }),
    el('strong', { className: 'by', textContent: authorName(e.by) }), document.createTextNode(` ${e.text}`));
  Object.assign(li.dataset, { t, seq, by: e.by });
  const after = [...feed.children].find((x) => Number(x.dataset.seq) <= seq);
  feed.insertBefore(li, after ?? null);
  if (e.type === 'restored') {
    for (const x of feed.children) {
      if (Number(x.dataset.seq) < seq && Number(x.dataset.t) > t + 1e-9 && !x.classList.contains('undone')) {
        x.classList.add('undone');
        x.append(el('small', { textContent: ' (undone)' }));
      }
    }
  }
  while (feed.children.length > 200) feed.lastChild.remove();
}

/** A new greeting: the feed is rebuilt from its events. */
export const clearFeed = () => { if (app.view === 'instructor') $('action-feed').replaceChildren(); };

// ------------------------------------------------------------------ wiring

/** Everything read again (after unlocking, after each greeting, and every POLL_MS). */
export async function refreshDesk() {
  if (!app.instructor) return;
  await Promise.all([
    refreshSeats().then(() => (app.exercise ? Promise.all([refreshScript(), refreshObjectives()]) : showNoScript())),
    refreshSavepoints(), refreshNotes()]);
}

/** Makes the panels from their template and wires them. */
export function makeDesk() {
  $('desk-slot').replaceWith($('desk-panels').content.cloneNode(true));
  onAlarms(() => renderAlarms($('desk-alarms'), alarmsNow('all'), { canAck: (a) => a.cleared_s == null || !a.acked_by }));
  $('do-save').addEventListener('click', save);
  $('do-rewind').addEventListener('click', rewind);
  $('do-script-add').addEventListener('click', addScriptEvent);
  $('exercise-file').addEventListener('change', loadExerciseFile);
  $('do-note').addEventListener('click', addNote);
  $('do-end').addEventListener('click', endExercise);
  $('do-debrief').addEventListener('click', openRunDebrief);
  setInterval(() => { if (app.instructor && !document.hidden) refreshDesk(); }, POLL_MS);
}

/** Once unlocked: the panels filled and every alarm fetched. */
export async function unlockedDesk() {
  await refreshDesk();
  await fetchAlarms();
}
