#pragma once
// What the API layer works on: the options of `droopline serve`, the counters the network layer
// keeps, and the live session, study jobs and worker pool the routes hand work to. No sockets.
#include <atomic>
#include <cstdint>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "live_session.hpp"
#include "records_store.hpp"
#include "seats.hpp"
#include "study_jobs.hpp"

namespace droopline::server {

/// Everything `droopline serve` can be told.
struct Options {
  std::string scenario_file;               ///< --scenario (or else --exercise)
  std::string exercise_file;               ///< --exercise: a training exercise
  std::string host = "127.0.0.1";
  unsigned short port = 8080;
  std::string token_file;
  std::string journal;                     ///< empty: no journal
  std::string records;                     ///< --records: the records file, "none", or empty (beside the journal)
  std::string web_root;                    ///< folder served as static files
  std::vector<std::string> allow_origins;  ///< extra Origins allowed to open the stream
  double speed = 1.0;
  double frame_hz = 20.0;
  bool wake_every_step = false;  ///< the loop wakes at each step's deadline, not once per frame
  double history_s = 600.0;
  std::size_t max_body_bytes = 1 << 20;      ///< HTTP body limit
  std::size_t max_fit_body_bytes = 16 << 20;  ///< HTTP body limit of POST /api/v1/fits (a recording inside)
  std::size_t max_message_bytes = 64 << 10;  ///< WebSocket message limit
  std::size_t max_connections = 256;
  /// Open connections from one address at most (127.0.0.1 and ::1 exempt: this machine, or a TLS
  /// proxy in front), so one machine on the LAN cannot take every place and lock the room out.
  std::size_t max_connections_per_address = 32;
  std::size_t client_queue = 64;  ///< queued messages per client before old frames drop
  /// Kernel send buffer per streaming socket. Bounded (instead of the kernel's autotuning, which
  /// goes to megabytes) so a client that stops reading is noticed by the queue above within
  /// seconds, rather than being fed minutes of stale frames from the kernel's buffer.
  int stream_send_buffer = 128 << 10;
  std::size_t replay_workers = 2;
  std::size_t max_replays = 2;         ///< replays running or queued at once (then 429)
  double max_replay_unit_steps = 2e9;  ///< duration/step * units per replay (then 413)
  unsigned io_threads = 1;
};

/// Counters for /metrics (any thread).
struct NetCounters {
  std::atomic<std::uint64_t> connections{0};      ///< open TCP connections (HTTP and WebSocket)
  std::atomic<std::uint64_t> refused{0};          ///< connections refused at the limit
  std::atomic<std::uint64_t> clients{0};          ///< open WebSocket clients
  std::atomic<std::uint64_t> frames_sent{0};      ///< telemetry frames delivered
  std::atomic<std::uint64_t> frames_dropped{0};   ///< telemetry frames dropped for slow clients
  std::atomic<std::uint64_t> slow_closed{0};      ///< clients closed for staying behind
  std::atomic<std::uint64_t> requests{0};         ///< HTTP requests answered
  std::atomic<std::uint64_t> replays{0};          ///< replays run
  std::atomic<std::uint64_t> replays_refused{0};  ///< replays refused (busy or too large)
  std::atomic<std::uint64_t> replays_active{0};   ///< replays (and assessments) running or queued
  std::atomic<std::uint64_t> auth_refused{0};     ///< tokens and join codes refused
};

/// The state one server's routes share (the network layer's Context extends it).
struct Services {
  Options options;                    ///< as given on the command line
  std::string token;                  ///< the instructor token
  std::unique_ptr<LiveSession> live;  ///< the live session
  NetCounters counters;               ///< for /metrics
  StudyJobs jobs;                     ///< sweep and fit jobs submitted over the API
  SeatRoster seats;                   ///< the running exercise's seats and join codes (none without one)
  /// Runs a job on the worker pool (replays, modes, assessments): never on the loop or I/O threads.
  std::function<void(std::function<void()>)> run_on_workers;
  /// The training records (none without --records or a journal, or with --records none).
  std::shared_ptr<records::RecordsStore> records;
  /// Set when the service begins to stop: listeners close, replays end where they are.
  std::atomic<bool> stopping{false};
};

/// True when `given` equals `token` (constant time).
bool token_matches(const std::string& given, const std::string& token);

}  // namespace droopline::server
