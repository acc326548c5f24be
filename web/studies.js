// Studies of the loaded scenario: small-signal modes, requirement checks of a posted file,
// parameter sweeps (instructor) and COMTRADE records of a window of the live history.
import { app, $, fmt, errorOutput } from '/state.js';
import { api, apiFor, ApiError } from '/api.js';
import { fillTable } from '/tables.js';
import { numberProblem, readNumbers } from '/controls.js';

const MODE_COLUMNS = [
  (m, i) => `${i + 1}${m.flagged ? ' !' : ''}`,
  (m) => m.kind,
  (m) => fmt(m.real_per_s, 4),
  (m) => fmt(m.imag_rad_per_s, 4),
  (m) => (m.kind === 'oscillatory' ? fmt(m.frequency_hz, 3) : '-'),
  (m) => (m.kind === 'oscillatory' ? `${fmt(m.damping_ratio * 100, 1)} %`
    : m.kind === 'real' ? `T ${fmt(m.time_constant_s, 3)} s` : '-'),
  (m) => m.participation.filter((p) => p.share >= 0.05).map((p) => `${p.state} ${fmt(p.share * 100, 0)}%`).join(', '),
];

async function analyseModes() {
  const body = await apiFor('modes', '/api/v1/modes');
  if (!body) return;
  const leastDamped = body.modes.findIndex((m) => m.kind === 'oscillatory');
  fillTable($('modes-table'), MODE_COLUMNS, body.modes, {
    rowClass: (m, i) => [i === leastDamped && 'least', m.flagged && 'flagged'].filter(Boolean).join(' '),
  });
  $('modes-notes').replaceChildren(...body.notes.map((n) => Object.assign(document.createElement('li'), { textContent: n })));
}

// The record links carry the window while both fields hold numbers; otherwise they have no
// address, and a click shows what is wrong beside the field.
function syncRecordLinks() {
  const valid = !numberProblem($('rec-from')) && !numberProblem($('rec-to'));
  const q = `from_s=${encodeURIComponent($('rec-from').value)}&to_s=${encodeURIComponent($('rec-to').value)}`;
  for (const part of ['cfg', 'dat']) {
    const a = $(`rec-${part}`);
    if (valid) a.href = `/api/v1/record?${q}&part=${part}`;
    else a.removeAttribute('href');
    a.setAttribute('aria-disabled', String(!valid));
  }
}

const digits = (c) => (c.unit === 'Hz' ? 3 : 2);
const ASSESS_COLUMNS = [
  (c) => c.requirement + (c.detail ? ` (${c.detail})` : ''),
  (c) => `${c.relation} ${fmt(c.limit, digits(c))} ${c.unit}`,
  (c) => (c.measured == null ? '-' : `${fmt(c.measured, digits(c))} ${c.unit}`),
  (c) => (c.margin == null ? '-' : `${c.margin >= 0 ? '+' : ''}${fmt(c.margin, digits(c))}`),
  (c) => c.result,
  (c) => c.source,
];

async function assessFile() {
  const file = $('assess-file').files[0];
  if (!file) return;
  $('assess-verdict').textContent = 'running the scenario...';
  const body = await apiFor('assess', '/api/v1/assess', { method: 'POST', body: await file.text() });
  if (!body) {
    $('assess-verdict').textContent = '';
    return;
  }
  fillTable($('assess-table'), ASSESS_COLUMNS, body.checks, { rowClass: (c) => (c.result === 'fail' ? 'fail' : '') });
  const verdict = body.verdict ?? (body.passed ? 'all requirements met' : 'requirements NOT met');
  $('assess-verdict').textContent = `${verdict[0].toUpperCase()}${verdict.slice(1)}.`;
}

const SWEEP_FOR_INSTRUCTOR = 'Sweeps are for the instructor: unlock with the instructor token to run one.';
const SWEEP_METRICS = ['nadir_hz', 'settling_hz', 'rocof_hz_per_s', 'shed_mw'];

/** Once the controls are unlocked, the note that sweeps are for the instructor goes. */
export function clearSweepNote() {
  const note = errorOutput('sweep');
  if (note.textContent === SWEEP_FOR_INSTRUCTOR) note.textContent = '';
}

async function runSweep() {
  const out = errorOutput('sweep');
  out.textContent = '';
  if (!app.instructor) {
    out.textContent = SWEEP_FOR_INSTRUCTOR;
    return;
  }
  const vary = $('sweep-vary').value.split('\n').map((l) => l.trim()).filter(Boolean);
  const metric = $('sweep-metric').value;
  let job;
  try {
    job = await api('/api/v1/sweeps', { method: 'POST', body: { vary, metric } });
    app.sweepJob = job.id;
    $('do-sweep-cancel').hidden = false;
    while (job.status === 'running') {
      $('sweep-progress').textContent = `${job.done} of ${job.total || '?'} runs`;
      await new Promise((r) => setTimeout(r, 400));
      job = await api(`/api/v1/sweeps/${job.id}`);
    }
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    out.textContent = e.status === 401 ? SWEEP_FOR_INSTRUCTOR : e.message;
    return;
  } finally {
    $('do-sweep-cancel').hidden = true;
  }
  $('sweep-progress').textContent = `${job.status}: ${job.done} runs in ${fmt(job.wall_s, 1)} s`;
  if (job.status === 'failed') {
    out.textContent = job.error;
    return;
  }
  const result = await apiFor('sweep', `/api/v1/sweeps/${job.id}/result`);
  if (!result) return;
  const paths = result.sweep.vary.map((v) => v.path);
  const shown = [metric, ...SWEEP_METRICS.filter((m) => m !== metric)];
  fillTable($('sweep-table'), [
    ...paths.map((label, i) => ({ label, value: (r) => String(r.values[i]) })),
    { label: 'status', value: (r) => r.status },
    ...shown.map((label) => ({ label, value: (r) => (r.metrics ? fmt(r.metrics[label], 4) : '-') })),
  ], result.rows);
  if (paths.length <= 2) {
    $('sweep-plot').src = `/api/v1/sweeps/${job.id}/result?format=svg`;
    $('sweep-plot').hidden = false;
  }
}

/** Wires the study cards. */
export function wireStudies() {
  $('do-modes').addEventListener('click', analyseModes);
  $('assess-file').addEventListener('change', assessFile);
  $('do-sweep').addEventListener('click', runSweep);
  $('do-sweep-cancel').addEventListener('click', () => apiFor('sweep', `/api/v1/sweeps/${app.sweepJob}`, { method: 'DELETE' }));
  for (const id of ['rec-from', 'rec-to']) $(id).addEventListener('input', syncRecordLinks);
  for (const id of ['rec-cfg', 'rec-dat'])
    $(id).addEventListener('click', (ev) => { if (!readNumbers('rec-from', 'rec-to')) ev.preventDefault(); });
  syncRecordLinks();
}
