#pragma once
// An exercise's objectives as written in its file (the monitor that measures and scores them is
// objectives.hpp). Kept apart so that exercise.hpp can hold them without the monitor.
#include <optional>
#include <string>
#include <string_view>

namespace droopline::study {

/// What an objective measures (JSON `measure`: the enumerator's name). Definitions in the README
/// ("Objectives"); for a seat, frequency measures use the worst of its areas, ACE, reserve and
/// unserved energy its own areas, tie loading the ties with an end in its areas, alarm times the
/// alarms that concern its areas and the seat's own actions and acknowledgements.
enum class Measure {
  time_outside_standard_s,  ///< time with |f - f0| beyond the standard band (s)
  time_outside_limit_s,     ///< time with |f - f0| beyond the limit band (s)
  largest_deviation_hz,     ///< largest |f - f0| (Hz)
  return_to_standard_s,     ///< after each disturbance, time until f is back within the standard band; the longest (s)
  ace_minutes_share,        ///< share of whole minutes whose mean |ACE| stayed within `ace_limit_mw` (%)
  unserved_energy_mwh,      ///< energy of load shed (by hand or by stages) until restored (MWh)
  lowest_reserve_mw,        ///< lowest upward reserve (headroom of online units) of the seat's areas (MW)
  tie_loading_max_pct,      ///< highest |flow| as a share of pull-out power over the ties concerned (%)
  alarm_to_action_s,        ///< per alarm, time from raised to the seat's first action after it; the mean (s)
  alarm_to_ack_s,           ///< per alarm, time from raised to its acknowledgement; the mean (s)
};
const char* to_string(Measure m);
std::optional<Measure> measure_from(std::string_view name);
/// True when a larger measured value is better (ace_minutes_share, lowest_reserve_mw).
bool higher_is_better(Measure m);
/// Every measure's name, comma-separated (for error messages).
std::string measure_names();
/// The zero point an objective gets when its file leaves `zero_at` out (README "Objectives").
double default_zero_at(Measure m, double target);
/// The label an objective gets when its file gives none ("largest frequency deviation").
std::string default_label(Measure m);

/// One objective as written in the exercise file (`objectives: [...]`).
struct ObjectiveDef {
  std::string id;        ///< unique ("" in a file: "o1", "o2", ... given)
  std::string seat;      ///< the seat it is for; "" = every seat
  Measure measure = Measure::largest_deviation_hz;
  double target = 0.0;   ///< full marks at or better than this
  /// No marks at or worse than this (default: twice the target for lower-is-better measures,
  /// half of it for higher-is-better; for a zero target, see the README). Linear in between.
  std::optional<double> zero_at;
  double weight = 1.0;   ///< > 0
  double ace_limit_mw = 0.0;  ///< ace_minutes_share only: the |ACE| limit per minute (MW; 0 = the alarm's ace_mw)
  std::string label;     ///< readable name (default: made from the measure)
};

}  // namespace droopline::study
