// droopline training-room page: one WebSocket to /api/v1/stream, uPlot charts of the last
// minutes, sharing views, tables, the disturbance panel and, after the instructor token is given,
// the controls (sent over HTTP with the bearer token so each answer lands next to its control).
import uPlot from '/node_modules/uplot/dist/uPlot.esm.js';
import { drawDroop, drawPowerAngle } from '/views.js';

const WINDOW_S = 600;            // chart span (simulated seconds)
const PALETTE = ['#0b5cad', '#d9480f', '#1d7a3a', '#7b2cbf', '#a61e4d', '#0c8599', '#5c940d', '#e67700', '#495057', '#364fc7'];
const $ = (id) => document.getElementById(id);

const app = {
  scenario: null,
  columns: [],
  last: null,          // the latest frame
  charts: {},
  data: {},            // chart data arrays
  token: sessionStorage.getItem('droopline.token') || '',
  instructor: false,
  disturbances: new Map(), // key -> { d: latest message, el: its box }
  logged: new Map(),       // event log entries updated in place: key -> <li>
  retries: 0,
  connected: false,
};
window.droopline = app; // for tests and the curious

// ------------------------------------------------------------------ charts

function chartOptions(el, series, refLines, yRange) {
  return {
    width: Math.max(300, el.clientWidth),
    height: Math.max(180, Math.round(window.innerHeight * 0.22)),
    scales: { x: { time: false }, y: yRange ? { range: yRange } : {} },
    axes: [{ label: 'simulation time, s' }, {}],
    legend: { live: true },
    cursor: { drag: { x: true, y: false } },
    series: [{ label: 't s' }, ...series],
    // Drawn with the axes, before the series: the reference lines and labels never hide the data.
    hooks: refLines ? { drawAxes: [(u) => drawRefs(u, refLines())] } : {},
  };
}

// Horizontal reference lines (nominal, deadband band, shedding thresholds) on the frequency chart.
// Each label sits inside the plot area just above its line (below it at the top edge), on a white
// ground, clear of the axis; a label that would cover another moves right along its line. The boxes
// drawn (canvas pixels) are kept as u.refLabels.
// The labels' size follows the page's; a label with its gap from the line, in canvas pixels.
const refFontPx = () => 0.8 * parseFloat(getComputedStyle(document.documentElement).fontSize);
const refLabelHeight = () => (refFontPx() + 6) * devicePixelRatio;

function drawRefs(u, lines) {
  const ctx = u.ctx;
  const px = devicePixelRatio;
  const { left, top, width, height } = u.bbox;
  const shown = lines.map((l) => ({ ...l, y: u.valToPos(l.value, 'y', true) }))
    .filter((l) => Number.isFinite(l.y) && l.y >= top && l.y <= top + height);
  ctx.save();
  ctx.lineWidth = 1 * px;
  for (const { y, color, dash } of shown) { // every line first: no line crosses a label
    ctx.strokeStyle = color;
    ctx.setLineDash(dash);
    ctx.beginPath();
    ctx.moveTo(left, y);
    ctx.lineTo(left + width, y);
    ctx.stroke();
  }
  const fontPx = refFontPx();
  ctx.font = `${fontPx * px}px system-ui, sans-serif`;
  ctx.textAlign = 'left';      // uPlot leaves its own axis alignment on the context
  ctx.textBaseline = 'middle';
  const boxes = [];
  for (const { y, color, text, label } of shown) {
    if (!label) continue;
    const w = ctx.measureText(label).width + 8 * px, h = refLabelHeight() - 2 * px;
    const b = { label, left: left + 6 * px, top: y - h - 1 * px };
    if (b.top < top) b.top = Math.min(y + 1 * px, top + height - h);
    const clash = () => boxes.find((o) => b.left < o.right && o.left < b.left + w && b.top < o.bottom && o.top < b.top + h);
    for (let o = clash(); o; o = clash()) b.left = o.right + 6 * px;
    if (b.left + w > left + width) continue; // no room on this line: the line stays, unlabelled
    Object.assign(b, { right: b.left + w, bottom: b.top + h });
    boxes.push(b);
    ctx.fillStyle = 'rgba(255, 255, 255, 0.88)';
    ctx.fillRect(b.left, b.top, w, h);
    ctx.fillStyle = text ?? color;
    ctx.fillText(label, b.left + 4 * px, b.top + h / 2);
  }
  ctx.restore();
  u.refLabels = boxes;
}

