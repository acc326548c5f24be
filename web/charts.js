// The live charts (uPlot) of the last minutes: each area's frequency with its reference lines,
// each unit's output and setpoint, tie flows. Which series a chart has, and where each is in a
// history row, comes from the series `columns` the hello names ("t_s", "<area>.f_hz",
// "<unit>.p_mw", "<tie>.flow_mw"); frames are read by the same ids.
import uPlot from '/node_modules/uplot/dist/uPlot.esm.js';
import { app, $ } from '/state.js';

const WINDOW_S = 600;            // chart span (simulated seconds)
const PALETTE = ['#0b5cad', '#d9480f', '#1d7a3a', '#7b2cbf', '#a61e4d', '#0c8599', '#5c940d', '#e67700', '#495057', '#364fc7'];

// Each chart's lines: the id they belong to and their column in a history row.
let plan = { freq: [], units: [], ties: [] };
let timeColumn = 0;

// A chart's height is a share of the window's: 0.22, or its container's `data-height-share`.
const heightShare = (el) => Number(el.closest('[data-height-share]')?.dataset.heightShare) || 0.22;
// On the wall (one screen, no scrolling) the exercise's end banner takes its height from the chart's.
const bannerHeight = () => (app.view === 'wall' && !$('exercise-ended')?.hidden ? $('exercise-ended').offsetHeight : 0);
const chartSize = (el) => ({
  width: Math.max(300, el.clientWidth),
  height: Math.max(180, Math.round(window.innerHeight * heightShare(el)) - bannerHeight()),
});
const valueText = (digits) => (u, v) => (v == null ? '-' : v.toFixed(digits));

// The axes; on the wall their figures follow the page's size (readable across a room).
function axes() {
  if (app.view !== 'wall') return [{ label: 'simulation time, s' }, {}];
  const px = Math.round(parseFloat(getComputedStyle(document.documentElement).fontSize));
  const font = `${px}px system-ui, sans-serif`;
  return [{ label: 'simulation time, s', font, labelFont: `bold ${font}`, size: 2.4 * px, labelSize: 1.6 * px }, { font, size: 5.4 * px }]; // room for "49.975" in the axis font
}

function chartOptions(el, series, refLines, yRange) {
  return {
    ...chartSize(el),
    scales: { x: { time: false }, y: yRange ? { range: yRange } : {} },
    axes: axes(),
    legend: { live: app.view !== 'wall' }, // no pointer on a projected wall: names only
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

// The columns with a suffix, in their order, as { id, col }.
function columnsOf(suffix) {
  return app.columns.flatMap((name, col) => (name.endsWith(suffix) ? [{ id: name.slice(0, -suffix.length), col }] : []));
}

/** Builds the charts for the scenario and columns of a hello, with no points yet. */
export function buildCharts() {
  for (const c of Object.values(app.charts)) c.destroy();
  app.charts = {};
  const sc = app.scenario;
  const f0 = sc.nominal_hz;
  timeColumn = app.columns.indexOf('t_s');
  if (timeColumn < 0) throw new Error('the hello names no t_s column');
  plan = { freq: columnsOf('.f_hz'), units: columnsOf('.p_mw'), ties: columnsOf('.flow_mw') };
  app.data = {
    freq: [[], ...plan.freq.map(() => [])],
    units: [[], ...plan.units.flatMap(() => [[], []])],
    ties: [[], ...plan.ties.map(() => [])],
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
    plan.freq.map(({ id }, i) => ({ label: `${id} Hz`, stroke: PALETTE[i % PALETTE.length], width: 2, value: valueText(4) })),
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
  app.charts.units = new uPlot(chartOptions(unitEl, plan.units.flatMap(({ id }, i) => [
    { label: `${id} MW`, stroke: PALETTE[i % PALETTE.length], width: 2, value: valueText(1) },
    { label: `${id} set`, stroke: PALETTE[i % PALETTE.length], width: 1, dash: [5, 4], points: { show: false }, value: valueText(1) },
  ])), app.data.units, unitEl);
  const noTies = plan.ties.length === 0;
  $('tie-card').hidden = noTies;
  $('tie-controls').hidden = noTies;
  $('pa-title').hidden = noTies;
  if (!noTies) {
    const tieEl = $('chart-ties');
    app.charts.ties = new uPlot(chartOptions(tieEl, plan.ties.map(({ id }, i) => ({
      label: `${id} MW`, stroke: PALETTE[i % PALETTE.length], width: 2, value: valueText(1),
    }))), app.data.ties, tieEl);
  }
}

// One point at time t on a chart: its values in the order of the chart's series.
function append(series, t, values) {
  series[0].push(t);
  values.forEach((v, i) => series[1 + i].push(v));
}

/** The hello's history rows (the series columns; setpoints are not recorded). */
export function loadHistory(rows) {
  const d = app.data;
  for (const r of rows) {
    const t = r[timeColumn];
    append(d.freq, t, plan.freq.map(({ col }) => r[col]));
    append(d.units, t, plan.units.flatMap(({ col }) => [r[col], null]));
    append(d.ties, t, plan.ties.map(({ col }) => r[col]));
  }
}

/** A frame's point, and the points older than the window dropped. */
export function addFrame(f) {
  const d = app.data;
  const t = f.t_s;
  const lastT = d.freq[0].length ? d.freq[0][d.freq[0].length - 1] : -Infinity;
  if (t < lastT) return; // a reset restarts the charts through a new hello
  if (t === lastT) return; // paused: nothing new to plot
  append(d.freq, t, plan.freq.map(({ id }) => f.areas[id].f_hz));
  append(d.units, t, plan.units.flatMap(({ id }) => [f.units[id].p_mw, f.units[id].setpoint_mw]));
  append(d.ties, t, plan.ties.map(({ id }) => f.ties[id].flow_mw));
  for (const arr of [d.freq, d.units, d.ties]) {
    let cut = 0;
    while (cut < arr[0].length && arr[0][cut] < t - WINDOW_S) cut++;
    if (cut) for (const s of arr) s.splice(0, cut);
  }
}

/** Hands the charts their data (once per animation frame). */
export function redrawCharts() {
  app.charts.freq?.setData(app.data.freq);
  app.charts.units?.setData(app.data.units);
  app.charts.ties?.setData(app.data.ties);
}

/** Fits the charts to their cards after the window changed size. */
export function resizeCharts() {
  for (const [key, c] of Object.entries(app.charts)) c.setSize(chartSize($(`chart-${key}`)));
}
