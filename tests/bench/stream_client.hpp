#pragma once
// What the streaming benchmarks share: a Beast WebSocket client that notes each frame's latency,
// starting and stopping `droopline serve`, small HTTP requests, and reading the loop's lateness
// histogram from /metrics.
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <memory>
#include <regex>
#include <string>
#include <vector>

#include <utility>  // before Boost 1.74's asio (std::exchange)

#include <boost/asio.hpp>
#include <boost/beast.hpp>

#include "child_process.hpp"

namespace bench {

namespace net = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;
namespace websocket = beast::websocket;
using tcp = net::ip::tcp;
namespace fs = std::filesystem;

inline double wall_now() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

struct Stats {
  std::vector<double> latency_s;
  std::uint64_t frames = 0;
  std::uint64_t dropped = 0;
  bool measuring = false;
};

// One streaming client: connect, handshake, read forever, note each frame's latency.
class Client : public std::enable_shared_from_this<Client> {
 public:
  Client(net::io_context& ioc, Stats& stats) : ws_(net::make_strand(ioc)), stats_(stats) {}
  void start(const tcp::resolver::results_type& ep, std::string host) {
    host_ = std::move(host);
    beast::get_lowest_layer(ws_).async_connect(ep, [self = shared_from_this()](beast::error_code ec, auto) {
      if (ec) return;
      self->ws_.async_handshake(self->host_, "/api/v1/stream", [self](beast::error_code ec2) {
        if (!ec2) self->read();
      });
    });
  }
  void stop() {
    net::post(ws_.get_executor(), [self = shared_from_this()] {
      beast::error_code ignored;
      beast::get_lowest_layer(self->ws_).socket().close(ignored);
    });
  }

 private:
  void read() {
    ws_.async_read(buf_, [self = shared_from_this()](beast::error_code ec, std::size_t) {
      if (ec) return;
      self->on_message();
      self->read();
    });
  }
  void on_message() {
    const std::string_view text(static_cast<const char*>(buf_.cdata().data()), buf_.size());
    if (stats_.measuring) {
      if (text.find("\"type\":\"frame\"") != std::string_view::npos) {
        const auto p = text.find("\"wall_s\":");
        if (p != std::string_view::npos) {
          const double sent = std::strtod(text.data() + p + 9, nullptr);
          stats_.latency_s.push_back(wall_now() - sent);
          ++stats_.frames;
        }
      } else if (text.find("\"type\":\"dropped\"") != std::string_view::npos) {
        const auto p = text.find("\"frames\":");
        if (p != std::string_view::npos) stats_.dropped += std::strtoull(text.data() + p + 9, nullptr, 10);
      }
    }
    buf_.consume(buf_.size());
  }

  websocket::stream<beast::tcp_stream> ws_;
  beast::flat_buffer buf_;
  Stats& stats_;
  std::string host_;
};

inline bool wait_listening(const Child& c) {
  std::string line;
  char ch;
  const auto until = std::chrono::steady_clock::now() + std::chrono::seconds(15);
  while (std::chrono::steady_clock::now() < until && read(c.out_fd, &ch, 1) == 1) {
    if (ch == '\n') {
      if (line.rfind("listening on", 0) == 0) return true;
      line.clear();
    } else {
      line += ch;
    }
  }
  return false;
}

inline void stop_child(Child& c) {
  if (c.pid <= 0) return;
  kill(c.pid, SIGTERM);
  int status = 0;
  waitpid(c.pid, &status, 0);
  close(c.out_fd);
  c.pid = -1;
}

// CPU time of every thread of a process, in seconds, at nanosecond resolution (schedstat).
inline double cpu_seconds(pid_t pid) {
  double total = 0;
  std::error_code ec;
  for (const auto& t : fs::directory_iterator("/proc/" + std::to_string(pid) + "/task", ec)) {
    std::ifstream in(t.path() / "schedstat");
    unsigned long long ns = 0;
    if (in >> ns) total += static_cast<double>(ns) * 1e-9;
  }
  return total;
}

inline std::string http_get(unsigned short port, const std::string& target) {
  net::io_context ioc;
  beast::tcp_stream s(ioc);
  s.connect(tcp::endpoint(net::ip::make_address("127.0.0.1"), port));
  http::request<http::empty_body> req{http::verb::get, target, 11};
  req.set(http::field::host, "127.0.0.1");
  http::write(s, req);
  beast::flat_buffer b;
  http::response<http::string_body> res;
  http::read(s, b, res);
  return res.body();
}

// Cumulative lateness histogram from /metrics: (upper bound, count) pairs.
inline std::vector<std::pair<double, double>> lateness(unsigned short port) {
  const std::string text = http_get(port, "/metrics");
  std::vector<std::pair<double, double>> out;
  std::regex re(R"re(droopline_loop_lateness_seconds_bucket\{le="([^"]+)"\} (\S+))re");
  for (auto it = std::sregex_iterator(text.begin(), text.end(), re); it != std::sregex_iterator(); ++it) {
    const std::string le = (*it)[1];
    out.emplace_back(le == "+Inf" ? 1e9 : std::stod(le), std::stod((*it)[2]));
  }
  return out;
}

inline double p99_bound(const std::vector<std::pair<double, double>>& a, const std::vector<std::pair<double, double>>& b) {
  if (a.size() != b.size() || b.empty()) return -1;
  const double total = b.back().second - a.back().second;
  for (std::size_t i = 0; i < b.size(); ++i)
    if (b[i].second - a[i].second >= 0.99 * total) return b[i].first;
  return b.back().first;
}

inline double percentile(std::vector<double> v, double q) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  return v[std::min(v.size() - 1, static_cast<std::size_t>(q * static_cast<double>(v.size())))];
}

inline unsigned short free_port() {
  net::io_context ioc;
  tcp::acceptor a(ioc, tcp::endpoint(net::ip::make_address("127.0.0.1"), 0));
  return a.local_endpoint().port();
}


/// POST with a bearer token; returns the status code (0 when the connection failed).
inline int http_post(unsigned short port, const std::string& target, const std::string& token, const std::string& body) {
  try {
    net::io_context ioc;
    beast::tcp_stream s(ioc);
    s.connect(tcp::endpoint(net::ip::make_address("127.0.0.1"), port));
    http::request<http::string_body> req{http::verb::post, target, 11};
    req.set(http::field::host, "127.0.0.1");
    req.set(http::field::authorization, "Bearer " + token);
    req.set(http::field::content_type, "application/json");
    req.body() = body;
    req.prepare_payload();
    http::write(s, req);
    beast::flat_buffer b;
    http::response<http::string_body> res;
    http::read(s, b, res);
    return static_cast<int>(res.result_int());
  } catch (const std::exception&) {
    return 0;
  }
}

}  // namespace bench
