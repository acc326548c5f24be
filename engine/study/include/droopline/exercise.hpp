#pragma once
// A training exercise: a scenario, a briefing, operator seats with the areas each answers for, a
// hidden script of instructor events (timed or conditional), alarm thresholds and a time limit.
// Parsed and checked like a scenario: every problem as `path: message`.
#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/alarms.hpp"
#include "droopline/defs.hpp"
#include "droopline/objective_def.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// One operator seat.
struct SeatDef {
  std::string id;                       ///< short id ([A-Za-z0-9_-], unique)
  std::string name;                     ///< display name ("North desk")
  std::vector<std::string> areas;       ///< ids of the areas it answers for (at least one)
};

/// When a conditional script event fires.
struct ScriptCondition {
  enum class Kind { frequency_below, tie_above } kind = Kind::frequency_below;
  std::string area;            ///< frequency_below: the area
  double below_hz = 0.0;       ///< frequency_below: threshold (Hz)
  double for_s = 0.0;          ///< frequency_below: how long it must stay below (s)
  std::string tie;             ///< tie_above: the tie
  double above_pct = 0.0;      ///< tie_above: share of the tie's pull-out power (%)
};

/// One event of the hidden script: a command at a time, or when a condition first holds.
struct ScriptEventDef {
  std::string id;                        ///< unique within the script ("" in a file: "s1", "s2", ... given)
  std::optional<double> at_s;            ///< timed: simulation time (s)
  std::optional<ScriptCondition> when;   ///< conditional (exactly one of at_s and when)
  Command command;                       ///< what happens
  std::string note;                      ///< for the instructor ("the neighbour's largest unit trips")
};

struct ExerciseDef {
  std::string name;
  std::string briefing;                  ///< what the trainees must achieve (shown to seats)
  std::string scenario_path;             ///< as written in the file, when the scenario is a path ("" inline)
  std::vector<SeatDef> seats;
  std::vector<ScriptEventDef> script;
  AlarmLimits alarms;                    ///< defaults for f0 filled in, file values over them
  double time_limit_s = 0.0;             ///< the exercise's length (s)
  std::vector<ObjectiveDef> objectives;  ///< what each seat is scored on (may be empty)
};

/// A parsed and checked exercise: its definition and its checked scenario.
struct Exercise {
  ExerciseDef def;
  CheckedSystem system;
};

struct ExerciseLoad {
  std::optional<Exercise> exercise;  ///< set only when there are no errors
  std::vector<Issue> issues;         ///< errors first, then warnings
};

/// Most events a script may hold (file and additions together).
inline constexpr std::size_t kMaxScriptEvents = 1000;

/// Parses an exercise; a scenario given as a path is read relative to `base_dir`, and its problems
/// are reported under `scenario.` + their path.
ExerciseLoad parse_exercise(std::string_view json_text, const std::string& base_dir);
/// Reads a file and parses it (the scenario path is relative to the file's folder).
ExerciseLoad load_exercise_file(const std::string& path);
/// Static checks of one script event against a system (time, condition's ids and thresholds, its
/// command through `resolve`), each problem appended under `path` (`script[2].when.below_hz`).
void check_script_event(const CheckedSystem& system, const ScriptEventDef& event, const std::string& path,
                        std::vector<Issue>& issues);
/// Reads one script event from untrusted JSON (`{"id"?, "at_s" | "when", "command", "note"?}`): shape
/// and types only (check_script_event does the rest); nothing, with the problems, on error.
std::optional<ScriptEventDef> parse_script_event(std::string_view json_text, std::vector<Issue>& issues);
/// True when the JSON text looks like an exercise (an object with `seats` or `script`): lets
/// `droopline check` take either kind of file.
bool looks_like_exercise(std::string_view json_text);
/// The exercise as a self-contained exercise file (scenario inline, script with its ids,
/// alarm limits and objectives as filled in): `parse_exercise` of its dump gives the same
/// exercise. The journal keeps it, so a debrief needs nothing but the journal.
nlohmann::ordered_json exercise_to_json(const Exercise& exercise);

}  // namespace droopline::study
