// The model-validation panel of the studies (instructor): a unit's model fitted to a recorded event
// (a CSV, or a COMTRADE pair) as a job on the server (POST /api/v1/fits, its progress polled,
// Cancel), the result (each value with its uncertainty, the warnings, the fit quality before and
// after, the measured, initial and fitted output, the fitted unit and the plot to download), and
// injection tests of a profile file against a unit (POST /api/v1/injections). Server text only
// ever lands in textContent, or in an <img> from a Blob URL (an SVG shown there runs no script).
import uPlot from '/node_modules/uplot/dist/uPlot.esm.js';
import { app, $, el, button, fmt, errorOutput } from '/state.js';
import { api, ApiError, FOR_INSTRUCTOR, fetchFile } from '/api.js';
import { fillTable } from '/tables.js';
import { readNumbers, showFieldProblem } from '/controls.js';
import { recordingOf, csvColumns, cfgInfo, base64Of, sizeText } from '/recording.js';

const POLL_MS = 500;
const MAX_PARAMS = 8; // the server's limit on one fit
const fit = { picked: null, job: null, generation: 0, sent: null, chart: null, urls: [], rows: 0 };
let injectUrls = [];
let loadedScenario = null; // the scenario of the last hello: the base the fitted values are tried in

// ------------------------------------------------------------------ parameters of a unit

const unitOf = (id) => app.scenario?.units.find((u) => u.id === id);

// The usual paths of a unit, each with its value in the loaded scenario: the governor's droop, lag
// and deadband, every number of its turbine but the battery's store, its ramp limit when it has one.
function paramsOf(u) {
  const list = ['droop', 'lag_s', 'deadband_hz'].map((k) => [`governor.${k}`, u.governor[k]]);
  for (const [k, v] of Object.entries(u.turbine))
    if (typeof v === 'number' && !['energy_mwh', 'soc'].includes(k)) list.push([`turbine.${k}`, v]);
  if (u.ramp_mw_per_s != null) list.push(['ramp_mw_per_s', u.ramp_mw_per_s]);
  return list;
}

// A first range around the scenario's value (from 0.4 to 2.5 times it; from 0 when it is 0), for
// the instructor to narrow: the server refuses what a scenario could not hold, with the reason.
const ZERO_SPAN = { 'governor.deadband_hz': 0.05, 'turbine.synthetic_inertia_s': 10 };
const round2 = (v) => Number(v.toPrecision(2));
function defaultBounds(path, value) {
  if (!(value > 0)) return [0, ZERO_SPAN[path] ?? 1];
  const hi = round2(value * 2.5);
  return [round2(value * 0.4), path.endsWith('fraction') ? Math.min(hi, 0.9) : hi];
}

const paramRows = () => [...$('fit-params').tBodies[0].rows];

function addParamRow(wanted) {
  const u = unitOf($('fit-unit').value);
  if (!u || paramRows().length >= MAX_PARAMS) return;
  const n = ++fit.rows;
  const choices = paramsOf(u);
  const taken = new Set(paramRows().map((r) => r.querySelector('select').value));
  const path = choices.find(([p]) => p === wanted)?.[0] ?? choices.find(([p]) => !taken.has(p))?.[0] ?? choices[0][0];
  const select = el('select', { id: `fit-path-${n}` }, ...choices.map(([p]) => new Option(p, p)));
  select.value = path;
  select.setAttribute('aria-label', 'parameter');
  const number = (id, what) => {
    const input = el('input', { id, type: 'number', step: 'any' });
    input.setAttribute('aria-label', `${what} bound`);
    return input;
  };
  const low = number(`fit-lo-${n}`, 'low'), high = number(`fit-hi-${n}`, 'high');
  const setBounds = () => {
    [low.value, high.value] = defaultBounds(select.value, choices.find(([p]) => p === select.value)[1]);
    for (const x of [select, low, high]) showFieldProblem(x, '');
  };
  select.addEventListener('change', setBounds);
  const remove = button('Remove', () => { tr.remove(); syncAddButton(); }, 'quiet');
  const tr = el('tr', {}, ...[select, low, high].map((x) => el('td', {}, el('label', {}, x))), el('td', {}, remove));
  $('fit-params').tBodies[0].append(tr);
  setBounds();
  syncAddButton();
}

