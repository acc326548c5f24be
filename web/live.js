// What the stream shows besides the charts: the scenario's name, the clock and badges, the area
// and unit tables, the sharing views, the disturbance panel and the event log.
import { app, $, fmt, authorName, unitStatusWords } from '/state.js';
import { fillTable } from '/tables.js';
import { drawDroop, drawPowerAngle } from '/views.js';

/** What changes only with the scenario: its name and a sharing view per unit and tie. */
export function renderStatic() {
  const sc = app.scenario;
  $('scenario-name').textContent = sc.name || '(unnamed scenario)';
  $('scenario-name').title = sc.name || '';
  document.title = `droopline: ${sc.name}`;
  const figure = (caption, canvasData) => {
    const fig = document.createElement('figure');
    fig.innerHTML = `<figcaption>${caption}</figcaption><canvas ${canvasData}></canvas>`;
    return fig;
  };
  $('droop-views').replaceChildren(...sc.units.map((u) =>
    figure(`${u.id} <small>${u.turbine.type}, ${u.area}</small>`, `data-unit="${u.id}"`)));
  $('pa-views').replaceChildren(...sc.ties.map((t) =>
    figure(`${t.id} <small>${t.from} → ${t.to}, pull-out ${t.pmax_mw} MW</small>`, `data-tie="${t.id}"`)));
}

// Secondary control in a mode other than tie-line bias is marked beside its correction.
const AGC_MODE_MARK = { constant_frequency: ' (f)', constant_interchange: ' (tie)' };

const AREA_COLUMNS = [
  ({ a, s }) => `${a.id}${s.collapsed ? ' (collapsed)' : ''}`,
  ({ s }) => fmt(s.f_hz, 4),
  ({ s }) => fmt(s.rocof_hz_per_s, 3),
  ({ s }) => fmt(s.demand_mw),
  ({ s }) => fmt(s.generation_mw),
  ({ s }) => `${fmt(s.export_mw)} (${fmt(s.scheduled_export_mw)})`,
  ({ s }) => fmt(s.ace_mw),
  ({ s }) => (s.agc_enabled ? `${fmt(s.agc_mw)}${AGC_MODE_MARK[s.agc_mode] ?? ''}` : 'off'),
  ({ s }) => fmt(s.shed_mw),
];

const UNIT_COLUMNS = [
  ({ u }) => u.id,
  ({ u }) => u.turbine.type,
  ({ u }) => fmt(u.rating_mw, 0),
  ({ s }) => fmt(s.setpoint_mw),
  ({ s }) => fmt(s.p_mw),
  ({ s }) => `${fmt(s.headroom_up_mw)} / ${fmt(s.headroom_down_mw)}`,
  ({ s }) => `${fmt(s.droop, 3)}${s.mode === 'isochronous' ? ' iso' : ''}`,
  ({ s }) => `${fmt(s.deadband_hz * 1000, 0)} mHz`,
  { value: ({ s }) => unitStatusWords(s.status), className: ({ s }) => `state-${s.status}` },
  ({ share }) => `${fmt(100 * share, 0)} %`,
];

/** A frame's clock and badges (every view). */
export function renderClock(f) {
  $('sim-time').textContent = f.t_s.toFixed(1);
  $('speed-badge').textContent = `${f.speed}x`;
  $('paused-badge').hidden = !f.paused;
  // The speed choice follows the session's (another instructor's screen or a script may change it),
  // except while it is being chosen.
  const speed = $('speed-select'), now = String(f.speed);
  if (speed && document.activeElement !== speed && speed.value !== now) {
    if (![...speed.options].some((o) => o.value === now)) speed.add(new Option(now));
    speed.value = now;
  }
}

