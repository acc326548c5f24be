#pragma once
// Alarms of a live exercise, raised and cleared by a monitor fed after each step (outside the
// engine's hot path; it only reads the engine). Copyable: a save point keeps the monitor with the
// engine, so a restore brings back the alarms as they stood.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/engine.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// Alarm thresholds. Every field may be left out of an exercise file; `alarm_limits_for` fills the
/// defaults for the system's nominal frequency (50 or 60 Hz), each with its source in alarms.cpp.
struct AlarmLimits {
  double standard_band_hz = 0.0;   ///< |f - f0| beyond this: warning (frequency outside the standard range)
  double limit_band_hz = 0.0;      ///< |f - f0| beyond this: alarm (outside the maximum steady-state deviation)
  double rocof_hz_per_s = 0.0;     ///< |RoCoF| above this: alarm
  double tie_loading_pct = 0.0;    ///< |flow| above this share of the tie's pull-out power: alarm
  double reserve_mw = 0.0;         ///< an area's upward reserve (sum of online headroom) below this: warning
  double ace_mw = 0.0;             ///< |ACE| beyond this ...
  double ace_for_s = 0.0;          ///< ... for longer than this: warning
  double battery_energy_pct = 0.0; ///< a battery's stored energy below this share of its capacity: warning
};

/// The default thresholds for a system of nominal frequency `f0_hz`.
AlarmLimits alarm_limits_for(double f0_hz);

enum class AlarmSeverity { warning, alarm };
const char* to_string(AlarmSeverity s);

/// One alarm, from raised to cleared (the monitor keeps cleared ones for the record).
struct Alarm {
  std::uint64_t id = 0;               ///< 1, 2, ... in the order raised
  std::string kind;                   ///< "frequency_band", "frequency_limit", "rocof", "tie_loading", "unit_limit",
                                      ///< "unit_tripped", "unit_started", "unit_stopped", "reserve_low", "ace",
                                      ///< "shedding", "battery_low"
  AlarmSeverity severity = AlarmSeverity::warning;
  std::optional<std::uint32_t> area;  ///< the area it belongs to (a tie's: its `from` area; see `areas`)
  std::vector<std::uint32_t> areas;   ///< every area it concerns (a tie: both ends); seats see their own
  std::string subject;                ///< the unit, tie or area id it is about
  std::string message;                ///< in words, with the value
  double raised_s = 0.0;
  std::optional<double> cleared_s;    ///< absent while active (events like a trip clear once acknowledged)
  std::optional<std::string> acked_by;  ///< seat id or "instructor"
  std::optional<double> acked_s;
};

/// What changed in one update.
struct AlarmChange {
  enum class What { raised, cleared, acknowledged } what;
  std::uint64_t id = 0;
};

class AlarmMonitor {
 public:
  AlarmMonitor(const CheckedSystem& system, AlarmLimits limits);
  /// After each step (and its notices): raises and clears; returns what changed.
  std::vector<AlarmChange> update(const Engine& engine, const std::vector<Notice>& notices);
  /// Acknowledges alarm `id` by `by` at `t_s`; false when there is no such alarm (or it was already).
  bool acknowledge(std::uint64_t id, const std::string& by, double t_s);
  /// Every alarm, oldest first (active and cleared).
  const std::vector<Alarm>& alarms() const { return alarms_; }
  const Alarm* find(std::uint64_t id) const;
  const AlarmLimits& limits() const { return limits_; }

  /// How long a level condition must hold before its alarm is raised (s), and how long its value
  /// must stay back inside the clear threshold before it is cleared (s).
  static constexpr double kRaiseDwellS = 0.5;
  static constexpr double kClearDwellS = 2.0;
  /// A level alarm clears only once its value is this share of the way back inside the threshold
  /// (a deviation under 0.9 x its limit; a low reserve or battery above 1.1 x its threshold).
  static constexpr double kClearMargin = 0.1;

 private:
  // One condition watched every update (kind, subject), with its hold timers.
  struct Watch {
    int kind = 0;                       // index into the level kinds (alarms.cpp)
    std::uint32_t subject = 0;          // area, tie or unit index
    std::optional<double> beyond_since_s;  // the condition has held since
    std::optional<double> calm_since_s;    // the value has been back inside the clear threshold since
    std::optional<std::size_t> active;     // index into alarms_ of its active alarm
  };
  void level(Watch& w, bool beyond, bool calm, double t_s, double raise_dwell_s, std::vector<AlarmChange>& changes,
             const std::string& message);
  std::uint64_t raise(std::string kind, std::uint32_t subject, const std::string& message, double t_s);

  // implementation state (value types only: the monitor is copied into save points)
  AlarmLimits limits_;
  std::vector<Alarm> alarms_;
  std::vector<Watch> watches_;
  double f0_hz_ = 50.0;
  std::vector<std::string> area_ids_, tie_ids_, unit_ids_;
  std::vector<std::uint32_t> tie_from_, tie_to_, unit_area_;
  std::vector<double> tie_pmax_mw_, battery_mwh_;  // battery_mwh_: 0 for other units
  std::vector<double> ace_limit_mw_;               // per area
};

/// Each area's upward reserve: the sum of its units' headroom (offline and tripped units have
/// none); `unit_area` gives each unit's area. One definition for the reserve alarm and objectives.
std::vector<double> upward_reserve_mw(const Engine& engine, const std::vector<std::uint32_t>& unit_area);
/// The |ACE| limit of area `area`: `limits.ace_mw`, or when 0 the area's bias x the standard band.
double area_ace_limit_mw(const SystemDef& def, std::size_t area, const AlarmLimits& limits);

/// One alarm as JSON (`id`, `kind`, `severity`, `area` (id), `areas`, `subject`, `message`, `raised_s`,
/// `cleared_s`, `acked_by`, `acked_s`; absent ones null).
nlohmann::ordered_json alarm_to_json(const SystemDef& def, const Alarm& alarm);

}  // namespace droopline::study