function buildCharts() {
  for (const c of Object.values(app.charts)) c.destroy();
  app.charts = {};
  const sc = app.scenario;
  const f0 = sc.nominal_hz;
  const areas = sc.areas.map((a) => a.id);
  const units = sc.units.map((u) => u.id);
  const ties = sc.ties.map((t) => t.id);
  app.data = {
    freq: [[], ...areas.map(() => [])],
    units: [[], ...units.flatMap(() => [[], []])],
    ties: [[], ...ties.map(() => [])],
  };
  const minDb = Math.min(...sc.units.map((u) => u.governor.deadband_hz).filter((d) => d > 0), Infinity);
  const refs = () => {
    const lines = [{ value: f0, color: '#495057', dash: [], label: `${f0} Hz` }];
    if (Number.isFinite(minDb)) {
      lines.push({ value: f0 + minDb, color: '#868e96', text: '#495057', dash: [2, 3], label: `deadband ±${(minDb * 1000).toFixed(0)} mHz` });
      lines.push({ value: f0 - minDb, color: '#868e96', dash: [2, 3] });
    }
    const seen = new Set();
    for (const a of sc.areas) for (const s of a.shedding) {
      if (seen.has(s.below_hz)) continue;
      seen.add(s.below_hz);
      lines.push({ value: s.below_hz, color: '#b00020', dash: [6, 4], label: `shed ${s.below_hz} Hz` });
    }
    return lines;
  };
  const freqEl = $('chart-freq');
  app.charts.freq = new uPlot(chartOptions(freqEl,
    areas.map((id, i) => ({ label: `${id} Hz`, stroke: PALETTE[i % PALETTE.length], width: 2, value: (u, v) => v == null ? '-' : v.toFixed(4) })),
    refs, (u, lo, hi) => {
      // Around nominal, at least +/-50 mHz, widening to show what happens.
      const a = Math.min(lo ?? f0, f0 - 0.05), b = Math.max(hi ?? f0, f0 + 0.05);
      const pad = 0.08 * (b - a);
      const bottom = a - pad;
      // Room above the highest labelled line for its label: the share k of the plot's height a
      // label takes must lie between that line and the top.
      const k = u.bbox?.height > 0 ? refLabelHeight() / u.bbox.height : 0;
      const highest = Math.max(...refs().filter((l) => l.label).map((l) => l.value));
      return [bottom, k < 0.5 ? Math.max(b + pad, (highest - k * bottom) / (1 - k)) : b + pad];
    }), app.data.freq, freqEl);
  const unitEl = $('chart-units');
  app.charts.units = new uPlot(chartOptions(unitEl, units.flatMap((id, i) => [
    { label: `${id} MW`, stroke: PALETTE[i % PALETTE.length], width: 2, value: (u, v) => v == null ? '-' : v.toFixed(1) },
    { label: `${id} set`, stroke: PALETTE[i % PALETTE.length], width: 1, dash: [5, 4], points: { show: false }, value: (u, v) => v == null ? '-' : v.toFixed(1) },
  ])), app.data.units, unitEl);
  $('tie-card').hidden = ties.length === 0;
  $('tie-controls').hidden = ties.length === 0;
  $('pa-title').hidden = ties.length === 0;
  if (ties.length) {
    const tieEl = $('chart-ties');
    app.charts.ties = new uPlot(chartOptions(tieEl, ties.map((id, i) => ({
      label: `${id} MW`, stroke: PALETTE[i % PALETTE.length], width: 2, value: (u, v) => v == null ? '-' : v.toFixed(1),
    }))), app.data.ties, tieEl);
  }
}

