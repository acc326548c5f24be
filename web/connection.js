// The one WebSocket to /api/v1/stream: connect, the hello, frames, events, disturbances and alarms
// handed to the page, the dropped-frames notice, the link indicator, and reconnection with back-off
// (0.5 s doubling to 8 s; at once when a new run starts or the session went back in time, for a
// fresh hello with the history as it now stands).
import { app, $ } from '/state.js';

/** An event that starts a new run (a reset or another scenario). */
export const startsRun = (e) => e.type === 'event' && (e.kind === 'reset' || e.kind === 'scenario');

function setLink(state, text) {
  $('link-dot').className = `dot ${state}`;
  $('link-text').textContent = text;
}

/** Proves the instructor token or the seat's code on the open stream. */
export function sendAuth() {
  if (app.role !== 'viewer' && app.ws?.readyState === WebSocket.OPEN) app.ws.send(JSON.stringify({ type: 'auth', token: app.token }));
}

function showDropped(frames) {
  const note = $('dropped-note');
  note.hidden = false;
  note.textContent = `${frames} frame(s) dropped: this screen fell behind`;
  clearTimeout(app.droppedTimer);
  app.droppedTimer = setTimeout(() => { note.hidden = true; }, 5000);
}

/**
 * Opens the stream and keeps it open. `on.hello(msg)`, `on.frame(msg)`, `on.event(msg)`,
 * `on.disturbance(msg)` and `on.alarm(msg)` receive the messages; frames only after a hello. A
 * `restored` message (a save point restored, a rewind) goes to `on.event` and brings a new hello.
 */
export function connect(on) {
  const ws = new WebSocket(`${location.protocol === 'https:' ? 'wss' : 'ws'}://${location.host}/api/v1/stream`);
  app.ws = ws;
  setLink('wait', app.retries ? `reconnecting (try ${app.retries})` : 'connecting');
  ws.onmessage = (m) => {
    const msg = JSON.parse(m.data);
    switch (msg.type) {
      case 'hello':
        on.hello(msg);
        app.connected = true;
        app.retries = 0;
        setLink('up', 'live');
        sendAuth();
        break;
      case 'frame':
        if (app.scenario) on.frame(msg);
        break;
      case 'dropped':
        showDropped(msg.frames);
        break;
      case 'event':
        if (startsRun(msg)) {
          app.rejoin = true;
          ws.close(); // reconnect at once: a fresh hello with the new run's charts
        }
        on.event(msg);
        break;
      case 'restored':
        app.rejoin = true;
        ws.close(); // the charts and panels as the session now stands: a fresh hello
        on.event(msg);
        break;
      case 'disturbance':
        on.disturbance(msg);
        break;
      case 'exercise_end': // the time limit or the instructor ended the exercise: the banner and the log
        on.event(msg);
        break;
      case 'alarm': // an exercise's alarm raised, cleared or acknowledged: the alarm lists and the log
        on.alarm(msg);
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
      connect(on);
      return;
    }
    const delay = Math.min(8000, 500 * 2 ** Math.min(app.retries, 4));
    app.retries += 1;
    setLink('down', `disconnected, retrying in ${(delay / 1000).toFixed(1)} s`);
    setTimeout(() => connect(on), delay);
  };
}