const syncAddButton = () => { $('fit-add-param').disabled = paramRows().length >= MAX_PARAMS; };

// The rows' paths and bounds, or null when a row is refused (shown beside its field).
function readParams(values) {
  const rows = paramRows().map((tr) => {
    const [select, low, high] = tr.querySelectorAll('select, input');
    return { select, high, path: select.value, lo: values[low.id], hi: values[high.id] };
  });
  let ok = true;
  const seen = new Set();
  for (const r of rows) {
    const twice = seen.has(r.path);
    seen.add(r.path);
    showFieldProblem(r.select, twice ? 'chosen twice' : '');
    showFieldProblem(r.high, r.lo < r.hi ? '' : 'must be above low');
    ok &&= !twice && r.lo < r.hi;
  }
  return ok ? rows : null;
}

// ------------------------------------------------------------------ the recording

function showPicked(files) {
  const list = [...files].map((f) => el('li', { textContent: `${f.name}, ${sizeText(f.size)}` }));
  $('fit-picked').replaceChildren(...(list.length ? list : [el('li', { className: 'empty', textContent: 'nothing picked yet' })]));
}

async function pickRecording() {
  const out = errorOutput('fit-file');
  out.textContent = '';
  fit.picked = null;
  $('fit-columns').hidden = true;
  const files = $('fit-file').files;
  showPicked(files);
  if (!files.length) return;
  try {
    const rec = recordingOf(files);
    if (rec.kind === 'csv') {
      rec.names = csvColumns(await rec.csv.slice(0, 1 << 16).text());
    } else {
      const info = cfgInfo(await rec.cfg.text(), rec.cfg.name);
      rec.names = info.channels.map((c) => c.id);
      rec.units = info.channels.map((c) => c.unit);
      rec.type = info.type;
    }
    fit.picked = rec;
  } catch (e) {
    out.textContent = e.message;
    return;
  }
  const p = fit.picked;
  $('fit-picked').append(el('li', { className: 'what', textContent: p.kind === 'csv'
    ? `CSV with ${p.names.length} columns`
    : `COMTRADE, ${p.type.toUpperCase()} data (sent ${p.type === 'ascii' ? 'as text' : 'in base64'}), ${p.names.length} analog channels` }));
  fillColumns();
}

// The column choices with droopline's own names as defaults (as the command line); a default the
// file does not hold is offered as "not in this file" and left for the server to name.
function fillColumns() {
  const p = fit.picked;
  if (!p) return;
  const u = unitOf($('fit-unit').value);
  const label = (name, i) => (p.units?.[i] ? `${name} (${p.units[i]})` : name);
  const fill = (id, wanted) => {
    const options = p.names.map((n, i) => new Option(label(n, i), n));
    if (!p.names.includes(wanted)) options.unshift(new Option(`${wanted}: not in this file`, ''));
    $(id).replaceChildren(...options);
    $(id).value = p.names.includes(wanted) ? wanted : '';
  };
  fill('fit-time-col', 't_s');
  fill('fit-freq-col', u ? `${u.area}.f_hz` : '');
  fill('fit-power-col', u ? `${u.id}.p_mw` : '');
  $('fit-time-box').hidden = p.kind !== 'csv';
  $('fit-columns').hidden = false;
}