// History rows have the series.csv columns: t, area f..., unit p..., tie flow...
function loadHistory(rows) {
  const sc = app.scenario;
  const na = sc.areas.length, nu = sc.units.length;
  for (const r of rows) {
    app.data.freq[0].push(r[0]);
    sc.areas.forEach((_, i) => app.data.freq[1 + i].push(r[1 + i]));
    app.data.units[0].push(r[0]);
    sc.units.forEach((_, i) => { app.data.units[1 + 2 * i].push(r[1 + na + i]); app.data.units[2 + 2 * i].push(null); });
    app.data.ties[0].push(r[0]);
    sc.ties.forEach((_, i) => app.data.ties[1 + i].push(r[1 + na + nu + i]));
  }
}

function addFrame(f) {
  const sc = app.scenario;
  const d = app.data;
  const t = f.t_s;
  const lastT = d.freq[0].length ? d.freq[0][d.freq[0].length - 1] : -Infinity;
  if (t < lastT) return; // a reset restarts the charts through a new hello
  if (t === lastT) { // paused: nothing new to plot
    return;
  }
  d.freq[0].push(t);
  sc.areas.forEach((a, i) => d.freq[1 + i].push(f.areas[a.id].f_hz));
  d.units[0].push(t);
  sc.units.forEach((u, i) => { d.units[1 + 2 * i].push(f.units[u.id].p_mw); d.units[2 + 2 * i].push(f.units[u.id].setpoint_mw); });
  d.ties[0].push(t);
  sc.ties.forEach((tie, i) => d.ties[1 + i].push(f.ties[tie.id].flow_mw));
  for (const arr of [d.freq, d.units, d.ties]) {
    let cut = 0;
    while (cut < arr[0].length && arr[0][cut] < t - WINDOW_S) cut++;
    if (cut) for (const s of arr) s.splice(0, cut);
  }
}

let redrawPending = false;
function scheduleRedraw() {
  if (redrawPending) return;
  redrawPending = true;
  requestAnimationFrame(() => {
    redrawPending = false;
    app.charts.freq?.setData(app.data.freq);
    app.charts.units?.setData(app.data.units);
    app.charts.ties?.setData(app.data.ties);
    if (app.last) renderLive(app.last);
  });
}

window.addEventListener('resize', () => {
  for (const [key, c] of Object.entries(app.charts)) {
    const el = $(`chart-${key}`);
    c.setSize({ width: Math.max(300, el.clientWidth), height: Math.max(180, Math.round(window.innerHeight * 0.22)) });
  }
});

// ------------------------------------------------------------------ tables and views

const fmt = (v, d = 1) => {
  if (v == null || Number.isNaN(v)) return '-';
  const text = Number(v).toFixed(d);
  return /^-0\.?0*$/.test(text) ? text.slice(1) : text; // no "-0.0"
};

function renderStatic() {
  const sc = app.scenario;
  $('scenario-name').textContent = sc.name || '(unnamed scenario)';
  document.title = `droopline: ${sc.name}`;
  const fill = (sel, items) => {
    const keep = sel.value;
    sel.replaceChildren(...items.map((i) => new Option(i, i)));
    if (items.includes(keep)) sel.value = keep;
  };
  fill($('area-select'), sc.areas.map((a) => a.id));
  fill($('unit-select'), sc.units.map((u) => u.id));
  fill($('tie-select'), sc.ties.map((t) => t.id));
  syncUnitForm();
  const droop = $('droop-views');
  droop.replaceChildren(...sc.units.map((u) => {
    const fig = document.createElement('figure');
    fig.innerHTML = `<figcaption>${u.id} <small>${u.turbine.type}, ${u.area}</small></figcaption><canvas data-unit="${u.id}"></canvas>`;
    return fig;
  }));
  const pa = $('pa-views');
  pa.replaceChildren(...sc.ties.map((t) => {
    const fig = document.createElement('figure');
    fig.innerHTML = `<figcaption>${t.id} <small>${t.from} → ${t.to}, pull-out ${t.pmax_mw} MW</small></figcaption><canvas data-tie="${t.id}"></canvas>`;
    return fig;
  }));
}

