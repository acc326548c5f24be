// The records view (`/?view=records`, the instructor's token as the instructor view gets it): the
// records file's health, past runs with filters (trainee, exercise, dates), each run's seats,
// trainees and scores with its debrief and notes written after the session, each trainee's progress
// over attempts (a small line per exercise and a table), and the CSV export with the same filters.
// Every string from the server goes in as text: trainee names are typed by anyone on the LAN.
import { $, fmt, el, button, errorOutput } from '/state.js';
import { api, apiFor, ApiError, fetchFile, openDebrief } from '/api.js';
import { fillTable } from '/tables.js';

const SVG = 'http://www.w3.org/2000/svg';
const svg = (tag, attrs = {}) => {
  const e = document.createElementNS(SVG, tag);
  for (const [k, v] of Object.entries(attrs)) e.setAttribute(k, v);
  return e;
};

// "2026-12-03T23:50:12Z" as "2026-12-03 23:50" (UTC, as the filters are).
const when = (iso) => (iso ? `${iso.slice(0, 10)} ${iso.slice(11, 16)}` : '-');
const scoreText = (v) => (v == null ? 'not scored' : fmt(v, 1));

/** A run's status in words: complete, running, or incomplete with why. */
export function statusWords(run) {
  if (run.status === 'incomplete') return `incomplete${run.why ? `: ${run.why}` : ''}`;
  if (run.status === 'complete') return `complete${run.why ? ` (${run.why})` : ''}`;
  return run.status;
}

// ------------------------------------------------------------------ filters

const FILTERS = { trainee: 'records-trainee', exercise: 'records-exercise', from: 'records-date-from', to: 'records-date-to' };

/** The filters as a query string ('' without any). */
function query() {
  const q = new URLSearchParams();
  for (const [key, id] of Object.entries(FILTERS)) {
    const v = $(id).value.trim();
    if (v) q.set(key, v);
  }
  const text = q.toString();
  return text ? `?${text}` : '';
}

// ------------------------------------------------------------------ status

async function refreshStatus() {
  const r = await apiFor('records', '/api/v1/records/status');
  const line = $('records-status');
  if (!r) {
    line.textContent = 'The records could not be read (see below).';
    return false;
  }
  line.className = `records-status ${r.ok ? 'ok' : 'bad'}`;
  if (!r.file) line.textContent = 'No training records are kept: the service runs without a records file (start it with --records FILE, or with --journal).';
  else if (!r.ok) line.textContent = `The records file ${r.file} cannot be written: ${r.error || 'unknown reason'}. The session goes on without records; what is listed below is what the file held.`;
  else line.textContent = `Records kept in ${r.file}.`;
  return Boolean(r.file);
}

// ------------------------------------------------------------------ runs

const SEAT_COLUMNS = [
  { label: 'seat', value: (s) => s.name || s.seat },
  { label: 'trainee', value: (s) => (s.trainees.length ? s.trainees.join(', ') : 'nobody joined') },
  { label: 'score / 100', value: (s) => `${scoreText(s.score)}${s.score != null && !s.final ? ' (so far)' : ''}` },
];

function runNotes(list, notes) {
  list.replaceChildren(...notes.map((n) => el('li', {},
    el('span', { className: 't', textContent: n.t_s == null ? 'after' : `${fmt(n.t_s, 1)} s` }),
    el('span', { className: 'note-text', textContent: n.text }))));
}

function runCard(run) {
  const out = el('output', { className: 'error', role: 'alert' });
  const save = el('a', { hidden: true, textContent: 'save report' });
  const notes = el('ul', { className: 'notes run-notes' });
  const text = el('textarea', { rows: 2, maxLength: 4000, placeholder: 'a note for this run' });
  const addNote = async () => {
    const t = text.value.trim();
    out.textContent = '';
    if (!t) {
      out.textContent = 'Type the note first.';
      return;
    }
    try {
      await api(`/api/v1/records/runs/${run.run_id}/notes`, { method: 'POST', body: { text: t } });
      text.value = '';
      const full = await api(`/api/v1/records/runs/${run.run_id}`);
      runNotes(notes, full.notes ?? []);
    } catch (e) {
      if (!(e instanceof ApiError)) throw e;
      out.textContent = `Note not kept: ${e.message}`;
    }
  };
  const seats = el('table', { className: 'grid record-seats' }, el('thead'), el('tbody'));
  fillTable(seats, SEAT_COLUMNS, run.seats);
  const status = el('span', { className: `run-status status-${run.status}`, textContent: statusWords(run) });
  const card = el('article', { className: 'record-run' },
    el('h4', {},
      el('span', { className: 'run-when', textContent: when(run.started) }),
      el('span', { className: 'run-exercise', textContent: run.exercise || run.scenario || '(no name)' }),
      status),
    run.seats.length ? seats : el('p', { className: 'empty', textContent: 'no seats (a plain scenario)' }),
    notes,
    el('div', { className: 'row' },
      button('Debrief', () => openDebrief(`/api/v1/records/runs/${run.run_id}/debrief`, out, save, run.exercise)),
      save,
      el('details', { className: 'run-note' }, el('summary', { textContent: 'Add note' }),
        el('label', { className: 'wide' }, 'note (kept with the run, in its debrief)', text),
        button('Add note', addNote, 'quiet'))),
    out);
  card.dataset.run = run.run_id;
  return card;
}

