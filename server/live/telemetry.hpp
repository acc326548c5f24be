#pragma once
// What the live session sends and keeps, as data and as text: the ring of history rows, the
// greeting of a joining client, the telemetry frame, and history rows as CSV or JSON. Pure
// functions of their inputs; the live session decides when and under which lock they run.
#include <cstddef>
#include <cstdint>
#include <deque>
#include <mutex>
#include <memory>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "droopline/engine.hpp"

namespace droopline {

/// Fixed-capacity ring of equal-width rows in one flat array: the loop appends without
/// allocating, and a reader copies it out in two block copies.
class HistoryRing {
 public:
  void reset(std::size_t width, std::size_t capacity);
  void push(const std::vector<double>& row);  ///< row.size() == width(); the oldest row gives way
  /// Drops the newest rows whose time (the first value) lies after `t_s` (a restore went back).
  void drop_after(double t_s);
  /// The rows replaced by `flat` (rows of width(), oldest first; the newest that fit are kept).
  void assign(const std::vector<double>& flat);
  std::size_t width() const { return width_; }
  std::size_t size() const { return count_; }
  /// All rows, oldest first, concatenated.
  std::vector<double> flat() const;

 private:
  std::size_t width_ = 0, cap_ = 0, start_ = 0, count_ = 0;
  std::vector<double> data_;
};

/// What a joining client is greeted with, copied on the loop thread between two steps (cheap) and
/// turned into JSON elsewhere (not cheap: up to `history_s` of rows).
struct HelloSnapshot {
  std::shared_ptr<const std::string> scenario_json;
  std::vector<std::string> columns;
  double every_s = 0.1;
  std::vector<double> rows;  ///< flat, columns.size() per row
  std::vector<std::string> events;
  double speed = 1.0;
  bool paused = false;
  std::string alarms_json = "[]";  ///< the alarms active now (a JSON array; empty without an exercise)
  /// The greeting; `history_s` >= 0 keeps only the history's last that many seconds (0: none).
  std::string to_json(double history_s = -1.0) const;
};

/// The event log of one run (thread-safe): each entry numbered (`seq`, rising), at most 1,000
/// kept; a disturbance is kept once, in its latest state, moved to the end with a new `seq` at
/// each update so that since() hands out what changed.
class EventLog {
 public:
  struct Entry {
    std::uint64_t seq;
    std::string text;
    std::int64_t disturbance;
    double at_s;  ///< a disturbance's start (simulated s); NaN for other events
    double t_s;   ///< when it happened (simulated s; a disturbance: its start); NaN when unknown
  };
  /// Numbers `event` (adds "seq"), logs it, and returns its text for the clients. `disturbance`:
  /// its index when the event is a disturbance (replaces the entry of that index), else -1.
  std::shared_ptr<const std::string> add(nlohmann::ordered_json event, std::int64_t disturbance = -1);
  /// {"events": [...]} of the entries with seq > `since`.
  std::string since(std::uint64_t since) const;
  /// Every entry's text, oldest first.
  std::vector<std::string> all() const;
  /// The earliest start (simulated s) of a disturbance in the log at or after `from_s`, if any.
  std::optional<double> first_disturbance_from(double from_s) const;
  /// Empties the log (the numbering goes on).
  void clear();
  /// Drops the entries of what happened after `t_s` (simulated s): a restore or rewind went back
  /// there, and on the course that goes on from it none of that has happened (a disturbance still
  /// shown as being measured would also tell the trainees what the script does next).
  void drop_after(double t_s);
  /// The entries now (a save point keeps them), and put back in their place (a restore to it).
  std::deque<Entry> entries() const;
  void put_entries(std::deque<Entry> entries);

 private:
  mutable std::mutex mutex_;
  std::deque<Entry> entries_;
  std::uint64_t seq_ = 0;
};

/// The pieces of `text` between occurrences of `separator` (one piece when there is none).
std::vector<std::string> split_on(std::string_view text, std::string_view separator);

/// The telemetry frame: the state of every area, unit and tie now, as JSON text.
std::string frame_json(const Engine& engine, double wall_s, bool paused, double speed);

/// History rows within [from_s, to_s], every `every_s` (0 = all; rows are `out_dt` apart), as CSV
/// (header line first) or JSON ({"columns": [...], "rows": [[...], ...]}).
std::string rows_text(const std::vector<std::string>& columns, const std::vector<double>& rows, double out_dt,
                      double from_s, double to_s, double every_s, bool csv);

/// The rows (flat, `width` values each) whose time lies within [from_s, to_s].
std::vector<double> rows_within(std::size_t width, const std::vector<double>& rows, double from_s, double to_s);

}  // namespace droopline
