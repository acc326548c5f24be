// droopline-stream-bench: N WebSocket clients on loopback streaming from `droopline serve`, and
// the same frames fanned out to the same number of clients by a minimal Node.js `ws` broadcaster
// (tests/bench/ws_peer.mjs) as the peer. Reports frame latency p50/p99 (from the frame's wall
// time), frames dropped, server CPU seconds per delivered frame and, for droopline, the step
// loop's deadline lateness p99. A program, not a test.
//
//   droopline-stream-bench [--clients 10,100,500] [--seconds 10] [--no-peer]
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <future>
#include <memory>
#include <regex>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <utility>  // before Boost 1.74's asio (std::exchange)

#include <boost/asio.hpp>
#include <boost/beast.hpp>

#include "child_process.hpp"

namespace net = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;
namespace websocket = beast::websocket;
using tcp = net::ip::tcp;
namespace fs = std::filesystem;

namespace {

double wall_now() {
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

using bench::Child;
using bench::spawn;

bool wait_listening(const Child& c) {
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

void stop_child(Child& c) {
  if (c.pid <= 0) return;
  kill(c.pid, SIGTERM);
  int status = 0;
  waitpid(c.pid, &status, 0);
  close(c.out_fd);
  c.pid = -1;
}

// CPU time of every thread of a process, in seconds, at nanosecond resolution (schedstat).
double cpu_seconds(pid_t pid) {
  double total = 0;
  std::error_code ec;
  for (const auto& t : fs::directory_iterator("/proc/" + std::to_string(pid) + "/task", ec)) {
    std::ifstream in(t.path() / "schedstat");
    unsigned long long ns = 0;
    if (in >> ns) total += static_cast<double>(ns) * 1e-9;
  }
  return total;
}

std::string http_get(unsigned short port, const std::string& target) {
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
std::vector<std::pair<double, double>> lateness(unsigned short port) {
  const std::string text = http_get(port, "/metrics");
  std::vector<std::pair<double, double>> out;
  std::regex re(R"re(droopline_loop_lateness_seconds_bucket\{le="([^"]+)"\} (\S+))re");
  for (auto it = std::sregex_iterator(text.begin(), text.end(), re); it != std::sregex_iterator(); ++it) {
    const std::string le = (*it)[1];
    out.emplace_back(le == "+Inf" ? 1e9 : std::stod(le), std::stod((*it)[2]));
  }
  return out;
}

double p99_bound(const std::vector<std::pair<double, double>>& a, const std::vector<std::pair<double, double>>& b) {
  if (a.size() != b.size() || b.empty()) return -1;
  const double total = b.back().second - a.back().second;
  for (std::size_t i = 0; i < b.size(); ++i)
    if (b[i].second - a[i].second >= 0.99 * total) return b[i].first;
  return b.back().first;
}

struct Result {
  double p50 = 0, p99 = 0, cpu_per_frame = 0, jitter_p99 = -1;
  std::uint64_t frames = 0, dropped = 0;
  int connected = 0;
};

double percentile(std::vector<double> v, double q) {
  if (v.empty()) return 0;
  std::sort(v.begin(), v.end());
  return v[std::min(v.size() - 1, static_cast<std::size_t>(q * static_cast<double>(v.size())))];
}

Result measure(pid_t server, unsigned short port, std::size_t n, double seconds, bool droopline) {
  net::io_context ioc;
  Stats stats;
  tcp::resolver resolver(ioc);
  auto ep = resolver.resolve("127.0.0.1", std::to_string(port));
  std::vector<std::shared_ptr<Client>> clients;
  for (std::size_t i = 0; i < n; ++i) {
    clients.push_back(std::make_shared<Client>(ioc, stats));
    clients.back()->start(ep, "127.0.0.1:" + std::to_string(port));
  }
  std::thread io([&ioc] {
    auto guard = net::make_work_guard(ioc);
    ioc.run();
  });
  std::this_thread::sleep_for(std::chrono::seconds(2));  // connect and settle
  std::vector<std::pair<double, double>> before;
  if (droopline) before = lateness(port);
  net::post(ioc, [&] { stats.measuring = true; });
  const double cpu0 = cpu_seconds(server);
  std::this_thread::sleep_for(std::chrono::duration<double>(seconds));
  const double cpu1 = cpu_seconds(server);
  std::promise<void> stopped;
  net::post(ioc, [&] {
    stats.measuring = false;
    stopped.set_value();
  });
  stopped.get_future().wait();
  Result r;
  if (droopline) r.jitter_p99 = p99_bound(before, lateness(port));
  for (auto& c : clients) c->stop();
  std::this_thread::sleep_for(std::chrono::milliseconds(200));
  ioc.stop();
  io.join();
  r.frames = stats.frames;
  r.dropped = stats.dropped;
  r.p50 = percentile(stats.latency_s, 0.5);
  r.p99 = percentile(stats.latency_s, 0.99);
  r.cpu_per_frame = stats.frames ? (cpu1 - cpu0) / static_cast<double>(stats.frames) : 0;
  return r;
}

unsigned short free_port() {
  net::io_context ioc;
  tcp::acceptor a(ioc, tcp::endpoint(net::ip::make_address("127.0.0.1"), 0));
  return a.local_endpoint().port();
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::size_t> counts{10, 100, 500};
  double seconds = 10;
  bool peer = true;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--clients" && i + 1 < argc) {
      counts.clear();
      std::stringstream ss(argv[++i]);
      for (std::string p; std::getline(ss, p, ',');) counts.push_back(std::stoul(p));
    } else if (a == "--seconds" && i + 1 < argc) {
      seconds = std::stod(argv[++i]);
    } else if (a == "--no-peer") {
      peer = false;
    } else {
      std::cerr << "usage: droopline-stream-bench [--clients 10,100,500] [--seconds 10] [--no-peer]\n";
      return 2;
    }
  }
  const fs::path self = fs::canonical("/proc/self/exe");
  const std::string bin = (self.parent_path().parent_path().parent_path() / "server" / "droopline").string();
  const fs::path src = DROOPLINE_SOURCE_DIR;
  const std::string scenario = (src / "scenarios" / "demo_three_areas.json").string();
  const fs::path frame_file = fs::temp_directory_path() / ("droopline-frame-" + std::to_string(getpid()) + ".json");
  signal(SIGPIPE, SIG_IGN);

  std::printf("droopline-stream-bench: demo_three_areas at 20 frames/s, %.0f s per run, loopback\n", seconds);
  std::printf("%7s %-10s %9s %9s %10s %9s %14s %12s %9s\n", "clients", "server", "p50 ms", "p99 ms", "frames", "dropped",
              "CPU us/frame", "jitter p99", "cpu ratio");
  for (std::size_t n : counts) {
    const unsigned short port = free_port();
    Child srv = spawn({bin, "serve", "--scenario", scenario, "--listen", "127.0.0.1:" + std::to_string(port),
                       "--max-connections", std::to_string(n * 2 + 50), "--log-level", "warn"});
    if (!wait_listening(srv)) {
      std::cerr << "droopline serve did not start\n";
      return 1;
    }
    {
      std::ofstream(frame_file) << http_get(port, "/api/v1/state");
    }
    const Result ours = measure(srv.pid, port, n, seconds, true);
    stop_child(srv);
    char jit[32];
    std::snprintf(jit, sizeof jit, "<= %.0f us", ours.jitter_p99 * 1e6);
    std::printf("%7zu %-10s %9.2f %9.2f %10llu %9llu %14.1f %12s %9s\n", n, "droopline", ours.p50 * 1e3, ours.p99 * 1e3,
                static_cast<unsigned long long>(ours.frames), static_cast<unsigned long long>(ours.dropped),
                ours.cpu_per_frame * 1e6, jit, "");
    std::fflush(stdout);
    if (!peer) continue;
    const unsigned short pport = free_port();
    Child node = spawn({"node", (src / "tests" / "bench" / "ws_peer.mjs").string(), std::to_string(pport),
                        frame_file.string(), "20"});
    if (!wait_listening(node)) {
      std::cerr << "the Node.js peer did not start (npm install in tests/bench?)\n";
      return 1;
    }
    const Result theirs = measure(node.pid, pport, n, seconds, false);
    stop_child(node);
    char ratio[32];
    std::snprintf(ratio, sizeof ratio, "%.2f", theirs.cpu_per_frame > 0 ? ours.cpu_per_frame / theirs.cpu_per_frame : 0);
    std::printf("%7zu %-10s %9.2f %9.2f %10llu %9s %14.1f %12s %9s\n", n, "node ws", theirs.p50 * 1e3, theirs.p99 * 1e3,
                static_cast<unsigned long long>(theirs.frames), "-", theirs.cpu_per_frame * 1e6, "-", ratio);
    std::fflush(stdout);
  }
  fs::remove(frame_file);
  return 0;
}
