#pragma once
// What the live session's files share and nobody else needs (not installed, not included by the API).
#include <chrono>
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "droopline/alarms.hpp"
#include "droopline/engine.hpp"
#include "droopline/objectives.hpp"
#include "droopline/script.hpp"

namespace droopline::live_detail {

/// A request about the exercise when none runs (404).
inline constexpr const char* kNoExercise = "no exercise is running";

/// Wall clock, seconds since 1970.
inline double wall_now_s() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

/// What an exercise does after a step, with its state passed in: the alarm monitor is fed the
/// notices since its last update (then cleared), the objective monitor measures the step, and the
/// script hands out the events now due. One rule for the live loop (which sends the changes and
/// submits the firings) and for the way back of a rewind (which rebuilds the state and drops
/// both: they were sent when the lineage first ran).
struct ExerciseStep {
  std::vector<study::AlarmChange> changes;
  std::vector<study::ScriptFiring> firings;
};
ExerciseStep feed_exercise(const Engine& engine, std::optional<study::AlarmMonitor>& alarms,
                           std::optional<study::ScriptRunner>& script,
                           std::optional<study::ObjectiveMonitor>& objectives, std::vector<Notice>& notices,
                           std::int64_t lead_steps, bool run_script);

/// Actions applied by `author` at `t_s`, told to the objective monitor (live, and on a rewind's way back).
inline void feed_actions(std::optional<study::ObjectiveMonitor>& objectives, const std::string& author, double t_s) {
  if (objectives) objectives->actions_applied(author, t_s);
}

}  // namespace droopline::live_detail
