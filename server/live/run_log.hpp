#pragma once
// What the live session tells the training records about a run as it goes (server/records keeps
// them in SQLite). Every call comes from the loop thread and must return at once: the store
// queues the write for a thread of its own, so a slow, full or read-only disk never holds up the
// simulation (the store logs and reports its trouble; the session goes on). The journal stays
// the source of truth: a run the records lost the end of (a crash) is completed from the journal
// at the next start and marked incomplete.
#include <cstdint>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace droopline {

/// One seat of a run as it starts.
struct RunSeat {
  std::string id;
  std::string name;                 ///< the seat's display name
  std::vector<std::string> areas;
};

/// A run begins: an exercise (or a plain scenario) loaded, or the session reset.
struct RunStart {
  std::string run_id;               ///< random 128-bit hex, also in the journal's scenario record ("run")
  std::string exercise;             ///< the exercise's name ("" for a plain scenario)
  std::string scenario;             ///< the scenario's name
  std::string journal_path;         ///< absolute path of the journal ("" without one)
  double started_unix_s = 0.0;      ///< wall clock (seconds since 1970)
  std::vector<RunSeat> seats;
};

class RunLog {
 public:
  virtual ~RunLog() = default;
  virtual void run_started(const RunStart& start) = 0;
  /// A trainee entered their name when joining a seat (or changed it).
  virtual void trainee_joined(const std::string& run_id, const std::string& seat, const std::string& name,
                              double t_s) = 0;
  /// A trainee carried over from the run before (still at the seat after a reset) is taken off
  /// this run: somebody else joined the seat before they acted in it.
  virtual void trainee_withdrawn(const std::string& /*run_id*/, const std::string& /*seat*/,
                                 const std::string& /*name*/) {}
  /// Commands applied at simulation time `t_s` by `by` (as the journal writes them).
  virtual void actions(const std::string& run_id, double t_s, const std::string& by,
                       const nlohmann::json& commands) = 0;
  /// An alarm raised, cleared or acknowledged (`alarm_to_json`; the store keeps the latest per id).
  virtual void alarm(const std::string& run_id, const nlohmann::ordered_json& alarm) = 0;
  /// An instructor's note.
  virtual void note(const std::string& run_id, double t_s, const std::string& by, const std::string& text) = 0;
  /// Every seat's scores (`seat_score_to_json` each), sent every simulated minute and at the end.
  virtual void scores(const std::string& run_id, double t_s, const nlohmann::ordered_json& seats) = 0;
  /// The run ended: `complete` when the exercise reached its time limit or the instructor ended it;
  /// false when it was cut short (a reset, another scenario or exercise, the service stopping).
  virtual void run_ended(const std::string& run_id, double t_s, bool complete, const std::string& why) = 0;
};

}  // namespace droopline
