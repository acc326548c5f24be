// Alarms as the stream tells them (the greeting's active ones, then each raised, cleared and
// acknowledged), the one list that shows them (wall, seat and instructor views, each with its own
// choice of alarms), acknowledging, and the optional alarm tone (Web Audio, off until asked for).
import { app, fmt, el, button, authorName } from '/state.js';
import { api, ApiError } from '/api.js';

const listeners = [];
/** `fn()` runs after any alarm changed. */
export const onAlarms = (fn) => listeners.push(fn);
const changed = () => listeners.forEach((fn) => fn());

/** Takes alarms as the server describes them (newer states replace older ones). */
export function takeAlarms(list, { replace = false } = {}) {
  if (replace) app.alarms.clear();
  for (const a of list) app.alarms.set(a.id, a);
  changed();
}

/** Every alarm the server keeps (cleared ones too); the greeting only has the active ones. */
export async function fetchAlarms() {
  try {
    takeAlarms((await api('/api/v1/alarms')).alarms);
  } catch (e) {
    if (!(e instanceof ApiError)) throw e; // a session without alarms answers 404: the greeting's stay
  }
}

/** A stream message `{type: "alarm", change, alarm}`; a newly raised one sounds the tone when on. */
export function alarmMessage(msg) {
  app.alarms.set(msg.alarm.id, msg.alarm);
  if (msg.change === 'raised' && concernsSeat(msg.alarm)) sound(msg.alarm.severity);
  changed();
}

/** True when the alarm belongs to one of the signed-in seat's areas (always without a seat). */
export function concernsSeat(a) {
  if (!app.seat) return app.view !== 'seat';
  const areas = a.areas?.length ? a.areas : [a.area];
  return areas.some((x) => app.seat.areas.includes(x));
}

/**
 * Alarms, those of severity alarm before warnings, each newest first: `which` is 'active' (not
 * cleared), 'open' (active or not acknowledged) or 'all'.
 */
export function alarmsNow(which, filter = () => true) {
  const keep = { active: (a) => a.cleared_s == null, open: (a) => a.cleared_s == null || !a.acked_by, all: () => true }[which];
  const rank = (a) => (a.severity === 'alarm' ? 0 : 1);
  return [...app.alarms.values()].filter((a) => keep(a) && filter(a))
    .sort((a, b) => rank(a) - rank(b) || b.raised_s - a.raised_s || b.id - a.id);
}

function stateWords(a) {
  const parts = [a.cleared_s == null ? 'active' : `cleared at ${fmt(a.cleared_s, 1)} s`];
  parts.push(a.acked_by ? `acknowledged by ${authorName(a.acked_by)} at ${fmt(a.acked_s, 1)} s` : 'not acknowledged');
  return parts.join(', ');
}

async function acknowledge(a, out) {
  out.textContent = '';
  try {
    const r = await api(`/api/v1/alarms/${a.id}/ack`, { method: 'POST', body: {} });
    if (r.alarm) {
      app.alarms.set(r.alarm.id, r.alarm);
      changed();
    }
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    out.textContent = e.message;
  }
}

/**
 * Fills `list` (a <ul>) with `alarms`: level, time raised, area, message and state, and an
 * Acknowledge button where `canAck(alarm)`; a refusal shows in words in the alarm's own line.
 */
export function renderAlarms(list, alarms, { canAck = () => false, brief = false } = {}) {
  if (!alarms.length) {
    list.replaceChildren(el('li', { className: 'empty', textContent: 'none' }));
    return;
  }
  list.replaceChildren(...alarms.map((a) => {
    const li = el('li', { className: `alarm sev-${a.severity}${a.cleared_s == null ? '' : ' cleared'}${a.acked_by ? ' acked' : ''}` });
    li.dataset.alarm = a.id;
    // The area stands in its own column: a message that begins with it does not say it twice.
    const prefix = `area ${a.area}: `;
    const message = a.area && a.message.startsWith(prefix) ? a.message.slice(prefix.length) : a.message;
    li.append(
      el('span', { className: 'level', textContent: a.severity }),
      el('span', { className: 't', textContent: `${fmt(a.raised_s, 1)} s` }),
      // A tie's alarm concerns both its areas: both are named (the east desk sees it is its own too).
      el('span', { className: 'area', textContent: a.areas?.length > 1 ? a.areas.join(' / ') : a.area ?? '' }),
      el('span', { className: 'message', textContent: message }),
    );
    if (brief) return li;
    const foot = el('div', { className: 'foot' }, el('span', { className: 'state', textContent: stateWords(a) }));
    li.append(foot);
    if (!a.acked_by && canAck(a)) {
      const out = el('output', { className: 'error' });
      out.setAttribute('role', 'alert');
      foot.append(button('Acknowledge', () => acknowledge(a, out), 'ack'));
      li.append(out);
    }
    return li;
  }));
}

// The tone: an AudioContext made when the trainee turns it on (browsers allow sound only after a
// gesture); two short beeps for a warning, three for an alarm.
let audio = null;
export function wireTone(checkbox) {
  checkbox.checked = false;
  checkbox.addEventListener('change', () => {
    if (checkbox.checked && !audio) audio = new AudioContext();
    app.tone = checkbox.checked;
    if (app.tone) sound('warning');
  });
}

function sound(severity) {
  if (!app.tone || !audio) return;
  const beeps = severity === 'alarm' ? 3 : 2;
  for (let i = 0; i < beeps; i++) {
    const t = audio.currentTime + i * 0.22;
    const osc = audio.createOscillator();
    const gain = audio.createGain();
    osc.frequency.value = severity === 'alarm' ? 880 : 660;
    gain.gain.setValueAtTime(0.0001, t);
    gain.gain.exponentialRampToValueAtTime(0.2, t + 0.02);
    gain.gain.exponentialRampToValueAtTime(0.0001, t + 0.16);
    osc.connect(gain).connect(audio.destination);
    osc.start(t);
    osc.stop(t + 0.18);
  }
}
