// droopline-soak: a long training session in miniature. N streaming WebSocket clients and one
// instructor posting a command every second to `droopline serve` on the three-area demo, for
// M minutes; every interval the server's resident memory, open descriptors, the clients' frame
// latency and drops, the loop's lateness and the commands' outcome are printed as one table row.
// A program, not a test (it runs for half an hour by default).
//
//   droopline-soak [--clients 100] [--minutes 30] [--interval-s 60] [--speed 1]
#include <atomic>
#include <cstdio>
#include <future>
#include <iostream>
#include <string>
#include <thread>
#include <vector>

#include "stream_client.hpp"

namespace {
using namespace bench;

long rss_kib(pid_t pid) {
  std::ifstream in("/proc/" + std::to_string(pid) + "/status");
  for (std::string line; std::getline(in, line);)
    if (line.rfind("VmRSS:", 0) == 0) return std::stol(line.substr(6));
  return -1;
}

long open_fds(pid_t pid) {
  std::error_code ec;
  long n = 0;
  for (auto it = fs::directory_iterator("/proc/" + std::to_string(pid) + "/fd", ec); !ec && it != fs::directory_iterator();
       it.increment(ec))
    ++n;
  return n;
}

double metric(unsigned short port, const std::string& name) {
  const std::string text = http_get(port, "/metrics");
  const std::regex re("(^|\n)" + name + " (\\S+)");
  std::smatch m;
  return std::regex_search(text, m, re) ? std::stod(m[2]) : -1;
}

}  // namespace

