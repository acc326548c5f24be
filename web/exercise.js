// The running exercise as every role may see it (GET /api/v1/exercise: name, briefing, time limit,
// seats with their names, whether it has ended; never the script), kept in app.exercise; null when
// none runs.
import { app, $ } from '/state.js';
import { api, ApiError } from '/api.js';
import { showEnded } from '/objectives.js';

/** Fetches the exercise (after each greeting: another may have been loaded). */
export async function loadExercise() {
  try {
    app.exercise = await api('/api/v1/exercise');
  } catch (e) {
    if (!(e instanceof ApiError)) throw e;
    app.exercise = null; // 404: a plain scenario runs
  }
  const limit = app.exercise?.time_limit_s;
  $('time-limit').hidden = !limit;
  $('time-limit').textContent = limit ? ` of ${limit} s` : '';
  showEnded(Boolean(app.exercise?.ended));
  return app.exercise;
}