async function recordingBody(bases) {
  const p = fit.picked;
  const r = p.kind === 'csv'
    ? { format: 'csv', text: await p.csv.text() }
    : { format: 'comtrade', cfg: await p.cfg.text(), ...(p.type === 'ascii' ? { dat: await p.dat.text() } : { dat_base64: await base64Of(p.dat) }) };
  const columns = [['time_column', 'fit-time-col'], ['frequency_column', 'fit-freq-col'], ['power_column', 'fit-power-col']];
  for (const [field, id] of columns) if ($(id).value && !(field === 'time_column' && p.kind !== 'csv')) r[field] = $(id).value;
  if (bases) Object.assign(r, bases);
  return r;
}

// ------------------------------------------------------------------ running a fit

/** The server's refusal in words: its message, then each of its details on a line of its own. */
function showProblem(out, e) {
  if (!(e instanceof ApiError)) throw e;
  if (e.status === 401) {
    out.textContent = FOR_INSTRUCTOR;
    return;
  }
  const head = e.status === 429 ? `${e.headline} (one fit runs at a time: wait for it to end, or cancel it)` : e.headline;
  out.replaceChildren(...[head, ...e.lines].map((t) => el('span', { className: 'line', textContent: t })));
}

const pause = (ms) => new Promise((r) => setTimeout(r, ms));

function clearResult() {
  $('fit-result').hidden = true;
  fit.chart?.destroy();
  fit.chart = null;
  app.fitChart = null;
  for (const u of fit.urls) URL.revokeObjectURL(u);
  fit.urls = [];
  for (const id of ['fit-fragment', 'fit-svg']) $(id).hidden = true;
  $('fit-chart').replaceChildren();
}

async function runFit() {
  const out = errorOutput('fit');
  out.textContent = '';
  const numbers = ['fit-base-mw', 'fit-base-hz', 'fit-starts', 'fit-seed',
    ...paramRows().flatMap((tr) => [...tr.querySelectorAll('input')].map((x) => x.id))];
  const v = readNumbers(...numbers);
  const rows = v && readParams(v);
  if (!rows) return;
  const [mw, hz] = [v['fit-base-mw'], v['fit-base-hz']];
  if ((mw == null) !== (hz == null)) {
    showFieldProblem($(mw == null ? 'fit-base-mw' : 'fit-base-hz'), 'give both bases, or neither');
    return;
  }
  if (!rows.length) {
    out.textContent = 'Add at least one parameter to fit (step 2).';
    return;
  }
  if (!fit.picked) {
    out.textContent = 'Pick a recording first (step 1).';
    return;
  }
  const name = fit.picked.kind === 'csv' ? fit.picked.csv.name : fit.picked.cfg.name;
  let recording;
  try {
    recording = await recordingBody(mw == null ? null : { base_mw: mw, base_hz: hz });
  } catch (e) { // the file changed or went since it was picked
    out.textContent = `Could not read ${name} again (${e.message}): pick it once more.`;
    return;
  }
  const body = {
    unit: $('fit-unit').value,
    params: rows.map((r) => `${r.path}=${r.lo}:${r.hi}`),
    starts: v['fit-starts'],
    seed: v['fit-seed'],
    recording,
    name,
  };
  const mine = ++fit.generation;
  clearResult();
  fit.sent = { rows, name };
  $('do-fit').disabled = true;
  $('fit-progress').textContent = 'sending the recording...';
  try {
    let job = await api('/api/v1/fits', { method: 'POST', body });
    fit.job = job.id;
    app.fitJob = job.id; // for the browser tests
    $('do-fit-cancel').hidden = false;
    $('fit-bar').hidden = false;
    while (job.status === 'running') {
      $('fit-bar').max = Math.max(1, job.total);
      $('fit-bar').value = job.done;
      $('fit-progress').textContent = `fitting ${job.unit}: ${job.done} of ${job.total || '?'} model runs`;
      await pause(POLL_MS);
      if (mine !== fit.generation) return;
      job = await api(`/api/v1/fits/${encodeURIComponent(job.id)}`);
    }
    $('fit-progress').textContent = `${job.status}: ${job.done} of ${job.total} model runs${job.wall_s != null ? ` in ${fmt(job.wall_s, 1)} s` : ''}`;
    if (job.status === 'failed') out.replaceChildren(el('span', { className: 'line', textContent: `The fit failed: ${job.error ?? 'no reason given'}` }));
    if (job.status !== 'done') return;
    const result = await api(`/api/v1/fits/${encodeURIComponent(job.id)}/result?format=json`);
    if (mine === fit.generation) await showResult(job, result);
  } catch (e) {
    $('fit-progress').textContent = '';
    showProblem(out, e);
  } finally {
    if (mine === fit.generation) {
      $('do-fit').disabled = false;
      $('do-fit-cancel').hidden = true;
      $('fit-bar').hidden = true;
    }
  }
}