int main(int argc, char** argv) {
  std::size_t clients_n = 100;
  double minutes = 30, interval_s = 60, speed = 1;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto num = [&](double& x) {
      if (i + 1 >= argc) return false;
      x = std::stod(argv[++i]);
      return x > 0;
    };
    double c = 0;
    if (a == "--clients" && num(c)) {
      clients_n = static_cast<std::size_t>(c);
    } else if (!((a == "--minutes" && num(minutes)) || (a == "--interval-s" && num(interval_s)) ||
                 (a == "--speed" && num(speed)))) {
      std::cerr << "usage: droopline-soak [--clients 100] [--minutes 30] [--interval-s 60] [--speed 1]\n";
      return 2;
    }
  }
  signal(SIGPIPE, SIG_IGN);
  const fs::path self = fs::canonical("/proc/self/exe");
  const std::string bin = (self.parent_path().parent_path().parent_path() / "server" / "droopline").string();
  const std::string scenario = (fs::path(DROOPLINE_SOURCE_DIR) / "scenarios" / "demo_three_areas.json").string();
  const fs::path dir = fs::temp_directory_path() / ("droopline-soak-" + std::to_string(getpid()));
  fs::create_directories(dir);
  const std::string token = "soak-benchmark-token-0123456789";
  std::ofstream(dir / "token") << token << "\n";
  const unsigned short port = free_port();
  Child srv = spawn({bin, "serve", "--scenario", scenario, "--listen", "127.0.0.1:" + std::to_string(port),
                     "--token-file", (dir / "token").string(), "--journal", (dir / "journal.jsonl").string(),
                     "--speed", std::to_string(speed), "--max-connections", std::to_string(clients_n + 50),
                     "--log-level", "warn"});
  if (!wait_listening(srv)) {
    std::cerr << "droopline serve did not start\n";
    return 1;
  }

  net::io_context ioc;
  Stats stats;
  stats.measuring = true;
  tcp::resolver resolver(ioc);
  const auto ep = resolver.resolve("127.0.0.1", std::to_string(port));
  std::vector<std::shared_ptr<Client>> clients;
  for (std::size_t i = 0; i < clients_n; ++i) {
    clients.push_back(std::make_shared<Client>(ioc, stats));
    clients.back()->start(ep, "127.0.0.1:" + std::to_string(port));
  }
  std::thread io([&ioc] {
    auto guard = net::make_work_guard(ioc);
    ioc.run();
  });

  // The instructor: a load step up or down in turn, one a second, as a training session might.
  std::atomic<bool> stop{false};
  std::atomic<std::uint64_t> cmd_ok{0}, cmd_failed{0};
  std::thread instructor([&] {
    auto next = std::chrono::steady_clock::now();
    for (std::uint64_t k = 0; !stop.load(); ++k) {
      next += std::chrono::seconds(1);
      const std::string body = std::string(R"({"kind":"load_step","area":"oskany","mw":)") + (k % 2 ? "-15" : "15") + "}";
      (http_post(port, "/api/v1/commands", token, body) == 200 ? cmd_ok : cmd_failed).fetch_add(1);
      std::this_thread::sleep_until(next);
    }
  });

  std::printf("droopline-soak: %zu clients, a command a second, %g min, demo_three_areas at speed %g, loopback\n",
              clients_n, minutes, speed);
  std::printf("%8s %9s %5s %8s %9s %9s %9s %8s %12s %9s %8s\n", "minute", "RSS MiB", "fds", "clients", "frames",
              "p50 ms", "p99 ms", "max ms", "dropped", "loop p99", "cmds ok");
  std::fflush(stdout);
  const auto start = std::chrono::steady_clock::now();
  auto before = lateness(port);
  long first_rss = -1, last_rss = -1, max_fds = 0;
  std::uint64_t total_frames = 0, total_dropped = 0;
  const int rows = static_cast<int>(std::ceil(minutes * 60 / interval_s));
  for (int r = 1; r <= rows; ++r) {
    std::this_thread::sleep_until(start + std::chrono::duration_cast<std::chrono::steady_clock::duration>(
                                              std::chrono::duration<double>(r * interval_s)));
    std::promise<std::pair<std::vector<double>, std::pair<std::uint64_t, std::uint64_t>>> got;
    net::post(ioc, [&] {
      got.set_value({std::exchange(stats.latency_s, {}), {std::exchange(stats.frames, 0), std::exchange(stats.dropped, 0)}});
    });
    auto [lat, counts] = got.get_future().get();
    const auto after = lateness(port);
    const long rss = rss_kib(srv.pid), fds = open_fds(srv.pid);
    if (first_rss < 0) first_rss = rss;
    last_rss = rss;
    max_fds = std::max(max_fds, fds);
    total_frames += counts.first;
    total_dropped += counts.second;
    const double server_dropped = metric(port, "droopline_frames_dropped_total");
    char loop[24];
    std::snprintf(loop, sizeof loop, "<=%.0f us", p99_bound(before, after) * 1e6);
    before = after;
    std::printf("%8.1f %9.1f %5ld %8.0f %9llu %9.2f %9.2f %8.2f %5llu/%-6.0f %9s %8llu\n", r * interval_s / 60.0,
                static_cast<double>(rss) / 1024.0, fds, metric(port, "droopline_clients"),
                static_cast<unsigned long long>(counts.first), percentile(lat, 0.5) * 1e3, percentile(lat, 0.99) * 1e3,
                lat.empty() ? 0.0 : *std::max_element(lat.begin(), lat.end()) * 1e3,
                static_cast<unsigned long long>(counts.second), server_dropped, loop,
                static_cast<unsigned long long>(cmd_ok.load()));
    std::fflush(stdout);
  }
  stop = true;
  instructor.join();
  for (auto& c : clients) c->stop();
  std::this_thread::sleep_for(std::chrono::milliseconds(300));
  ioc.stop();
  io.join();
  stop_child(srv);
  std::printf("RSS first %.1f MiB, last %.1f MiB; most descriptors %ld; %llu frames, %llu dropped; commands %llu ok, %llu failed\n",
              static_cast<double>(first_rss) / 1024.0, static_cast<double>(last_rss) / 1024.0, max_fds,
              static_cast<unsigned long long>(total_frames), static_cast<unsigned long long>(total_dropped),
              static_cast<unsigned long long>(cmd_ok.load()), static_cast<unsigned long long>(cmd_failed.load()));
  fs::remove_all(dir);
  return cmd_failed.load() == 0 ? 0 : 1;
}
