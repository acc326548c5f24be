#pragma once
// The session journal: one JSON object per line, appended and flushed to the disk before the
// command it records is acknowledged, so `droopline replay` can rebuild a live session exactly.
// The file is opened for each record (commands are rare next to the cost of fdatasync), so the
// journal survives log rotation and a disk that is remounted or freed while the service runs; a
// record that cannot be written whole is cut off again, so the file never holds half a line
// ahead of later records. The reader (`droopline replay`) is droopline/journal_read.hpp.
//
//   {"type":"scenario","step":0,"run":"<32 hex>","scenario":{...}}
//                                                     a scenario was loaded (or the session reset): a
//                                                     new run, its random id ("run", absent in older
//                                                     journals)
//   {"type":"exercise","step":0,"run":...,"exercise":{...}}
//                                                     right after the scenario record of an exercise
//                                                     run: study::exercise_to_json
//   {"type":"commands","step":N,"commands":[...],"by":"instructor"}
//                                                     commands applied before step N, and who sent
//                                                     them (absent in older journals: the instructor)
//   {"type":"script","step":N,"edit":"add"|"fire"|"skip"|"shift","id":...,"by":...}
//                                                     an exercise's script edited (for the record:
//                                                     its firings are command records, by "script")
//   {"type":"ack","step":N,"alarm":ID,"by":...}       alarm ID acknowledged between steps N-1 and N
//                                                     (written before it takes effect, as commands;
//                                                     follows the run's lineage like them)
//   {"type":"trainee","step":N,"seat":...,"name":...} a seat's trainee gave their name (repeated at
//                                                     step 0 of a reset's new run)
//   {"type":"note","step":N,"by":"instructor","text":...}
//                                                     the instructor's note (never sent to seats)
//   {"type":"end","step":N,"complete":true|false,"why":...}
//                                                     the run ended: complete at the exercise's time
//                                                     limit or by the instructor; else cut short (a
//                                                     reset, another load, the service stopping)
//   {"type":"stop","step":N}                          graceful shutdown after N steps
#include <atomic>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <functional>
#include <memory>
#include <mutex>
#include <thread>
#include <string>
#include <vector>

namespace droopline {

class Journal {
 public:
  /// Appends to `path` (created if missing); an empty path journals nothing.
  explicit Journal(std::string path);
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  /// False when the file could not be created or opened for appending; `error()` says why.
  bool ok() const { return ok_; }
  const std::string& error() const { return error_; }
  const std::string& path() const { return path_; }
  /// What opening the file repaired ("" when nothing): a torn last record cut off.
  const std::string& repaired() const { return repaired_; }

  /// Appends one line and makes it durable (write + fdatasync). On failure: false, nothing of the
  /// line left in the file, `error()` says why and `http_status()` is 507 for a full disk or
  /// quota, 500 for anything else (read-only, I/O error).
  bool append(const std::string& json_line);
  int http_status() const { return status_; }

 private:
  std::string path_;
  void cut_torn_tail();
  void check_last_line();
  bool ok_ = true;
  std::string error_;
  std::string repaired_;
  int status_ = 500;
};

/// Writes journal records on a thread of its own, so the real-time loop never waits on the disk.
/// Records are written in the order submitted; each submission's outcome turns from `writing` to
/// `durable` or `failed`, and `wake` is called after each (from the writer thread).
class JournalWriter {
 public:
  enum State : int { writing = 0, durable = 1, failed = 2 };
  struct Outcome {
    std::atomic<int> state{writing};
    int status = 500;   ///< HTTP status when failed: 507 full disk, 500 otherwise
    std::string error;  ///< why it failed (set before `state`)
  };

  JournalWriter(std::string path, std::function<void()> wake);
  ~JournalWriter();
  JournalWriter(const JournalWriter&) = delete;
  JournalWriter& operator=(const JournalWriter&) = delete;

  bool ok() const { return journal_.ok(); }
  const std::string& path() const { return journal_.path(); }

  /// Queues one record; the outcome is shared with the writer thread.
  std::shared_ptr<const Outcome> submit(std::string json_line);
  /// Blocks until every submitted record is durable or failed.
  void wait_idle();
  /// Waits for the queue to drain, then writes one record on the calling thread. Only for the
  /// thread that submits (so nothing else writes meanwhile); false with `error()` on failure.
  bool append_now(const std::string& json_line);
  const std::string& error() const { return journal_.error(); }
  int http_status() const { return journal_.http_status(); }
  const std::string& repaired() const { return journal_.repaired(); }

 private:
  void run();

  Journal journal_;
  std::function<void()> wake_;
  std::mutex mutex_;
  std::condition_variable cv_;
  std::deque<std::pair<std::string, std::shared_ptr<Outcome>>> queue_;
  bool busy_ = false;
  bool stop_ = false;
  std::thread thread_;
};

}  // namespace droopline
