#include "droopline/batch.hpp"

#include <algorithm>
#include <nlohmann/json.hpp>

#include "droopline/scenario_io.hpp"

namespace droopline::study {

std::int64_t output_every(const SystemDef& def) {
  return std::max<std::int64_t>(1, std::llround(def.output_every_s / def.step_s));
}

void run_batch(Engine& engine, const BatchOptions& options, const BatchObservers& observers) {
  const std::int64_t every = options.every > 0 ? options.every : output_every(engine.def());
  auto done = [&] { return options.end_step >= 0 ? engine.step_index() >= options.end_step : engine.finished(); };
  // The end time is looked at on row steps only, so a run stops on a row.
  auto past_end_time = [&] { return engine.time_s() >= options.end_time_s + 1e-9; };
  if (observers.row) observers.row(engine);
  bool last_was_row = true;
  if (!past_end_time())
    while (!done()) {
      if (observers.before_step) observers.before_step(engine);
      engine.step();
      last_was_row = engine.step_index() % every == 0;
      if (last_was_row && observers.row) observers.row(engine);
      if (last_was_row && observers.stop && observers.stop()) break;
      if (observers.notice)
        for (const Notice& n : engine.take_notices()) observers.notice(n);
      if (observers.after_step) observers.after_step(engine);
      if (last_was_row && past_end_time()) break;
    }
  if (options.row_at_end && !last_was_row && observers.row) observers.row(engine);
  if (options.close_disturbances) engine.close_disturbances();
  if (observers.disturbance)
    for (const Disturbance& d : engine.disturbances()) observers.disturbance(d);
}

RunOutcome run_to_strings(const CheckedSystem& system, const std::vector<Issue>& warnings,
                          const std::atomic<bool>* stop) {
  RunOutcome out;
  const std::unique_ptr<Engine> created = Engine::create(system);
  Engine& engine = *created;
  SeriesCsv csv;
  out.series = SeriesCsv::header(engine);
  std::vector<Notice> notices;
  BatchObservers obs;
  obs.row = [&](const Engine& e) { csv.append_row(e, out.series); };
  obs.notice = [&](const Notice& n) { notices.push_back(n); };
  if (stop) obs.stop = [stop] { return stop->load(std::memory_order_relaxed); };
  run_batch(engine, {}, obs);
  if (stop && !engine.finished()) {
    out.stopped = true;
    out.stopped_at_s = engine.time_s();
    out.series.clear();
    return out;
  }
  out.summary = to_text(summary_to_json(engine, notices, warnings));
  out.ok = true;
  return out;
}

}  // namespace droopline::study