function renderLive(f) {
  const sc = app.scenario;
  $('sim-time').textContent = f.t_s.toFixed(1);
  $('speed-badge').textContent = `${f.speed}x`;
  $('paused-badge').hidden = !f.paused;
  $('area-table').tBodies[0].replaceChildren(...sc.areas.map((a) => {
    const s = f.areas[a.id];
    const tr = document.createElement('tr');
    tr.innerHTML = `<td>${a.id}${s.collapsed ? ' (collapsed)' : ''}</td><td>${fmt(s.f_hz, 4)}</td><td>${fmt(s.rocof_hz_per_s, 3)}</td>` +
      `<td>${fmt(s.demand_mw)}</td><td>${fmt(s.generation_mw)}</td><td>${fmt(s.export_mw)} (${fmt(s.scheduled_export_mw)})</td>` +
      `<td>${fmt(s.ace_mw)}</td><td>${s.agc_enabled ? fmt(s.agc_mw) : 'off'}</td>`;
    return tr;
  }));
  const shares = {};
  for (const a of sc.areas) {
    const total = sc.units.filter((u) => u.area === a.id && f.units[u.id].status !== 'tripped').reduce((s, u) => s + u.agc_share, 0);
    for (const u of sc.units) if (u.area === a.id) shares[u.id] = total > 0 && f.units[u.id].status !== 'tripped' ? u.agc_share / total : 0;
  }
  $('unit-table').tBodies[0].replaceChildren(...sc.units.map((u) => {
    const s = f.units[u.id];
    const tr = document.createElement('tr');
    tr.innerHTML = `<td>${u.id}</td><td>${u.turbine.type}</td><td>${fmt(u.rating_mw, 0)}</td><td>${fmt(s.setpoint_mw)}</td>` +
      `<td>${fmt(s.p_mw)}</td><td>${fmt(s.headroom_up_mw)} / ${fmt(s.headroom_down_mw)}</td><td>${fmt(s.droop, 3)}${s.mode === 'isochronous' ? ' iso' : ''}</td>` +
      `<td>${fmt(s.deadband_hz * 1000, 0)} mHz</td><td class="state-${s.status}">${s.status.replace('_', ' ')}</td><td>${fmt(100 * shares[u.id], 0)} %</td>`;
    return tr;
  }));
  for (const c of document.querySelectorAll('#droop-views canvas')) {
    const u = sc.units.find((x) => x.id === c.dataset.unit);
    drawDroop(c, u, f.units[u.id], sc.nominal_hz, f.areas[u.area].f_hz);
  }
  for (const c of document.querySelectorAll('#pa-views canvas')) {
    const t = sc.ties.find((x) => x.id === c.dataset.tie);
    drawPowerAngle(c, t, f.ties[t.id]);
  }
}

// The event log: newest first, one entry per event. A disturbance is announced when it begins and
// again when its window ends (and a joining page gets both from the history): its entry is keyed by
// the disturbance's index and updated in place, so it shows once, at the time it began.
function logEvent(e) {
  const log = $('event-log');
  const key = e.type === 'disturbance' ? `disturbance ${e.index ?? e.at_s}` : '';
  const t = e.t_s ?? e.at_s;
  let li = key ? app.logged.get(key) : null;
  if (!li) {
    li = document.createElement('li');
    li.dataset.t = t;
    li.dataset.key = key;
    if (key) app.logged.set(key, li);
    // Entries arrive nearly in order: the place is found from the top (later arrivals first on ties).
    const after = [...log.children].find((x) => Number(x.dataset.t) <= t);
    log.insertBefore(li, after ?? null);
    while (log.children.length > 300) {
      app.logged.delete(log.lastChild.dataset.key);
      log.lastChild.remove();
    }
  }
  const time = Object.assign(document.createElement('span'), { className: 't', textContent: `${fmt(t, 2)} s` });
  const text = e.type === 'disturbance' ? `disturbance: ${e.cause}${e.open ? ' (being measured)' : ''}` : e.text;
  li.replaceChildren(time, document.createTextNode(text));
}

