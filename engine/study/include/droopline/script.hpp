#pragma once
// The hidden script of a live exercise: which instructor events are due after each step (timed
// ones a little ahead, so that their journal record can be written before they apply; conditional
// ones once their condition has held), and the instructor's edits (fire now, skip, shift, add).
// Copyable: a save point keeps the script with the engine.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/engine.hpp"
#include "droopline/exercise.hpp"

namespace droopline::study {

enum class ScriptState { pending, fired, skipped };
const char* to_string(ScriptState s);

struct ScriptEntry {
  ScriptEventDef def;                 ///< as now (a shift changes def.at_s)
  ScriptState state = ScriptState::pending;
  std::optional<double> fired_at_s;   ///< the time it was scheduled to apply
  double held_s = 0.0;                ///< frequency_below: how long the condition has held so far
  bool holding = false;               ///< frequency_below: the condition held at the last update
  std::string added_by;               ///< "" from the file, else who added it
};

/// A script event the caller should now submit (through the journal) to apply at `at_step`.
struct ScriptFiring {
  std::string id;
  Command command;
  std::int64_t at_step = 0;
};

class ScriptRunner {
 public:
  ScriptRunner(const CheckedSystem& system, std::vector<ScriptEventDef> script);
  /// After each step: the events to submit now, in time order; marks them fired. Timed events
  /// whose time falls within `lead_steps` steps of now are returned with their own step.
  std::vector<ScriptFiring> due(const Engine& engine, std::int64_t lead_steps);
  /// Fire a pending event at once (returned with the current step): nullopt with `why` otherwise.
  std::optional<ScriptFiring> fire_now(const std::string& id, const Engine& engine, std::string& why);
  bool skip(const std::string& id, std::string& why);
  /// Gives a pending event a new time (timed events only, not in the past).
  bool shift(const std::string& id, double at_s, double now_s, std::string& why);
  /// Adds an event (checked against the system: ids and bounds); its id is made when empty.
  bool add(ScriptEventDef event, const std::string& by, double now_s, std::string& why);
  const std::vector<ScriptEntry>& entries() const { return entries_; }
  /// After the session went back to `step` (a restore or rewind) with this runner as it was then:
  /// events it had handed out to apply after `step` were refused with the pipeline, so they are
  /// due again.
  void rewound(std::int64_t step);

 private:
  ScriptEntry* find(const std::string& id, std::string& why);
  // value types only (CheckedSystem shares an immutable definition)
  CheckedSystem system_;
  std::vector<ScriptEntry> entries_;
  std::optional<double> last_t_s_;  // time of the last due(): conditions hold for the time between
};

/// The script as JSON for the instructor (`GET /api/v1/script`): each event's id, time or
/// condition, command, note, state and when it fired.
nlohmann::ordered_json script_to_json(const std::vector<ScriptEntry>& entries);

}  // namespace droopline::study
