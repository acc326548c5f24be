#pragma once
// `droopline serve`: the HTTP/WebSocket service around one LiveSession.
//   listener (accepts, enforces the connection limit)
//   http_session (requests: limits, static files, upgrade; the API through api::Api)
//   websocket_session (one client; its control messages through api::Api)
//   hub (the set of clients; fans one encoded frame out to all)
#include <atomic>
#include <chrono>
#include <cstdint>
#include <memory>
#include <mutex>
#include <string>
#include <unordered_map>
#include <vector>

#include <utility>  // before Boost 1.74's asio, whose awaitable.hpp uses std::exchange unincluded

#include <boost/asio.hpp>
#include <boost/beast.hpp>

#include "api.hpp"
#include "hub.hpp"
#include "serve.hpp"
#include "static_files.hpp"

namespace droopline::server {

namespace net = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;
namespace websocket = beast::websocket;
using tcp = net::ip::tcp;

/// Shared by every session of one server: the API's services plus what only the network needs.
/// Open connections per client address (thread-safe).
class PerAddress {
 public:
  /// Counts one more from `address` unless it has `most` open already (then false).
  bool take(const std::string& address, std::size_t most);
  void release(const std::string& address);

 private:
  std::mutex mutex_;
  std::unordered_map<std::string, std::size_t> open_;
};

/// After a refused token or join code, when that client address may be checked again (thread-safe):
/// a WebSocket client that reconnects to try again is held back as one that stays connected.
class AuthBackoff {
 public:
  using Clock = std::chrono::steady_clock;
  /// What a refused token or code costs: over HTTP and on an upgrade the answer waits this long,
  /// after a WebSocket `auth` message the address does.
  static constexpr Clock::duration kWait = std::chrono::seconds(1);
  /// True while `address` must wait after its last refusal.
  bool too_soon(const std::string& address, Clock::time_point now);
  /// A refusal for `address`: it waits kWait before its next check.
  void refused(const std::string& address, Clock::time_point now);

 private:
  std::mutex mutex_;
  std::unordered_map<std::string, Clock::time_point> next_;
};

struct Context : Services {
  PerAddress per_address;                      ///< open connections by client address
  AuthBackoff auth_backoff;                    ///< refused tokens and codes by client address
  net::io_context* ioc = nullptr;
  Hub hub;                                     ///< the streaming clients
  std::unique_ptr<net::thread_pool> replay_pool;  ///< the worker pool behind `run_on_workers`
  std::unique_ptr<StaticFiles> files;  ///< the page's files, under the canonical web root
  std::unique_ptr<Api> api;            ///< the route table every request and control message goes through

  /// The session's loop broadcasts through `hub`, a member of this struct, while `live` belongs
  /// to the base and would outlive it: the loop is stopped first on every way out of `serve`.
  ~Context() {
    if (live) live->stop();
  }
};

}  // namespace droopline::server
