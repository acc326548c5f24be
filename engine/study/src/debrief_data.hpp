#pragma once
// The debrief worked out once (debrief.cpp) and written two ways: JSON (debrief.cpp) and HTML
// (debrief_html.cpp). Private to the study target.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "droopline/alarms.hpp"
#include "droopline/debrief.hpp"
#include "droopline/objectives.hpp"

namespace droopline::study {

/// One line of the timeline.
struct DebriefEvent {
  double t_s = 0.0;
  /// "script", "action", "event" (the scenario's own or the system's), "alarm raised",
  /// "alarm acknowledged", "alarm cleared", "save point", "restore", "rewind"
  std::string kind;
  std::string by;
  std::string what;
  std::string marker;                 ///< its mark on the charts: "3" (action), "S1" (script), "A2" (alarm)
  std::optional<double> to_action_s;  ///< alarm raised: until the first action of a seat it concerns
  std::string action_by;
  std::optional<double> to_ack_s;  ///< alarm raised: until its acknowledgement
  std::string ack_by;
};

/// One unit's response to a disturbance beside its droop share.
struct DebriefUnit {
  std::string id;
  double predicted_mw = 0.0;
  std::optional<double> response_10s_mw, response_30s_mw;
};

/// One disturbance's metrics beside its droop prediction.
struct DebriefDisturbance {
  double at_s = 0.0;
  std::string cause;
  double delta_mw = 0.0;
  std::optional<double> rocof_hz_per_s;
  bool zenith = false;
  std::optional<double> nadir_hz, nadir_at_s, settling_hz, response_mw_per_0p1hz;
  double pre_hz = 0.0;
  double predicted_settling_hz = 0.0;
  /// Secondary control was on in the island during the settling window (t0+20..t0+52 s): the
  /// settling frequency and the response figure then show its action, not the governors' alone.
  bool secondary_in_window = false;
  std::vector<DebriefUnit> units;
};

/// A seat as the debrief shows it.
struct DebriefSeat {
  std::string id, name, trainee;
  std::vector<std::string> areas;
};

/// Chart samples: each area's frequency and ACE, each tie's flow, at `t_s`.
struct DebriefSeries {
  std::vector<double> t_s;
  std::vector<std::string> areas, ties;
  std::vector<std::vector<double>> f_hz, ace_mw, flow_mw;  ///< [area or tie][sample]
};

struct Debrief {
  std::string journal, run_id;
  std::string name;      ///< the exercise's (else the scenario's) name
  std::string briefing;  ///< "" for a plain scenario
  bool is_exercise = false;
  bool complete = false;
  std::string why;     ///< how it ended (or why it counts as incomplete)
  double end_s = 0.0;  ///< the last simulated time
  double f0_hz = 50.0;
  AlarmLimits limits;  ///< the bands drawn on the frequency chart
  std::vector<DebriefSeat> seats;
  std::vector<SeatScore> scores;
  std::vector<DebriefEvent> timeline;  ///< by time
  std::vector<DebriefDisturbance> disturbances;
  std::vector<DebriefNote> notes;  ///< the journal's, then the extras'
  DebriefSeries series;
};

/// Reads the journal and re-simulates the run; nullopt with `error` as debrief_html.
/// `runs`, when given, receives every run of the journal (as debrief_html).
std::optional<Debrief> build_debrief(const std::string& journal_path, const std::string& run_id,
                                     const DebriefExtras& extras, std::string& error,
                                     std::vector<DebriefRun>* runs = nullptr);
/// The debrief as one self-contained HTML page.
std::string render_debrief_html(const Debrief& d);

}  // namespace droopline::study