async function refreshRuns(asked) {
  const r = await apiFor('records', `/api/v1/records/runs${query()}`);
  if (!r || asked !== reads) return;  // a newer filter's answer is coming
  $('records-run-count').textContent = `${r.runs.length} run${r.runs.length === 1 ? '' : 's'}`;
  $('records-runs').replaceChildren(...(r.runs.length ? r.runs.map(runCard)
    : [el('p', { className: 'empty', textContent: query() ? 'no run matches these filters' : 'no runs recorded yet' })]));
  const exercises = [...new Set(r.runs.map((x) => x.exercise).filter(Boolean))];
  if (!query()) $('records-exercise-names').replaceChildren(...exercises.map((x) => el('option', { value: x })));
}

// ------------------------------------------------------------------ progress

const W = 260, H = 110, PAD = { l: 30, r: 14, t: 16, b: 16 };

/** Scores 0..100 per attempt in date order as a small line, each point labelled with its score. */
export function progressLine(attempts) {
  const scored = attempts.filter((a) => a.score != null);
  const x = (i) => PAD.l + (scored.length > 1 ? (i / (scored.length - 1)) * (W - PAD.l - PAD.r) : (W - PAD.l - PAD.r) / 2);
  const y = (s) => PAD.t + ((100 - s) / 100) * (H - PAD.t - PAD.b);
  const root = svg('svg', { viewBox: `0 0 ${W} ${H}`, class: 'progress-line', role: 'img' });
  const title = svg('title');
  title.textContent = `scores by attempt: ${scored.map((a) => fmt(a.score, 0)).join(', ') || 'none yet'}`;
  root.append(title);
  for (const s of [0, 50, 100]) {
    root.append(svg('line', { x1: PAD.l, x2: W - PAD.r, y1: y(s), y2: y(s), class: 'grid-line' }));
    const t = svg('text', { x: PAD.l - 4, y: y(s) + 3, 'text-anchor': 'end', class: 'axis' });
    t.textContent = String(s);
    root.append(t);
  }
  if (scored.length > 1) root.append(svg('polyline', { points: scored.map((a, i) => `${x(i)},${y(a.score)}`).join(' '), class: 'line' }));
  scored.forEach((a, i) => {
    root.append(svg('circle', { cx: x(i), cy: y(a.score), r: 3.5, class: 'point' }));
    const t = svg('text', { x: x(i), y: y(a.score) - 6, 'text-anchor': 'middle', class: 'score' });
    t.textContent = fmt(a.score, 0);
    root.append(t);
  });
  return root;
}

const ATTEMPT_COLUMNS = [
  { label: 'date', value: (a) => when(a.started) },
  { label: 'exercise', value: (a) => a.exercise },
  { label: 'seat', value: (a) => a.seat },
  { label: 'score / 100', value: (a) => `${scoreText(a.score)}${a.status === 'incomplete' ? ' (incomplete)' : ''}` },
];

function traineeBlock(t) {
  const byExercise = new Map();
  for (const a of t.attempts) {
    if (!byExercise.has(a.exercise)) byExercise.set(a.exercise, []);
    byExercise.get(a.exercise).push(a);
  }
  const table = el('table', { className: 'grid attempts' }, el('thead'), el('tbody'));
  fillTable(table, ATTEMPT_COLUMNS, t.attempts);
  const block = el('section', { className: 'trainee-progress' },
    el('h4', { textContent: `${t.name}: ${t.attempts.length} attempt${t.attempts.length === 1 ? '' : 's'}` }),
    el('div', { className: 'progress-lines' }, ...[...byExercise].map(([exercise, attempts]) => el('figure', {},
      el('figcaption', { textContent: exercise || '(no name)' }), progressLine(attempts)))),
    table);
  block.dataset.trainee = t.name;
  return block;
}

async function refreshProgress(asked) {
  const r = await apiFor('records-progress', '/api/v1/records/trainees');
  if (!r || asked !== reads) return;
  const wanted = $('records-trainee').value.trim();
  // As the server filters the runs: any part of the name, whatever the case.
  const shown = wanted ? r.trainees.filter((t) => t.name.toLowerCase().includes(wanted.toLowerCase())) : r.trainees;
  $('records-progress').replaceChildren(...(shown.length ? shown.map(traineeBlock)
    : [el('p', { className: 'empty', textContent: wanted ? 'no attempts by this trainee' : 'no trainees yet' })]));
  $('records-trainee-names').replaceChildren(...r.trainees.map((t) => el('option', { value: t.name })));
}

// ------------------------------------------------------------------ export

let exportUrl = '';
async function exportCsv() {
  const out = errorOutput('records');
  out.textContent = '';
  let url;
  try {
    url = await fetchFile(`/api/v1/records/export.csv${query()}`, 'text/csv');
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    out.textContent = `No export: ${e.message}`;
    return;
  }
  if (exportUrl) URL.revokeObjectURL(exportUrl);
  exportUrl = url;
  const link = $('records-export-save');
  link.href = url;
  link.download = `droopline-records-${new Date().toISOString().slice(0, 10)}.csv`;
  link.hidden = false;
  link.click();
}

// ------------------------------------------------------------------ wiring

// Each refresh is numbered: answers to an older one (the filter changed again before they came)
// are dropped, so a slow answer never replaces a newer one.
let reads = 0;

/** Everything read again (once unlocked, after a filter changes). */
export async function refreshRecords() {
  const asked = ++reads;
  if (!(await refreshStatus())) return;
  await Promise.all([refreshRuns(asked), refreshProgress(asked)]);
}

/** Makes the records panels from their template and wires them. */
export function makeRecords() {
  $('records-slot').replaceWith($('records-panels').content.cloneNode(true));
  $('records-filter').addEventListener('submit', (ev) => { ev.preventDefault(); refreshRecords(); });
  $('records-clear').addEventListener('click', () => {
    for (const id of Object.values(FILTERS)) $(id).value = '';
    refreshRecords();
  });
  $('records-export').addEventListener('click', exportCsv);
}
