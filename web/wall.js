// The wall view for a projector: each area's frequency in large figures, the frequency chart
// large, the alarms active now, tie flows and the exercise clock. No controls.
import { app, $, fmt, el } from '/state.js';
import { alarmsNow, renderAlarms, onAlarms } from '/alarms.js';

/** Minutes and seconds of a simulation time ("12:05"). */
export const clockText = (t) => {
  const s = Math.max(0, Math.floor(t));
  return `${Math.floor(s / 60)}:${String(s % 60).padStart(2, '0')}`;
};

/** Moves the frequency chart into the wall before the charts are built (they size to their card). */
export function prepareWall() {
  const figure = $('chart-freq').closest('figure');
  figure.classList.add('wall-freq');
  $('wall-chart-slot').append(figure);
  onAlarms(showAlarms);
  new ResizeObserver(showAlarms).observe(document.querySelector('.wall-side')); // its height is the chart row's
}

// The active alarms and how many. The list ends at the foot of the screen: the alarms that do
// not fit whole are left out and counted in a last line.
function showAlarms() {
  const active = alarmsNow('active');
  const list = $('wall-alarms');
  $('wall-alarm-count').textContent = active.length ? `(${active.length})` : '';
  renderAlarms(list, active, { brief: true });
  const bottom = list.getBoundingClientRect().bottom;
  const items = [...list.children];
  const fits = (li) => li.getBoundingClientRect().bottom <= bottom + 0.5;
  if (items.every(fits)) return;
  const more = el('li', { className: 'more' });
  list.append(more);
  for (let shown = items.length; shown > 0; shown--) {
    more.textContent = `and ${items.length - shown + 1} more`;
    items[shown - 1].hidden = true;
    if (fits(more)) break;
  }
}

// A tile per area: its name over its frequency; filled again for each scenario.
export function buildWall() {
  const areas = app.scenario.areas;
  $('wall-areas').style.setProperty('--n', String(areas.length));
  $('wall-areas').replaceChildren(...areas.map((a) => {
    const tile = el('div', { className: 'tile' },
      el('div', { className: 'tile-label', textContent: a.id }),
      el('div', { className: 'tile-figure' }, el('output', { className: 'figure', textContent: '-' }), el('span', { className: 'unit', textContent: 'Hz' })),
      el('div', { className: 'tile-sub' }));
    tile.dataset.area = a.id;
    return tile;
  }));
  // The label first: a long exercise name takes two lines and moves the alarm list down.
  document.querySelector('.wall-label').textContent = app.exercise ? `exercise: ${app.exercise.name}` : 'simulation time';
  showAlarms();
}

/** A frame on the wall. */
export function renderWall(f) {
  const sc = app.scenario;
  const active = alarmsNow('active');
  for (const tile of $('wall-areas').children) {
    const s = f.areas[tile.dataset.area];
    const worst = active.filter((a) => a.area === tile.dataset.area && a.kind.startsWith('frequency'));
    tile.className = `tile${worst.some((a) => a.severity === 'alarm') ? ' alarm' : worst.length ? ' warning' : ''}`;
    tile.querySelector('.figure').textContent = s.collapsed ? 'collapsed' : fmt(s.f_hz, 3);
    tile.querySelector('.tile-sub').textContent = `RoCoF ${fmt(s.rocof_hz_per_s, 3)} Hz/s · ACE ${fmt(s.ace_mw, 0)} MW`;
  }
  // The list was fitted to the room it had then; the layout may have moved since (a banner, a
  // label on two lines, a greeting after a rewind): fitted again when its last line is cut.
  const list = $('wall-alarms');
  const last = [...list.children].reverse().find((li) => !li.hidden);
  if (last && last.getBoundingClientRect().bottom > list.getBoundingClientRect().bottom + 0.5) showAlarms();
  const limit = app.exercise?.time_limit_s;
  $('wall-time').textContent = clockText(f.t_s);
  $('wall-limit').textContent = limit ? `of ${clockText(limit)}${f.t_s > limit ? ' (time is up)' : ''}` : '';
  const rows = $('wall-ties').tBodies[0];
  rows.replaceChildren(...sc.ties.map((t) => {
    const flow = f.ties[t.id];
    const open = !flow.in_service;
    return el('tr', {},
      el('td', { textContent: t.id }), el('td', { textContent: `${t.from} → ${t.to}` }),
      el('td', { textContent: open ? 'open' : fmt(flow.flow_mw, 0) }),
      el('td', { textContent: open ? '-' : `${fmt(100 * Math.abs(flow.flow_mw) / t.pmax_mw, 0)} %` }));
  }));
}