async function cancelFit() {
  if (!fit.job) return;
  try {
    await api(`/api/v1/fits/${encodeURIComponent(fit.job)}`, { method: 'DELETE' });
  } catch (e) {
    showProblem(errorOutput('fit'), e);
  }
}

// ------------------------------------------------------------------ the result

const sig = (v, digits) => (v == null || !Number.isFinite(v) ? '-' : String(Number(Number(v).toPrecision(digits))));

async function showResult(job, r) {
  const paths = Object.keys(r.params);
  const bounds = new Map(fit.sent.rows.map((x) => [x.path, `${x.lo} to ${x.hi}`]));
  $('fit-result-title').textContent = `4. Result: unit ${r.unit}, fitted to ${fit.sent.name}`;
  const counts = [r.samples != null && `${r.samples} samples`, r.evaluations != null && `${r.evaluations} model runs`,
    job.wall_s != null && `${fmt(job.wall_s, 1)} s on the server`].filter(Boolean);
  $('fit-summary').textContent = counts.join(', ');
  fillTable($('fit-table'), [
    { label: 'parameter', value: (p) => p },
    { label: 'range searched', value: (p) => bounds.get(p) ?? '-' },
    { label: 'initial (scenario)', value: (p) => sig(r.initial[p], 5) },
    { label: 'fitted', value: (p) => sig(r.params[p], 5) },
    { label: '± 1 sigma', value: (p) => (r.uncertainty[p] == null ? 'not given' : `± ${sig(r.uncertainty[p], 2)}`) },
  ], paths);
  fillTable($('fit-quality'), [
    { label: 'fit quality', value: (q) => q[0] },
    { label: 'before (scenario values)', value: (q) => q[1] },
    { label: 'after (fitted)', value: (q) => q[2] },
  ], [['RMSE, MW', sig(r.rmse_before, 4), sig(r.rmse_after, 4)], ['R²', fmt(r.r2_before, 5), fmt(r.r2_after, 5)]]);
  fillTable($('fit-correlation'), [
    { label: 'correlation', value: (a) => a },
    ...paths.map((b) => ({ label: b, value: (a) => fmt(r.correlation?.[a]?.[b], 3) })),
  ], paths);
  const warnings = r.warnings ?? [];
  $('fit-warnings').replaceChildren(...(warnings.length
    ? warnings.map((w) => el('li', { textContent: `Warning: ${w}` }))
    : [el('li', { className: 'empty', textContent: 'No warnings: no value on its bound, no two parameters this recording cannot tell apart.' })]));
  $('fit-result').hidden = false;
  // The injection tests may now run on the fitted values of this unit.
  fit.fitted = r.fragment ? { unit: r.unit, fragment: r.fragment } : null;
  const fitted = $('inject-model').options[1];
  fitted.disabled = !fit.fitted;
  fitted.textContent = fit.fitted ? `the fitted values of ${r.unit}` : 'the fitted values (fit first)';
  drawFit(r);
  const base = `/api/v1/fits/${encodeURIComponent(job.id)}/result?format=`;
  const links = [['fit-fragment', 'fragment', 'application/json', `fit_${r.unit}.fragment.json`], ['fit-svg', 'svg', 'image/svg+xml', `fit_${r.unit}.svg`]];
  try {
    for (const [id, format, type, name] of links) {
      const url = await fetchFile(base + format, type);
      fit.urls.push(url);
      Object.assign($(id), { href: url, download: name, hidden: false });
      if (format === 'svg' && !r.series) $('fit-chart').replaceChildren(el('img', { src: url, alt: `fit of ${r.unit}: measured, initial and fitted output` }));
    }
  } catch (e) {
    showProblem(errorOutput('fit'), e);
  }
}

