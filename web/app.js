// droopline training-room page, the entry module: picks the view (overview, wall, seat or
// instructor, from `?view=`), wires the stream to the charts and panels, and the controls and
// studies to the HTTP API; the records view reads the training records only. Each part is its own module:
//   state.js       shared state (window.droopline), the view, $, fmt, el, author names
//   api.js         the one HTTP API caller (token or seat code, JSON, readable errors)
//   connection.js  the WebSocket stream: hello, frames, events, alarms, reconnection
//   charts.js      uPlot charts, series from the hello's columns
//   tables.js      the one table builder (columns and rows)
//   live.js        clock, area and unit tables, sharing views, disturbances, event log
//   commands.js    sending commands and changes: confirmation, acknowledgement, words for a command
//   controls.js    instructor controls and field checks
//   alarms.js      alarms from the stream, the one alarm list, acknowledging, the alarm tone
//   exercise.js    the running exercise (briefing, time limit, seat names)
//   objectives.js  objectives' running state (one table per seat), the exercise-ended banner
//   wall.js        the wall view: large frequencies, alarms, tie flows, exercise clock
//   seat.js        the seat view: join code, briefing, the seat's areas and units with their controls
//   desk.js        the instructor view's panels: seats, script, save points and rewind, feed, alarms
//   studies.js     modes, requirement checks, sweeps, COMTRADE records
//   validation.js  model validation: a unit's model fitted to a recording, injection tests
//   recording.js   a recording picked in the browser: CSV columns, COMTRADE channels, base64
//   records.js     the records view: past runs with filters, debriefs, notes, progress, CSV export
//   views.js       droop and power-angle canvases
import { app, $ } from '/state.js';
import { connect, startsRun } from '/connection.js';
import { dropNotesAfter } from '/commands.js';
import { buildCharts, loadHistory, addFrame, redrawCharts, resizeCharts } from '/charts.js';
import { renderStatic, renderLive, renderClock, renderDisturbance, noteSecondary, logEvent, clearRun } from '/live.js';
import { wireControls, fillChoices, unlockWith, syncUnitForm } from '/controls.js';
import { wireStudies, clearSweepNote } from '/studies.js';
import { wireValidation, validationScenario } from '/validation.js';
import { takeAlarms, alarmMessage, fetchAlarms } from '/alarms.js';
import { loadExercise } from '/exercise.js';
import { showEnded, endedWords } from '/objectives.js';
import { prepareWall, buildWall, renderWall } from '/wall.js';
import { wireSeat, buildSeat, renderSeat } from '/seat.js';
import { makeDesk, refreshDesk, unlockedDesk, feedEvent, clearFeed } from '/desk.js';
import { makeRecords, refreshRecords } from '/records.js';

const view = app.view;
document.body.dataset.view = view;
for (const a of document.querySelectorAll('nav.views a')) if (a.dataset.view === view) a.setAttribute('aria-current', 'page');
if (view === 'wall') $('wall').hidden = false;
if (view === 'seat') $('seat').hidden = false;
if (view === 'wall') prepareWall();
if (view === 'instructor') makeDesk();
if (view === 'records') makeRecords();

// Charts and panels are redrawn at most once per animation frame.
let redrawPending = false;
function scheduleRedraw() {
  if (redrawPending) return;
  redrawPending = true;
  requestAnimationFrame(() => {
    redrawPending = false;
    redrawCharts();
    const f = app.last;
    if (!f) return;
    renderClock(f);
    if (view === 'wall') renderWall(f);
    else if (view === 'seat') renderSeat(f);
    else renderLive(f);
  });
}

// An event for the log and, with an author, the instructor's feed. The overview asks for the
// exercise (its seats' names) only once a seat has acted: without one the route answers 404.
function takeEvent(e) {
  if (e.type === 'exercise_end') showEnded(true, endedWords(e.t_s, e.why));
  if (view === 'overview' && e.by && !['instructor', 'script'].includes(e.by) && !app.exercise) loadExercise();
  logEvent(e);
  feedEvent(e);
}

// A new run (a reset or a load): what was said or kept about the last one goes, so that no old
// refusal stays on screen and the debrief's save link cannot save the last run's report.
function forgetLastRun() {
  for (const out of document.querySelectorAll('output.error')) out.textContent = '';
  const save = $('debrief-save');
  if (save && !save.hidden) {
    if (save.href.startsWith('blob:')) URL.revokeObjectURL(save.href);
    save.removeAttribute('href');
    save.hidden = true;
  }
}

async function onHello(msg) {
  app.scenario = msg.scenario;
  app.columns = msg.columns;
  clearRun();
  clearFeed();
  buildCharts();
  renderStatic();
  fillChoices(app.scenario);
  app.formStale = true;
  validationScenario(app.scenario);
  loadHistory(msg.history);
  takeAlarms(msg.alarms ?? [], { replace: true });
  // The server keeps its event list across resets: only this run's events, from the last reset or
  // scenario load on. Alarm changes among them bring the alarms up to date.
  for (const e of msg.events.slice(Math.max(0, msg.events.findLastIndex(startsRun)))) {
    // (alarm changes go to the log only: the greeting's `alarms` already hold the active ones)
    if (e.type === 'disturbance') renderDisturbance(e);
    takeEvent(e);
  }
  scheduleRedraw();
  // The exercise is asked for where it is shown and known to run (a 404 otherwise): the wall's
  // clock, a seat once joined; the instructor's panels ask once unlocked (refreshDesk).
  if (view === 'wall') {
    await loadExercise();
    buildWall();
  } else if (view === 'seat' && app.seat) {
    await loadExercise();
    buildSeat();
    fetchAlarms(); // cleared ones too: the greeting has only the active
  } else if (view === 'instructor' && app.instructor) {
    refreshDesk();
    fetchAlarms();
  }
}

window.addEventListener('resize', resizeCharts);
// What the instructor's token opens, once accepted: the desk's panels, or the records.
function unlocked() {
  clearSweepNote();
  if (view === 'instructor') unlockedDesk();
  if (view === 'records') refreshRecords();
}
wireControls({ onUnlock: unlocked });
wireStudies();
wireValidation();
if (view === 'seat') wireSeat();
// The instructor and records views sign in again with a token kept from before (a reload, or the
// other view in the same tab).
if (['instructor', 'records'].includes(view) && app.token) unlockWith(app.token).then(unlocked, () => {});
// The records are of past runs: that view does not stream the live one.
if (view !== 'records') connect({
  hello: onHello,
  frame: (f) => {
    app.last = f;
    // The unit form was filled at the greeting from the frame before it (a rewind, a reset): now
    // from the state as it is, so Set never sends a value from another moment.
    if (app.formStale) {
      app.formStale = false;
      syncUnitForm();
    }
    addFrame(f);
    noteSecondary(f);
    scheduleRedraw();
  },
  event: (e) => {
    if (startsRun(e)) {
      clearRun();
      showEnded(false);
      forgetLastRun();
    }
    // Whoever took the session back (a reset, a step back, a save point), notes of later changes go.
    if (startsRun(e) || e.type === 'restored') dropNotesAfter(e.t_s ?? 0);
    takeEvent(e);
  },
  disturbance: (d) => {
    renderDisturbance(d);
    logEvent(d);
  },
  alarm: (m) => {
    alarmMessage(m);
    logEvent(m);
  },
});
