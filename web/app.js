// droopline training-room page, the entry module: wires the stream to the charts, tables and
// panels, and the instructor controls and studies to the HTTP API. Each part is its own module:
//   state.js       shared state (window.droopline), $, fmt
//   api.js         the one HTTP API caller (token, JSON, readable errors)
//   connection.js  the WebSocket stream: hello, frames, events, reconnection
//   charts.js      uPlot charts, series from the hello's columns
//   tables.js      the one table builder (columns and rows)
//   live.js        clock, area and unit tables, sharing views, disturbances, event log
//   controls.js    instructor controls and field checks
//   studies.js     modes, requirement checks, sweeps, COMTRADE records
//   views.js       droop and power-angle canvases
import { app } from '/state.js';
import { connect, startsRun } from '/connection.js';
import { buildCharts, loadHistory, addFrame, redrawCharts, resizeCharts } from '/charts.js';
import { renderStatic, renderLive, renderDisturbance, logEvent, clearRun } from '/live.js';
import { wireControls, fillChoices } from '/controls.js';
import { wireStudies, clearSweepNote } from '/studies.js';

// Charts and tables are redrawn at most once per animation frame.
let redrawPending = false;
function scheduleRedraw() {
  if (redrawPending) return;
  redrawPending = true;
  requestAnimationFrame(() => {
    redrawPending = false;
    redrawCharts();
    if (app.last) renderLive(app.last);
  });
}

function onHello(msg) {
  app.scenario = msg.scenario;
  app.columns = msg.columns;
  clearRun();
  buildCharts();
  renderStatic();
  fillChoices(app.scenario);
  loadHistory(msg.history);
  // The server keeps its event list across resets: only this run's events, from the last reset or
  // scenario load on.
  for (const e of msg.events.slice(Math.max(0, msg.events.findLastIndex(startsRun)))) {
    if (e.type === 'disturbance') renderDisturbance(e);
    logEvent(e);
  }
  scheduleRedraw();
}

window.addEventListener('resize', resizeCharts);
wireControls({ onUnlock: clearSweepNote });
wireStudies();
connect({
  hello: onHello,
  frame: (f) => {
    app.last = f;
    addFrame(f);
    scheduleRedraw();
  },
  event: (e) => {
    if (startsRun(e)) clearRun();
    logEvent(e);
  },
  disturbance: (d) => {
    renderDisturbance(d);
    logEvent(d);
  },
});
