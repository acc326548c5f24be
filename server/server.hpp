#pragma once
// `droopline serve`: the HTTP/WebSocket service around one LiveSession.
//   listener (accepts, enforces the connection limit)
//   http_session (requests: API, static files, upgrade)   websocket_session (one client)
//   hub (the set of clients; fans one encoded frame out to all)
#include <atomic>
#include <cstdint>
#include <memory>
#include <mutex>
#include <string>
#include <vector>

#include <utility>  // before Boost 1.74's asio, whose awaitable.hpp uses std::exchange unincluded

#include <boost/asio.hpp>
#include <boost/beast.hpp>

#include "hub.hpp"
#include "live_session.hpp"
#include "static_files.hpp"
#include "sweep_jobs.hpp"

namespace droopline::server {

namespace net = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;
namespace websocket = beast::websocket;
using tcp = net::ip::tcp;

/// Everything `droopline serve` can be told.
struct Options {
  std::string scenario_file;
  std::string host = "127.0.0.1";
  unsigned short port = 8080;
  std::string token_file;
  std::string journal;                     ///< empty: no journal
  std::string web_root;                    ///< folder served as static files
  std::vector<std::string> allow_origins;  ///< extra Origins allowed to open the stream
  double speed = 1.0;
  double frame_hz = 20.0;
  double history_s = 600.0;
  std::size_t max_body_bytes = 1 << 20;     ///< HTTP body limit
  std::size_t max_message_bytes = 64 << 10; ///< WebSocket message limit
  std::size_t max_connections = 256;
  std::size_t client_queue = 64;            ///< queued messages per client before old frames drop
  /// Kernel send buffer per streaming socket. Bounded (instead of the kernel's autotuning, which
  /// goes to megabytes) so a client that stops reading is noticed by the queue above within
  /// seconds, rather than being fed minutes of stale frames from the kernel's buffer.
  int stream_send_buffer = 128 << 10;
  std::size_t replay_workers = 2;
  std::size_t max_replays = 2;              ///< replays running or queued at once (then 429)
  double max_replay_unit_steps = 2e9;       ///< duration/step * units per replay (then 413)
  unsigned io_threads = 1;
};

/// Counters for /metrics (any thread).
struct NetCounters {
  std::atomic<std::uint64_t> connections{0};     ///< open TCP connections (HTTP and WebSocket)
  std::atomic<std::uint64_t> refused{0};         ///< connections refused at the limit
  std::atomic<std::uint64_t> clients{0};         ///< open WebSocket clients
  std::atomic<std::uint64_t> frames_sent{0};
  std::atomic<std::uint64_t> frames_dropped{0};
  std::atomic<std::uint64_t> slow_closed{0};     ///< clients closed for staying behind
  std::atomic<std::uint64_t> requests{0};
  std::atomic<std::uint64_t> replays{0};
  std::atomic<std::uint64_t> replays_refused{0};
  std::atomic<std::uint64_t> replays_active{0};
};

/// Shared by every session of one server.
struct Context {
  Options options;
  net::io_context* ioc = nullptr;
  std::string token;
  std::unique_ptr<LiveSession> live;
  Hub hub;
  NetCounters counters;
  std::unique_ptr<net::thread_pool> replay_pool;
  SweepJobs sweeps;
  std::unique_ptr<StaticFiles> files;  ///< the page's files, under the canonical web root
  std::atomic<bool> stopping{false};
};

/// Runs the service until SIGINT/SIGTERM. Returns the process exit code.
int serve(Options options);

/// True when `given` equals `token` (constant time).
bool token_matches(const std::string& given, const std::string& token);

}  // namespace droopline::server
