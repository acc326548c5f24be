#pragma once
// What the live session keeps of its run for readers on other threads: the recorded rows (a ring
// of `history_s`), their columns, the scenario, and the event log. The loop writes; HTTP handlers
// and joining clients copy out under the lock and format without holding the loop up.
#include <chrono>
#include <cstdint>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "droopline/comtrade.hpp"
#include "droopline/engine.hpp"
#include "telemetry.hpp"

namespace droopline {

/// The live session's history (thread-safe).
class HistoryStore {
 public:
  /// A new run of `def` on `engine`: its columns and scenario; the rows and the event log emptied.
  void start(const Engine& engine, const SystemDef& def, double history_s);
  /// Appends one sampled row (the loop thread).
  void push(const std::vector<double>& row);
  /// Drops the rows after `t_s` (a restore or rewind went back there; the event log stays).
  void drop_after(double t_s);
  /// The rows kept now, flat (a save point keeps them); null when they take more than `budget_bytes`.
  std::shared_ptr<const std::vector<double>> copy_rows(std::size_t budget_bytes) const;
  /// The rows replaced by a save point's copy (a restore: the history becomes the save point's own,
  /// whichever course it was taken on); null empties them.
  void put_rows(const std::shared_ptr<const std::vector<double>>& rows);
  /// The greeting's copy of the scenario, columns, rows and events.
  void fill(HelloSnapshot& snap) const;
  /// Rows within [from_s, to_s] at whole multiples of `every_s` (0 = all), as CSV or JSON; none
  /// and `error` set when every_s is not a whole multiple of the recorded interval.
  std::optional<std::string> history(double from_s, double to_s, double every_s, bool csv, std::string& error) const;
  /// A COMTRADE record (IEEE C37.111-1999 ASCII) of the rows within [from_s, to_s]; times are
  /// simulation times after the wall time the run started.
  study::ComtradeRecord record(double from_s, double to_s) const;
  /// The run's event log (it has a lock of its own).
  EventLog& events() { return events_; }
  /// The run's event log, to read.
  const EventLog& events() const { return events_; }

 private:
  mutable std::mutex mutex_;
  std::vector<std::string> columns_;
  HistoryRing rows_;
  double every_s_ = 0.1;
  std::string scenario_name_;
  double nominal_hz_ = 50.0;
  std::chrono::system_clock::time_point started_;  // wall time of t = 0
  std::shared_ptr<const std::string> scenario_json_;
  EventLog events_;  // since the last reset or scenario load
};

}  // namespace droopline