// Each disturbance's label and value pairs: one <div> per pair, so a value always stands under
// its own label however many columns fit. A value not there is "not yet" while the disturbance is
// measured, and "not measured" once its window closed without it (a later disturbance in the same
// island ends the window).
const measured = (x, v, digits, unit) => (v == null ? (x.open ? 'not yet' : 'not measured') : `${fmt(v, digits)} ${unit}`);
const DISTURBANCE_PAIRS = [
  [() => 'imbalance', (x) => `${fmt(x.delta_mw)} MW (${x.delta_mw >= 0 ? 'deficit' : 'surplus'})`],
  [() => 'RoCoF (500 ms)', (x) => measured(x, x.rocof_hz_per_s, 3, 'Hz/s')],
  [(x) => x.extreme, (x) => (x.nadir_hz == null ? measured(x, null) : `${fmt(x.nadir_hz, 3)} Hz at +${fmt(x.nadir_after_s, 2)} s`)],
  [() => 'settling (t0+20..52 s)', (x) => measured(x, x.settling_hz, 3, 'Hz')],
  [() => 'droop formula', (x) => `${fmt(x.predicted_settling_hz, 3)} Hz`],
  [() => 'frequency response', (x) => measured(x, x.response_mw_per_0p1hz, 1, 'MW/0.1 Hz')],
];

function disturbanceBox() {
  const div = document.createElement('div');
  div.className = 'disturbance';
  div.innerHTML = `<div class="head"></div>
    <dl>${DISTURBANCE_PAIRS.map(() => '<div class="pair"><dt></dt><dd></dd></div>').join('')}</dl>
    <details><summary>each unit's share</summary>
      <table class="grid"><thead><tr><th>unit</th><th>droop share MW</th><th>at +10 s</th><th>at +30 s</th></tr></thead><tbody></tbody></table>
    </details>`;
  return div;
}

// Updated in place on every message: the box (and whether its unit shares are open) stays.
function renderDisturbance(d) {
  const key = d.index ?? `${d.at_s}|${d.cause}`;
  let entry = app.disturbances.get(key);
  if (!entry) {
    entry = { el: disturbanceBox() };
    app.disturbances.set(key, entry);
  }
  entry.d = d;
  const { el } = entry;
  const head = el.querySelector('.head');
  head.textContent = `t = ${fmt(d.at_s, 2)} s: ${d.cause} `;
  if (d.open) head.append(Object.assign(document.createElement('span'), { className: 'open', textContent: '(still being measured)' }));
  el.querySelectorAll('.pair').forEach((pair, i) => {
    pair.children[0].textContent = DISTURBANCE_PAIRS[i][0](d);
    pair.children[1].textContent = DISTURBANCE_PAIRS[i][1](d);
  });
  el.querySelector('tbody').replaceChildren(...d.units.map((u) => {
    const tr = document.createElement('tr');
    for (const v of [u.unit, fmt(u.predicted_mw), fmt(u.response_10s_mw), fmt(u.response_30s_mw)])
      tr.append(Object.assign(document.createElement('td'), { textContent: v }));
    return tr;
  }));
  // Newest first; nodes are moved only when out of place.
  const box = $('disturbances');
  box.querySelector('.empty')?.remove();
  [...app.disturbances.values()].sort((a, b) => b.d.at_s - a.d.at_s).forEach((x, i) => {
    if (box.children[i] !== x.el) box.insertBefore(x.el, box.children[i] ?? null);
  });
}

// A new run (a reset or another scenario): an empty disturbance panel and event log.
function clearRun() {
  app.disturbances.clear();
  app.logged.clear();
  $('disturbances').replaceChildren(Object.assign(document.createElement('p'), { className: 'empty', textContent: 'none yet' }));
  $('event-log').replaceChildren();
}

