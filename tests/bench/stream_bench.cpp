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

#include "stream_client.hpp"

namespace {
using namespace bench;

struct Result {
  double p50 = 0, p99 = 0, cpu_per_frame = 0, jitter_p99 = -1;
  std::uint64_t frames = 0, dropped = 0;
  int connected = 0;
};

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
