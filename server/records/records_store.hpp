#pragma once
// Training records in one SQLite file: runs, their seats and trainees, actions,
// alarms, scores and notes. The live session's calls (RunLog) return at once:
// each becomes one transaction on a writer thread of the store's own. Trouble
// with the file (cannot open, read-only, full, I/O error) is logged once with
// the file and SQLite's reason, shown by status(), and the store stops writing
// until the next run starts (then it tries again); it never throws at the
// session. Reads (the records routes) open a connection of their own, so they
// run beside the writer.
#include <condition_variable>
#include <deque>
#include <functional>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <thread>
#include <utility>
#include <vector>

#include "run_log.hpp"
#include "sqlite_db.hpp"

namespace droopline::records {

/// The store's health, for GET /api/v1/records/status.
struct Status {
  std::string file;   ///< the records file
  bool ok = false;    ///< open and writing
  std::string error;  ///< why not (empty when ok)
};

/// The filters of the run list and the CSV export (already validated: see
/// `check_filter`).
struct RunFilter {
  std::string trainee;   ///< a part of a trainee's name, any case ("" any)
  std::string exercise;  ///< a part of the exercise's name, any case ("" any)
  std::string from;      ///< YYYY-MM-DD, runs started that day or later (UTC); "" any
  std::string to;        ///< YYYY-MM-DD, runs started that day or earlier (UTC); "" any
};


/// "" when `f` is fit for the queries, else what is wrong and where ("from:
/// ...").
std::string check_filter(const RunFilter& f);
/// True for a run id as the live session makes them: 32 lower-case hex digits.
bool valid_run_id(std::string_view id);
/// One CSV cell (RFC 4180): quoted when needed, and a text a spreadsheet would
/// read as a formula (starting with = + - @, tab or carriage return) prefixed
/// with an apostrophe.
std::string csv_cell(std::string_view text);

class RecordsStore : public RunLog {
 public:
  using json = nlohmann::ordered_json;
  /// Opens (creating the file) and brings the schema to the current version,
  /// then recovers: runs left running are marked incomplete and completed from
  /// their journals. Never throws: a file that cannot be used leaves the store
  /// not ok (status() says why). `max_bytes` caps the file (0: no cap; a full
  /// disk made small, for tests).
  explicit RecordsStore(std::string path, long long max_bytes = 0);
  /// Writes what is queued, then closes.
  ~RecordsStore() override;
  RecordsStore(const RecordsStore&) = delete;
  RecordsStore& operator=(const RecordsStore&) = delete;

  Status status() const;
  bool ok() const { return status().ok; }
  /// Waits until everything queued so far is written (or dropped).
  void flush();

  // RunLog (any thread; queued, never blocking)
  void run_started(const RunStart& start) override;
  void trainee_joined(const std::string& run_id, const std::string& seat, const std::string& name, double t_s) override;
  void trainee_withdrawn(const std::string& run_id, const std::string& seat, const std::string& name) override;
  void actions(const std::string& run_id, double t_s, const std::string& by, const nlohmann::json& commands) override;
  void alarm(const std::string& run_id, const nlohmann::ordered_json& alarm) override;
  void note(const std::string& run_id, double t_s, const std::string& by, const std::string& text) override;
  void scores(const std::string& run_id, double t_s, const nlohmann::ordered_json& seats) override;
  void run_ended(const std::string& run_id, double t_s, bool complete, const std::string& why) override;

  // Reads (any thread). nullopt with `error` set when the file cannot be read.
  /// Runs newest first, with seats, trainees and latest scores.
  std::optional<json> runs(const RunFilter& filter, std::string& error) const;
  /// Everything of one run; nullopt with `error` empty when there is no such
  /// run.
  std::optional<json> run(const std::string& run_id, std::string& error) const;
  /// Each trainee's attempts, oldest first: exercise, date, seat, score.
  std::optional<json> trainees(std::string& error) const;
  /// One row per run and seat (date, exercise, run_id, status, seat, trainee,
  /// score, objectives).
  std::optional<std::string> export_csv(const RunFilter& filter, std::string& error) const;

  // Writes from the routes; `done` runs on the writer thread ("" when written,
  // else why).
  /// A note after (or during) a run; `done` gets "unknown run" when there is
  /// none.
  void add_note(const std::string& run_id, const std::string& by, const std::string& text,
                std::function<void(std::string)> done);
  /// Replaces the trainee `name` everywhere with "(removed)"; `done` gets the
  /// rows changed.
  void delete_trainee(const std::string& name, std::function<void(long long, std::string)> done);

 private:
  // One event: written in one transaction (false with the reason in the string:
  // rolled back).
  using Write = std::function<bool(Db&, std::string&)>;
  struct Job {
    Write write;
    bool retry = false;                     // a new run, or an instructor's write: reopen if failed
    std::function<void(std::string)> done;  // after the transaction (the error, "" when written)
  };
  void push(Job job);
  void queue(Write write);  // a RunLog event: dropped while the file fails
  void writer_loop();
  bool open_writer(const std::string& why_incomplete);
  void fail(const std::string& reason);
  bool recover(const std::string& why);
  bool reader(Db& db, std::string& error) const;

  std::string path_;
  long long max_bytes_ = 0;
  Db db_;  // the writer's (writer thread only, after the constructor)
  mutable std::mutex mutex_;
  std::condition_variable wake_, drained_;
  std::deque<Job> queue_;
  bool busy_ = false, stop_ = false, overflowed_ = false;
  bool ok_ = false;
  std::string error_;
  std::thread writer_;
};

}  // namespace droopline::records