const startsRun = (e) => e.type === 'event' && (e.kind === 'reset' || e.kind === 'scenario');

// ------------------------------------------------------------------ connection

function setLink(state, text) {
  $('link-dot').className = `dot ${state}`;
  $('link-text').textContent = text;
}

function connect() {
  const ws = new WebSocket(`${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/api/v1/stream`);
  app.ws = ws;
  setLink('wait', app.retries ? `reconnecting (try ${app.retries})` : 'connecting');
  ws.onmessage = (m) => {
    const msg = JSON.parse(m.data);
    switch (msg.type) {
      case 'hello':
        app.scenario = msg.scenario;
        app.columns = msg.columns;
        clearRun();
        buildCharts();
        renderStatic();
        loadHistory(msg.history);
        // The server keeps its event list across resets: only this run's events, from the last
        // reset or scenario load on.
        for (const e of msg.events.slice(Math.max(0, msg.events.findLastIndex(startsRun)))) {
          if (e.type === 'disturbance') renderDisturbance(e);
          logEvent(e);
        }
        app.connected = true;
        app.retries = 0;
        setLink('up', 'live');
        if (app.token && app.instructor) ws.send(JSON.stringify({ type: 'auth', token: app.token }));
        scheduleRedraw();
        break;
      case 'frame':
        if (!app.scenario) break;
        app.last = msg;
        addFrame(msg);
        scheduleRedraw();
        break;
      case 'dropped':
        $('dropped-note').hidden = false;
        $('dropped-note').textContent = `${msg.frames} frame(s) dropped: this screen fell behind`;
        clearTimeout(app.droppedTimer);
        app.droppedTimer = setTimeout(() => { $('dropped-note').hidden = true; }, 5000);
        break;
      case 'event':
        if (startsRun(msg)) {
          clearRun();
          app.rejoin = true;
          ws.close(); // reconnect at once: a fresh hello with the new run's charts
        }
        logEvent(msg);
        break;
      case 'disturbance':
        renderDisturbance(msg);
        logEvent(msg);
        break;
      default:
        break;
    }
  };
  ws.onclose = () => {
    app.connected = false;
    if (app.rejoin) {
      app.rejoin = false;
      setLink('wait', 'new run: rejoining');
      connect();
      return;
    }
    const delay = Math.min(8000, 500 * 2 ** Math.min(app.retries, 4));
    app.retries += 1;
    setLink('down', `disconnected, retrying in ${(delay / 1000).toFixed(1)} s`);
    setTimeout(connect, delay);
  };
}

// ------------------------------------------------------------------ instructor controls

async function send(path, body, group, method = 'POST') {
  const out = document.querySelector(`[data-error-for="${group}"]`);
  if (out) out.textContent = '';
  try {
    const res = await fetch(path, {
      method,
      headers: { 'Content-Type': 'application/json', Authorization: `Bearer ${app.token}` },
      body: typeof body === 'string' ? body : JSON.stringify(body),
    });
    const answer = await res.json().catch(() => ({}));
    if (!res.ok) {
      const issues = answer.issues ? `: ${answer.issues.join('; ')}` : '';
      if (out) out.textContent = `${answer.error || `HTTP ${res.status}`}${issues}`;
      return null;
    }
    return answer;
  } catch (e) {
    if (out) out.textContent = `the server did not answer (${e.message})`;
    return null;
  }
}

const command = (group, c) => send('/api/v1/commands', c, group);

