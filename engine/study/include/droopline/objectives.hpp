#pragma once
// Objectives of a training exercise and their scoring. Each objective names a measured quantity,
// a target and a weight, for one seat or for every seat (each then measured on its own areas).
// An ObjectiveMonitor is fed after each step (outside the engine's hot path; it only reads the
// engine and the alarm monitor) and told of every action applied with its author; it is a value
// type, so a save point copies it with the engine and a rewind brings it back as it stood. The
// same monitor, fed the same way, scores a live run and its debrief from the journal, so both
// give the same figures.
#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/alarms.hpp"
#include "droopline/engine.hpp"
#include "droopline/exercise.hpp"
#include "droopline/objective_def.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// One objective's running state (or result) for one seat.
struct ObjectiveResult {
  std::string objective;              ///< ObjectiveDef::id
  std::string seat;                   ///< the seat scored
  Measure measure = Measure::largest_deviation_hz;
  std::string label;
  std::string unit;                   ///< of measured, target and margin: "s", "Hz", "%", "MWh", "MW"
  std::optional<double> measured;     ///< empty while nothing has been measured (no alarm yet, no whole minute)
  double target = 0.0;
  double zero_at = 0.0;
  double weight = 1.0;
  double score = 0.0;                 ///< 0..100 (100 when not yet measured: nothing went wrong)
  double margin = 0.0;                ///< how far inside the target (positive) or beyond it (negative)
  bool met = true;
  std::string arithmetic;             ///< the score worked out in words and numbers
  std::vector<double> samples;        ///< per-event values behind it (return times, alarm delays)
};

/// One seat's score: the weighted mean of its objectives' scores.
struct SeatScore {
  std::string seat;
  double score = 0.0;
  std::string arithmetic;             ///< "(100×1 + 62.5×2) / (1 + 2) = 75.0"
  std::vector<ObjectiveResult> objectives;
};

class ObjectiveMonitor {
 public:
  /// For an exercise (its system, seats, objectives and alarm limits); no objectives: no scores.
  explicit ObjectiveMonitor(const Exercise& exercise);
  /// After each step (after the alarm monitor's update).
  void update(const Engine& engine, const AlarmMonitor* alarms);
  /// Actions applied before the step now due, by `author` ("instructor", "script" or a seat id) at
  /// `t_s`; only a seat's own actions count for its alarm response times.
  void actions_applied(const std::string& author, double t_s);
  /// Every seat's score now (seats in the exercise's order); `alarms` for the acknowledgement times.
  std::vector<SeatScore> scores(const AlarmMonitor* alarms) const;

 private:
  // Value members only (copied into save points; no pointers into the engine).
  std::vector<ObjectiveDef> defs_;
};

nlohmann::ordered_json objective_result_to_json(const ObjectiveResult& r);
nlohmann::ordered_json seat_score_to_json(const SeatScore& s);

}  // namespace droopline::study
