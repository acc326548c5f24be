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
  disturbances: new Map(),
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
    hooks: refLines ? { draw: [(u) => drawRefs(u, refLines())] } : {},
  };
}

// Horizontal reference lines (nominal, deadband band, shedding thresholds) on the frequency chart.
function drawRefs(u, lines) {
  const ctx = u.ctx;
  ctx.save();
  for (const { value, color, dash, label } of lines) {
    const yy = u.valToPos(value, 'y', true);
    if (!Number.isFinite(yy) || yy < u.bbox.top || yy > u.bbox.top + u.bbox.height) continue;
    ctx.strokeStyle = color;
    ctx.setLineDash(dash);
    ctx.lineWidth = 1 * devicePixelRatio;
    ctx.beginPath();
    ctx.moveTo(u.bbox.left, yy);
    ctx.lineTo(u.bbox.left + u.bbox.width, yy);
    ctx.stroke();
    if (label) {
      ctx.fillStyle = color;
      ctx.font = `${11 * devicePixelRatio}px system-ui`;
      ctx.fillText(label, u.bbox.left + 4 * devicePixelRatio, yy - 3 * devicePixelRatio);
    }
  }
  ctx.restore();
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
      lines.push({ value: f0 + minDb, color: '#868e96', dash: [2, 3], label: `deadband ±${(minDb * 1000).toFixed(0)} mHz` });
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
      return [a - pad, b + pad];
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

const fmt = (v, d = 1) => (v == null || Number.isNaN(v) ? '-' : Number(v).toFixed(d));

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

function addEvent(e) {
  const li = document.createElement('li');
  li.innerHTML = `<span class="t">${fmt(e.t_s ?? e.at_s, 2)} s</span>`;
  li.append(document.createTextNode(e.type === 'disturbance' ? `disturbance: ${e.cause}` : e.text));
  const log = $('event-log');
  log.prepend(li);
  while (log.children.length > 300) log.lastChild.remove();
}

function renderDisturbance(d) {
  app.disturbances.set(d.index ?? `${d.at_s}|${d.cause}`, d);
  const box = $('disturbances');
  const items = [...app.disturbances.values()].sort((a, b) => b.at_s - a.at_s);
  box.replaceChildren(...items.map((x) => {
    const div = document.createElement('div');
    div.className = 'disturbance';
    const units = x.units.map((u) => `<tr><td>${u.unit}</td><td>${fmt(u.predicted_mw)}</td><td>${fmt(u.response_10s_mw)}</td><td>${fmt(u.response_30s_mw)}</td></tr>`).join('');
    div.innerHTML = `<div class="head">t = ${fmt(x.at_s, 2)} s: ${x.cause} ${x.open ? '<span class="open">(still being measured)</span>' : ''}</div>
      <dl>
        <dt>imbalance</dt><dd>${fmt(x.delta_mw)} MW (${x.delta_mw >= 0 ? 'deficit' : 'surplus'})</dd>
        <dt>RoCoF (500 ms)</dt><dd>${fmt(x.rocof_hz_per_s, 3)} Hz/s</dd>
        <dt>${x.extreme}</dt><dd>${fmt(x.nadir_hz, 3)} Hz at +${fmt(x.nadir_after_s, 2)} s</dd>
        <dt>settling (t0+20..52 s)</dt><dd>${fmt(x.settling_hz, 3)} Hz</dd>
        <dt>droop formula</dt><dd>${fmt(x.predicted_settling_hz, 3)} Hz</dd>
        <dt>frequency response</dt><dd>${fmt(x.response_mw_per_0p1hz, 1)} MW/0.1 Hz</dd>
      </dl>
      <details><summary>each unit's share</summary>
        <table class="grid"><thead><tr><th>unit</th><th>droop share MW</th><th>at +10 s</th><th>at +30 s</th></tr></thead><tbody>${units}</tbody></table>
      </details>`;
    return div;
  }));
}

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
        app.disturbances.clear();
        $('disturbances').innerHTML = '<p class="empty">none yet</p>';
        $('event-log').replaceChildren();
        buildCharts();
        renderStatic();
        loadHistory(msg.history);
        for (const e of msg.events) {
          if (e.type === 'disturbance') renderDisturbance(e);
          addEvent(e);
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
        addEvent(msg);
        if (msg.kind === 'scenario' || msg.kind === 'reset') { ws.close(); } // reconnect: fresh hello
        break;
      case 'disturbance':
        renderDisturbance(msg);
        if (!msg.open) addEvent(msg);
        break;
      default:
        break;
    }
  };
  ws.onclose = () => {
    app.connected = false;
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
const num = (id) => Number($(id).value);
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
  $('do-step').addEventListener('click', () => command('area', { kind: 'load_step', area: areaId(), mw: num('step-mw') }));
  $('do-ramp').addEventListener('click', () => command('area', { kind: 'load_ramp', area: areaId(), mw: num('ramp-mw'), over_s: num('ramp-s') }));
  $('agc-on').addEventListener('click', () => command('area', { kind: 'agc', area: areaId(), enabled: true }));
  $('agc-off').addEventListener('click', () => command('area', { kind: 'agc', area: areaId(), enabled: false }));
  $('unit-select').addEventListener('change', syncUnitForm);
  $('do-setpoint').addEventListener('click', () => {
    const c = { kind: 'setpoint', unit: unitId(), mw: num('set-mw') };
    if ($('set-ramp').value !== '' && num('set-ramp') > 0) c.ramp_mw_per_s = num('set-ramp');
    command('unit', c);
  });
  $('do-governor').addEventListener('click', () => command('unit', {
    kind: 'governor', unit: unitId(), droop: num('gov-droop'), deadband_hz: num('gov-db'),
    deadband: $('gov-kind').value, mode: $('gov-mode').value,
  }));
  $('do-trip').addEventListener('click', () => command('unit', { kind: 'unit_trip', unit: unitId() }));
  $('do-start').addEventListener('click', () => command('unit', { kind: 'unit_start', unit: unitId(), mw: num('start-mw') }));
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

function syncRecordLinks() {
  const q = `from_s=${encodeURIComponent($('rec-from').value || 0)}&to_s=${encodeURIComponent($('rec-to').value || 0)}`;
  $('rec-cfg').href = `/api/v1/record?${q}&part=cfg`;
  $('rec-dat').href = `/api/v1/record?${q}&part=dat`;
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

async function runSweep() {
  const out = document.querySelector('[data-error-for="sweep"]');
  out.textContent = '';
  const vary = $('sweep-vary').value.split('\n').map((l) => l.trim()).filter(Boolean);
  const metric = $('sweep-metric').value;
  const res = await fetch('/api/v1/sweeps', {
    method: 'POST', headers: app.token ? { Authorization: `Bearer ${app.token}` } : {}, body: JSON.stringify({ vary, metric }),
  });
  let job = await res.json();
  if (!res.ok) {
    out.textContent = [job.error, ...(job.issues || [])].join('; ');
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
  syncRecordLinks();
}

wireControls();
wireStudies();
connect();