// The plot's size: its card's width, a share of the window's height.
const fitChartSize = () => ({ width: Math.max(300, $('fit-chart').clientWidth), height: Math.max(220, Math.round(window.innerHeight * 0.32)) });

// The measured, initial and fitted output against time, from the result's series.
function drawFit(r) {
  const s = r.series;
  if (!s) return;
  const box = $('fit-chart');
  const value = (u, v) => (v == null ? '-' : v.toFixed(2));
  fit.chart = new uPlot({
    ...fitChartSize(),
    scales: { x: { time: false } },
    axes: [{ label: 'time, s' }, { label: 'output, MW' }],
    cursor: { drag: { x: true, y: false } },
    series: [{ label: 't s' },
      // The measured line wide and pale under the others: a close fit still shows both.
      { label: 'measured', stroke: '#9aa5b1', width: 4, value },
      { label: 'initial (scenario values)', stroke: '#aa3a28', width: 1.5, dash: [6, 4], value },
      { label: 'fitted', stroke: '#0b3d91', width: 1.5, value }],
  }, [s.t_s, s.measured_mw, s.initial_mw, s.fitted_mw], box);
  app.fitChart = fit.chart; // for the browser tests
}

// ------------------------------------------------------------------ injection tests

const orNot = (v, d) => (v == null ? 'not reached' : fmt(v, d));
const signed = (v, d) => (v == null ? '-' : `${v > 0 ? '+' : ''}${fmt(v, d)}`);
const INJECT_COLUMNS = [
  (t) => t.name,
  (t) => `${fmt(t.require.share * 100, 0)} %`,
  (t) => fmt(t.require.within_s, 1),
  (t) => fmt(t.require.hold_s, 1),
  (t) => fmt(t.require.max_delay_s, 1),
  (t) => signed(t.expected_mw, 2),
  (t) => orNot(t.delay_s, 2),
  (t) => orNot(t.reached_s, 2),
  (t) => (t.held_share == null ? '-' : `${fmt(t.held_share * 100, 2)} %`),
  (t) => signed(t.margins.delay_s, 2),
  (t) => signed(t.margins.reach_s, 2),
  (t) => (t.margins.share == null ? '-' : signed(t.margins.share * 100, 3)),
  { value: (t) => (t.passed ? 'pass' : 'FAIL'), className: (t) => (t.passed ? 'pass' : 'fail') },
  (t) => t.require.source || '-',
];

