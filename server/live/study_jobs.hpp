#pragma once
// Studies as jobs of the service (sweeps, fits): submitted over HTTP, run on threads of their own
// (one core is left to the real-time loop), polled for progress, fetched, or cancelled. One runner
// for every kind: a job runs its work function, which reports progress, watches the cancel flag and
// leaves its result JSON and named text artefacts (csv, svg, fragment) on the job.
#include <atomic>
#include <cstdint>
#include <deque>
#include <functional>
#include <map>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>
#include <vector>

namespace droopline::server {

class StudyJobs {
 public:
  struct Job {
    std::string id;    ///< unique within its kind ("1", "2", ...)
    std::string kind;  ///< "sweep", "fit": the route's collection without the "s"
    nlohmann::ordered_json info = nlohmann::ordered_json::object();  ///< fields shown in the status (metric, unit)
    std::atomic<std::uint64_t> done{0}, total{0};                    ///< progress in the work's own units (runs)
    std::atomic<bool> cancel{false};                                 ///< set by DELETE; the work checks it
    std::atomic<bool> finished{false};                               ///< the fields below are final (release/acquire)
    // Set by the work on the job's thread before `finished`:
    std::string status = "running";                ///< running, done, cancelled, failed
    std::string error;                             ///< why it failed
    nlohmann::ordered_json result;                 ///< the result document (json format)
    std::map<std::string, std::string> artefacts;  ///< other formats by name: "csv", "svg", "fragment"
    double wall_s = 0.0;                           ///< wall time of the work (s)
    std::jthread thread;

    /// The artefact `name` of a finished job, empty when it has none (never inserts: read from any thread).
    const std::string& artefact(const std::string& name) const;
    /// Raises `done` to `n` (never lowers it: progress comes from several threads) and sets `total`.
    void progress(std::uint64_t n, std::uint64_t of);
  };
  /// The work of one job: runs on the job's own thread, fills the job's status, result, artefacts.
  using Work = std::function<void(Job&)>;

  /// At most `max_running` jobs of each kind at once; the last `keep` finished ones of each kind are
  /// kept for fetching.
  explicit StudyJobs(std::size_t max_running = 1, std::size_t keep = 16) : max_running_(max_running), keep_(keep) {}
  ~StudyJobs();  ///< cancels what runs and waits for it

  /// Threads a job's work may use: every core but one (left to the real-time loop), at least one.
  static unsigned threads();

  /// Starts a job of `kind` running `work`; nullptr with `error` when that kind's limit is reached.
  /// An exception from the work fails the job with its message; the server goes on.
  std::shared_ptr<Job> submit(const std::string& kind, nlohmann::ordered_json info, Work work, std::string& error);
  /// The job of `kind` with `id`, or nullptr.
  std::shared_ptr<Job> find(const std::string& kind, const std::string& id) const;
  /// The jobs of `kind` still held (running, and the last finished ones), newest first.
  std::vector<std::shared_ptr<Job>> list(const std::string& kind) const;
  /// `{"id", "kind", "status", "done", "total", ...info, "error"?, "wall_s"?, "result"?}`.
  static nlohmann::ordered_json status_json(const Job& job);

 private:
  std::size_t max_running_, keep_;
  mutable std::mutex mutex_;
  std::deque<std::shared_ptr<Job>> jobs_;
  std::map<std::string, std::uint64_t> next_id_;  // per kind
};

}  // namespace droopline::server
