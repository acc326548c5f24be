// The exercise's objectives as they stand (GET /api/v1/objectives: a seat gets its own, the
// instructor every seat's), one compact table per seat: each objective's label, what was measured
// (with its unit), the target, the score and a met / not met word; the seat's overall score above.
// Also the banner that says the exercise has ended (its time limit, or the instructor).
import { app, $, fmt, el } from '/state.js';
import { api, ApiError } from '/api.js';
import { fillTable } from '/tables.js';

// Digits by unit: times in whole seconds, frequency in mHz steps, shares and powers to one decimal.
const DIGITS = { s: 0, Hz: 3, '%': 1, MWh: 2, MW: 1 };
const withUnit = (v, unit) => (v == null ? 'not yet' : `${fmt(v, DIGITS[unit] ?? 2)} ${unit}`);

const COLUMNS = [
  { label: 'objective', value: (o) => o.label },
  { label: 'measured', value: (o) => withUnit(o.measured, o.unit), className: () => 'num' },
  { label: 'target', value: (o) => withUnit(o.target, o.unit), className: () => 'num' },
  { label: 'score', value: (o) => fmt(o.score, 0), className: () => 'num' },
  { label: '', value: (o) => (o.met ? 'met' : 'not met'), className: (o) => (o.met ? 'met' : 'not-met') },
];

/**
 * One seat's objectives as a table with `title` over it (the seat, its trainee) and the overall
 * score; the arithmetic of each score is the row's tooltip.
 */
export function objectivesBlock(seat, title) {
  const table = el('table', { className: 'grid objectives' }, el('thead'), el('tbody'));
  fillTable(table, COLUMNS, seat.objectives);
  seat.objectives.forEach((o, i) => { table.tBodies[0].rows[i].title = o.arithmetic; });
  const block = el('div', { className: 'objectives-seat' },
    el('h3', {}, el('span', { textContent: title }),
      el('span', { className: 'seat-score', title: seat.arithmetic, textContent: `score ${fmt(seat.score, 1)} / 100` })),
    seat.objectives.length ? table : el('p', { className: 'empty', textContent: 'no objectives for this seat' }));
  block.dataset.seat = seat.seat;
  return block;
}

/** The objectives now, or null (no exercise: 404; a failure shows in `errorOut` when given). */
export async function fetchObjectives(errorOut) {
  try {
    const r = await api('/api/v1/objectives');
    if (errorOut) errorOut.textContent = '';
    if (r.ended) showEnded(true);
    return r;
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    if (errorOut && e.status !== 404) errorOut.textContent = e.message;
    return null;
  }
}

/** Shows (or hides) the banner that the exercise has ended, with the reason when known. */
/** The end banner's sentence, the same on every screen. */
export const endedWords = (t_s, why) => `At t = ${fmt(t_s, 2)} s, ${why}: commands are closed until the instructor starts a new run.`;

export function showEnded(ended, why = '') {
  const banner = $('exercise-ended');
  if (!banner) return;
  const changed = banner.hidden === ended;
  banner.hidden = !ended;
  // The charts give the banner its room (the wall is one screen with no scrolling).
  if (changed) requestAnimationFrame(() => window.dispatchEvent(new Event('resize')));
  if (ended && why) $('exercise-ended-why').textContent = why;
  if (ended && app.exercise) app.exercise.ended = true;
}
