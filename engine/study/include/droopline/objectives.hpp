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

  /// How long frequency must stay back inside the standard band for a disturbance to count as
  /// over (return_to_standard_s).
  static constexpr double kSettledHoldS = 10.0;
  /// The ACE averaging period of ace_minutes_share (s).
  static constexpr double kAceMinuteS = 60.0;

 private:
  // One disturbance followed by return_to_standard_s.
  struct Recovery {
    double at_s = 0.0;                     // its start
    std::optional<double> within_since_s;  // frequency back inside the standard band since
    std::optional<double> back_s;          // settled: the time it took (negative: not the seat's island)
  };
  // One objective measured for one seat, with the running state its measure needs.
  struct Track {
    std::size_t def = 0;                   // index into defs_
    std::size_t seat = 0;                  // index into seats_
    std::optional<double> value;           // the running figure (time, extreme, energy); empty: none yet
    std::vector<Recovery> recoveries;      // return_to_standard_s: one per engine disturbance
    std::int64_t minute = -1;              // ace_minutes_share: the minute being averaged (-1: none yet)
    std::vector<double> ace_sum_mw;        // ... per area of the seat: sum of ACE over its steps
    std::int64_t minute_steps = 0;         // ... steps averaged so far in that minute
    std::int64_t minutes = 0, passed = 0;  // ... whole minutes, and those within the limit
    std::vector<double> ace_limit_mw;      // ... per area of the seat
  };
  struct Seat {
    std::string id;
    std::vector<std::uint32_t> areas;  // area indices
    std::vector<std::uint32_t> ties;   // ties with an end in its areas
    std::vector<double> action_s;      // times of its own actions, in order
  };
  /// `reserve`: each area's upward reserve now (filled when a reserve objective exists).
  void update_track(Track& t, const Engine& engine, double dt_s, const std::vector<double>& reserve);
  ObjectiveResult result(const Track& t, const AlarmMonitor* alarms) const;

  // Value members only (copied into save points; no pointers into the engine).
  std::vector<ObjectiveDef> defs_;
  std::vector<Seat> seats_;
  std::vector<Track> tracks_;
  AlarmLimits limits_;
  double f0_hz_ = 50.0;
  double t_s_ = 0.0;                      // time of the last update
  std::vector<std::uint32_t> unit_area_;  // per unit: its area
  std::vector<double> tie_pmax_mw_;       // per tie
};

/// The score of a measured value against a target and a zero point (0..100, linear between), with
/// the arithmetic in words; shared by every measure.
struct Scored {
  double score = 100.0;
  double margin = 0.0;
  bool met = true;
  std::string arithmetic;
};
Scored score_value(std::optional<double> measured, double target, double zero_at, bool higher_better);
/// The unit of a measure's values ("s", "Hz", "%", "MWh", "MW").
const char* unit_of(Measure m);

/// After each step, in the one order the live loop and the debrief both keep: the alarm monitor is
/// fed the notices since its last update (then cleared), then the objective monitor measures the
/// step (reading the alarms). Either may be absent. Returns the alarm changes.
std::vector<AlarmChange> feed_monitors(const Engine& engine, std::optional<AlarmMonitor>& alarms,
                                       std::optional<ObjectiveMonitor>& objectives, std::vector<Notice>& notices);

nlohmann::ordered_json objective_result_to_json(const ObjectiveResult& r);
nlohmann::ordered_json seat_score_to_json(const SeatScore& s);

}  // namespace droopline::study