/** A frame: tables and the operating points on the sharing views. */
export function renderLive(f) {
  const sc = app.scenario;
  fillTable($('area-table'), AREA_COLUMNS, sc.areas.map((a) => ({ a, s: f.areas[a.id] })));
  // Each unit's share of its area's secondary control, among the units in it (a stopping unit has left it).
  const running = (u) => ['online', 'at_max', 'at_min'].includes(f.units[u.id].status);
  const totals = {};
  for (const u of sc.units) if (running(u)) totals[u.area] = (totals[u.area] ?? 0) + u.agc_share;
  fillTable($('unit-table'), UNIT_COLUMNS, sc.units.map((u) => ({
    u, s: f.units[u.id], share: running(u) && totals[u.area] > 0 ? u.agc_share / totals[u.area] : 0,
  })));
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
export function logEvent(e) {
  const log = $('event-log');
  const key = e.type === 'disturbance' ? `disturbance ${e.index ?? e.at_s}` : '';
  const alarmAt = { raised: 'raised_s', cleared: 'cleared_s', acknowledged: 'acked_s' };
  const t = e.type === 'alarm' ? e.alarm[alarmAt[e.change]] : e.t_s ?? e.at_s;
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
  const text =
    e.type === 'disturbance'
      ? `disturbance: ${e.cause}${e.open ? ' (being measured)' : ''}`
      : e.type === 'alarm'
        ? `${e.alarm.severity} ${e.change}${e.change === 'acknowledged' ? ` by ${authorName(e.alarm.acked_by)}` : ''}: ${e.alarm.message}`
        : e.text;
  li.replaceChildren(time, document.createTextNode(text));
  if (e.by) li.append(Object.assign(document.createElement('span'), { className: 'by', textContent: ` (${authorName(e.by)})` }));
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

const SHARE_COLUMNS = [
  (u) => u.unit, (u) => fmt(u.predicted_mw), (u) => fmt(u.response_10s_mw), (u) => fmt(u.response_30s_mw),
];

function disturbanceBox() {
  const div = document.createElement('div');
  div.className = 'disturbance';
  div.innerHTML = `<div class="head"></div>
    <dl>${DISTURBANCE_PAIRS.map(() => '<div class="pair"><dt></dt><dd></dd></div>').join('')}</dl>
    <details><summary>each unit's share</summary>
      <table class="grid"><thead><tr><th>unit</th><th>droop share MW</th><th>at +10 s</th><th>at +30 s</th></tr></thead><tbody></tbody></table>
    </details>
    <p class="caveat" hidden>Secondary control was on in this island during the settling window:
      the settling frequency and the frequency response show it as well, not the droop response alone.</p>`;
  return div;
}

/**
 * Marks each disturbance whose settling window (t0+20..52 s) a frame finds secondary control on
 * in one of its island's areas, as the debrief does from the whole run.
 */
export function noteSecondary(f) {
  for (const entry of app.disturbances.values()) {
    const d = entry.d;
    if (entry.secondary || !d || f.t_s < d.at_s + 20 || f.t_s > d.at_s + 52) continue;
    if (!(d.island ?? []).some((a) => f.areas?.[a]?.agc_enabled)) continue;
    entry.secondary = true;
    entry.el.querySelector('.caveat').hidden = false;
  }
}

// Updated in place on every message: the box (and whether its unit shares are open) stays.
export function renderDisturbance(d) {
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
  fillTable(el.querySelector('table'), SHARE_COLUMNS, d.units);
  // Newest first; nodes are moved only when out of place.
  const box = $('disturbances');
  box.querySelector('.empty')?.remove();
  [...app.disturbances.values()].sort((a, b) => b.d.at_s - a.d.at_s).forEach((x, i) => {
    if (box.children[i] !== x.el) box.insertBefore(x.el, box.children[i] ?? null);
  });
}

/** A new run (a reset or another scenario): an empty disturbance panel and event log. */
export function clearRun() {
  app.disturbances.clear();
  app.logged.clear();
  $('disturbances').replaceChildren(Object.assign(document.createElement('p'), { className: 'empty', textContent: 'none yet' }));
  $('event-log').replaceChildren();
}
