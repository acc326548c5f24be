#pragma once
// Parameter sweeps as jobs of the service: submitted over HTTP, run on threads of their own (one
// core is left to the real-time loop), polled for progress, fetched, or cancelled.
#include <atomic>
#include <cstdint>
#include <deque>
#include <memory>
#include <mutex>
#include <string>
#include <thread>

#include <nlohmann/json.hpp>

#include "droopline/sweep.hpp"

namespace droopline::server {

class SweepJobs {
 public:
  struct Job {
    std::string id;
    study::SweepSpec spec;
    std::string metric;
    std::atomic<std::uint64_t> done{0}, total{0};
    std::atomic<bool> cancel{false};
    std::atomic<bool> finished{false};
    // Set by the job's thread before `finished`:
    std::string status = "running";  ///< running, done, cancelled, failed
    std::string error;
    nlohmann::ordered_json result;
    std::string csv, svg;
    double wall_s = 0.0;
    std::jthread thread;
  };

  /// At most `max_running` jobs at once; the last `keep` finished ones are kept for fetching.
  explicit SweepJobs(std::size_t max_running = 1, std::size_t keep = 16) : max_running_(max_running), keep_(keep) {}
  ~SweepJobs();  ///< cancels what runs and waits for it

  /// Starts a job; nullptr with `error` when the limit is reached.
  std::shared_ptr<Job> submit(study::SweepSpec spec, std::string metric, std::string& error);
  std::shared_ptr<Job> find(const std::string& id) const;
  /// `{"id", "status", "done", "total", ...}`.
  static nlohmann::ordered_json status_json(const Job& job);

 private:
  std::size_t max_running_, keep_;
  mutable std::mutex mutex_;
  std::deque<std::shared_ptr<Job>> jobs_;
  std::uint64_t next_id_ = 1;
};

}  // namespace droopline::server