async function runInjection() {
  const out = errorOutput('inject');
  out.textContent = '';
  $('inject-verdict').textContent = '';
  $('inject-note').textContent = '';
  $('inject-table').hidden = true;
  for (const u of injectUrls) URL.revokeObjectURL(u);
  injectUrls = [];
  $('inject-plots').replaceChildren();
  const file = $('inject-file').files[0];
  if (!file) {
    out.textContent = 'Pick a test profile (JSON) first.';
    return;
  }
  let profile;
  try {
    profile = JSON.parse(await file.text());
  } catch (e) {
    out.textContent = `${file.name} is not JSON: ${e.message}`;
    return;
  }
  const body = { unit: $('inject-unit').value, profile };
  const onFitted = $('inject-model').value === 'fitted';
  if (onFitted) {
    if (!fit.fitted || !loadedScenario) {
      out.textContent = 'Fit a unit first: the fitted values come from the fit above.';
      return;
    }
    // The loaded scenario with the fitted unit's governor, turbine and ramp limit; its setpoint and
    // the rest of the scenario stay as they are.
    body.unit = fit.fitted.unit;
    $('inject-unit').value = fit.fitted.unit;
    body.scenario = structuredClone(loadedScenario);
    const unit = body.scenario.units.find((u) => u.id === fit.fitted.unit);
    if (!unit) {
      out.textContent = `Unit ${fit.fitted.unit} is not in the loaded scenario any more: fit again.`;
      return;
    }
    for (const key of ['governor', 'turbine', 'ramp_mw_per_s']) if (key in fit.fitted.fragment) unit[key] = fit.fitted.fragment[key];
  }
  $('inject-verdict').textContent = 'running the tests...';
  let r;
  try {
    r = await api('/api/v1/injections', { method: 'POST', body });
  } catch (e) {
    $('inject-verdict').textContent = '';
    showProblem(out, e);
    return;
  }
  fillTable($('inject-table'), INJECT_COLUMNS, r.tests, { rowClass: (t) => (t.passed ? '' : 'fail') });
  const passed = r.tests.filter((t) => t.passed).length;
  $('inject-verdict').textContent = `Unit ${r.unit} (${onFitted ? 'fitted values' : 'scenario values'}): ${passed} of ${r.tests.length} tests passed. ${r.passed ? 'All requirements met.' : 'Requirements NOT met.'}`;
  $('inject-note').textContent = r.note ? `About the profile: ${r.note}` : '';
  $('inject-plots').replaceChildren(...(r.plots ?? []).map((svg, i) => {
    const url = URL.createObjectURL(new Blob([svg], { type: 'image/svg+xml' }));
    injectUrls.push(url);
    const t = r.tests[i];
    return el('figure', {}, el('img', { src: url, alt: `injection test ${t?.name ?? i + 1}: output change and the required share` }),
      el('figcaption', { textContent: `${t?.name ?? `test ${i + 1}`}: ${t?.passed ? 'pass' : 'FAIL'}` }));
  }));
}

// ------------------------------------------------------------------ wiring

/** The unit choices of a newly loaded scenario (a choice that still exists stays, with its rows). */
export function validationScenario(sc) {
  loadedScenario = sc;
  const ids = sc.units.map((u) => u.id);
  for (const id of ['fit-unit', 'inject-unit']) {
    const keep = $(id).value;
    $(id).replaceChildren(...sc.units.map((u) => new Option(`${u.id} (${u.turbine.type}, ${u.rating_mw} MW)`, u.id)));
    if (ids.includes(keep)) $(id).value = keep;
  }
  if (unitKey(unitOf($('fit-unit').value)) !== fit.unitKey) unitChanged();
}

// A unit's rows stay across a new scenario only while the unit has the same parameters to offer.
const unitKey = (u) => (u ? `${u.id}/${u.turbine.type}/${u.ramp_mw_per_s != null}` : '');

// Another unit: its own parameters (one row to start from) and its default columns.
function unitChanged() {
  fit.unit = $('fit-unit').value;
  fit.unitKey = unitKey(unitOf(fit.unit));
  $('fit-params').tBodies[0].replaceChildren();
  addParamRow('governor.droop');
  fillColumns();
  if (unitOf(fit.unit)) $('inject-unit').value = fit.unit;
}

/** Wires the validation panel. */
export function wireValidation() {
  $('fit-file').addEventListener('change', pickRecording);
  $('fit-unit').addEventListener('change', unitChanged);
  $('fit-add-param').addEventListener('click', () => addParamRow());
  $('do-fit').addEventListener('click', runFit);
  $('do-fit-cancel').addEventListener('click', cancelFit);
  $('do-inject').addEventListener('click', runInjection);
  window.addEventListener('resize', () => {
    if (fit.chart) fit.chart.setSize(fitChartSize());
  });
}
