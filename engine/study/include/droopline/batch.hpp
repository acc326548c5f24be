#pragma once
// The one batch runner: steps an engine as fast as it goes (no clock) from where it stands to the
// end of its scenario, a step or a time, and hands rows, notices and disturbances to observers.
// `run`, `replay`, `record`, sweeps, requirement checks and replays over the API all run through it.
#include <atomic>
#include <cmath>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/engine.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// Steps between two output rows: llround(output_every_s / step_s), at least 1.
std::int64_t output_every(const SystemDef& def);

/// Where a batch run stops and how it samples.
struct BatchOptions {
  std::int64_t every = 0;          ///< steps between rows; 0 = output_every(def)
  std::int64_t end_step = -1;      ///< stop at this step; -1 = once the scenario's duration is reached
  double end_time_s = INFINITY;    ///< also stop at the first row at or after this time (s)
  bool row_at_end = false;         ///< a last row at the final step when it is not a row step
  bool close_disturbances = true;  ///< close the metric windows still open at the end
};

/// What a batch run tells as it goes; each may be left empty.
struct BatchObservers {
  std::function<void(Engine&)> before_step;             ///< before each step (commands due, ...)
  std::function<void(const Engine&)> row;               ///< at the start and every `every` steps
  std::function<void(const Notice&)> notice;            ///< each notice, after the step that raised it
  std::function<void(const Engine&)> after_step;        ///< after each step and its notices (progress)
  std::function<void(const Disturbance&)> disturbance;  ///< each disturbance, at the end
  std::function<bool()> stop;  ///< asked after each row: true ends the run there (an output failed)
};

/// Runs `engine` as `options` says, calling `observers`.
void run_batch(Engine& engine, const BatchOptions& options, const BatchObservers& observers);

/// A whole run held in memory (replays over the API, tests): the same text `droopline run` writes.
struct RunOutcome {
  bool ok = false;
  std::vector<Issue> issues;
  std::string series;    ///< series.csv content
  std::string summary;   ///< summary.json content
  bool stopped = false;  ///< `stop` was set: the run ended early (ok false, no outputs)
  double stopped_at_s = 0.0;
};

/// Runs a validated definition to its end and returns both outputs as text.
/// `stop`, when given, is read after each row: once set the run ends there (a service stopping).
RunOutcome run_to_strings(const CheckedSystem& system, const std::vector<Issue>& warnings,
                          const std::atomic<bool>* stop = nullptr);

}  // namespace droopline::study