// Numeric fields are checked here, before anything is sent: a blank or non-numeric field would
// otherwise reach the server as 0. The problem shows beside the field itself.
function numberProblem(input) {
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

// The values of the fields (null for a blank optional one), or null when any is refused; every
// refused field shows its problem.
function readNumbers(...ids) {
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

function numeric(ids, build) {
  return () => {
    const v = readNumbers(...ids);
    if (v) build(v);
  };
}
const unitId = () => $('unit-select').value;
const areaId = () => $('area-select').value;

function syncUnitForm() {
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

function wireControls() {
  $('auth-form').addEventListener('submit', async (ev) => {
    ev.preventDefault();
    $('auth-error').textContent = '';
    const token = $('token').value.trim();
    const res = await fetch('/api/v1/role', { headers: { Authorization: `Bearer ${token}` } });
    if (!res.ok) {
      $('auth-error').textContent = 'That token was refused: check it with the instructor who started the session.';
      return;
    }
    app.token = token;
    app.instructor = true;
    sessionStorage.setItem('droopline.token', token);
    app.ws?.readyState === 1 && app.ws.send(JSON.stringify({ type: 'auth', token }));
    $('controls').hidden = false;
    $('auth-form').querySelector('button').textContent = 'Unlocked';
    const sweepNote = document.querySelector('[data-error-for="sweep"]');
    if (sweepNote.textContent === SWEEP_FOR_INSTRUCTOR) sweepNote.textContent = '';
  });
  for (const b of document.querySelectorAll('[data-control]'))
    b.addEventListener('click', () => send('/api/v1/control', { action: b.dataset.control }, 'session'));
  $('speed-select').addEventListener('change', () => send('/api/v1/control', { action: 'speed', speed: Number($('speed-select').value) }, 'session'));
  $('scenario-file').addEventListener('change', async () => {
    const file = $('scenario-file').files[0];
    if (!file) return;
    const text = await file.text();
    await send('/api/v1/scenario', text, 'session', 'PUT');
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

// Studies: the modes of the loaded scenario, and COMTRADE records of a window of the history.
async function analyseModes() {
  const out = document.querySelector('[data-error-for="modes"]');
  out.textContent = '';
  const res = await fetch('/api/v1/modes');
  const body = await res.json();
  if (!res.ok) {
    out.textContent = body.error || `modes: HTTP ${res.status}`;
    return;
  }
  const tbody = $('modes-table').querySelector('tbody');
  tbody.replaceChildren();
  const leastDamped = body.modes.findIndex((m) => m.kind === 'oscillatory');
  body.modes.forEach((m, i) => {
    const tr = document.createElement('tr');
    if (i === leastDamped) tr.className = 'least';
    if (m.flagged) tr.classList.add('flagged');
    const damping = m.kind === 'oscillatory' ? `${fmt(m.damping_ratio * 100, 1)} %`
      : m.kind === 'real' ? `T ${fmt(m.time_constant_s, 3)} s` : '-';
    const parts = m.participation.filter((p) => p.share >= 0.05).map((p) => `${p.state} ${fmt(p.share * 100, 0)}%`).join(', ');
    for (const v of [`${i + 1}${m.flagged ? ' !' : ''}`, m.kind, fmt(m.real_per_s, 4), fmt(m.imag_rad_per_s, 4),
      m.kind === 'oscillatory' ? fmt(m.frequency_hz, 3) : '-', damping, parts]) {
      const td = document.createElement('td');
      td.textContent = v;
      tr.append(td);
    }
    tbody.append(tr);
  });
  $('modes-table').hidden = false;
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

function fillTable(table, head, rows, rowClass = () => '') {
  if (head) {
    const tr = document.createElement('tr');
    for (const h of head) tr.append(Object.assign(document.createElement('th'), { textContent: h }));
    table.querySelector('thead').replaceChildren(tr);
  }
  table.querySelector('tbody').replaceChildren(...rows.map((cells, i) => {
    const tr = document.createElement('tr');
    tr.className = rowClass(i);
    for (const c of cells) tr.append(Object.assign(document.createElement('td'), { textContent: c }));
    return tr;
  }));
  table.hidden = false;
}

async function assessFile() {
  const file = $('assess-file').files[0];
  if (!file) return;
  const out = document.querySelector('[data-error-for="assess"]');
  out.textContent = '';
  $('assess-verdict').textContent = 'running the scenario...';
  const res = await fetch('/api/v1/assess', { method: 'POST', body: await file.text() });
  const body = await res.json();
  if (!res.ok) {
    $('assess-verdict').textContent = '';
    out.textContent = [body.error, ...(body.issues || [])].join('; ');
    return;
  }
  const d = (c) => (c.unit === 'Hz' ? 3 : 2);
  fillTable($('assess-table'), null, body.checks.map((c) => [
    c.requirement + (c.detail ? ` (${c.detail})` : ''), `${c.relation} ${fmt(c.limit, d(c))} ${c.unit}`,
    c.measured == null ? '-' : `${fmt(c.measured, d(c))} ${c.unit}`,
    c.margin == null ? '-' : `${c.margin >= 0 ? '+' : ''}${fmt(c.margin, d(c))}`, c.result, c.source]),
  (i) => (body.checks[i].result === 'fail' ? 'fail' : ''));
  $('assess-verdict').textContent = body.passed ? 'All requirements met.' : 'Requirements NOT met.';
}

const SWEEP_FOR_INSTRUCTOR = 'Sweeps are for the instructor: unlock with the instructor token to run one.';

async function runSweep() {
  const out = document.querySelector('[data-error-for="sweep"]');
  out.textContent = '';
  if (!app.instructor) {
    out.textContent = SWEEP_FOR_INSTRUCTOR;
    return;
  }
  const vary = $('sweep-vary').value.split('\n').map((l) => l.trim()).filter(Boolean);
  const metric = $('sweep-metric').value;
  const res = await fetch('/api/v1/sweeps', {
    method: 'POST', headers: app.token ? { Authorization: `Bearer ${app.token}` } : {}, body: JSON.stringify({ vary, metric }),
  });
  let job = await res.json().catch(() => ({}));
  if (!res.ok) {
    out.textContent = res.status === 401 ? SWEEP_FOR_INSTRUCTOR : [job.error || `HTTP ${res.status}`, ...(job.issues || [])].join('; ');
    return;
  }
  app.sweepJob = job.id;
  $('do-sweep-cancel').hidden = false;
  while (job.status === 'running') {
    $('sweep-progress').textContent = `${job.done} of ${job.total || '?'} runs`;
    await new Promise((r) => setTimeout(r, 400));
    job = await (await fetch(`/api/v1/sweeps/${job.id}`)).json();
  }
  $('do-sweep-cancel').hidden = true;
  $('sweep-progress').textContent = `${job.status}: ${job.done} runs in ${fmt(job.wall_s, 1)} s`;
  if (job.status === 'failed') {
    out.textContent = job.error;
    return;
  }
  const result = await (await fetch(`/api/v1/sweeps/${job.id}/result`)).json();
  const paths = result.sweep.vary.map((v) => v.path);
  const shown = [metric, ...['nadir_hz', 'settling_hz', 'rocof_hz_per_s', 'shed_mw'].filter((m) => m !== metric)];
  fillTable($('sweep-table'), [...paths, 'status', ...shown], result.rows.map((r) => [
    ...r.values.map((v) => String(v)), r.status, ...shown.map((m) => (r.metrics ? fmt(r.metrics[m], 4) : '-'))]));
  if (paths.length <= 2) {
    $('sweep-plot').src = `/api/v1/sweeps/${job.id}/result?format=svg`;
    $('sweep-plot').hidden = false;
  }
}

function wireStudies() {
  $('do-modes').addEventListener('click', analyseModes);
  $('assess-file').addEventListener('change', assessFile);
  $('do-sweep').addEventListener('click', runSweep);
  $('do-sweep-cancel').addEventListener('click', () => fetch(`/api/v1/sweeps/${app.sweepJob}`, {
    method: 'DELETE', headers: { Authorization: `Bearer ${app.token}` },
  }));
  for (const id of ['rec-from', 'rec-to']) $(id).addEventListener('input', syncRecordLinks);
  for (const id of ['rec-cfg', 'rec-dat'])
    $(id).addEventListener('click', (ev) => { if (!readNumbers('rec-from', 'rec-to')) ev.preventDefault(); });
  syncRecordLinks();
}

wireControls();
wireStudies();
connect();
