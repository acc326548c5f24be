// droopline-bench: engine speed on fleets of mixed units, and the same fleets solved by a plain
// SciPy peer (tests/bench/peer_fleet.py). Prints a table; nothing here is a test.
//
//   droopline-bench [--sizes 10,100,1000,10000] [--seconds 60] [--repeat 3] [--no-peer]
//   droopline-bench [--seconds 60] --emit UNITS FILE     (write one fleet scenario, run nothing)
//   droopline-bench --sweep [--members 100,1000] [--repeat 3] [--no-peer]   (bench_sweep.cpp)
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "bench_common.hpp"
#include "droopline/engine.hpp"
#include "droopline/scenario_io.hpp"
#include "droopline/task_pool.hpp"

namespace fs = std::filesystem;
using namespace droopline;
using bench::ChildResult;
using bench::fleet;
using bench::fleet_file;
using bench::now_s;
using bench::run_child;

namespace {

std::vector<std::size_t> parse_sizes(const std::string& s) {
  std::vector<std::size_t> out;
  std::stringstream ss(s);
  for (std::string part; std::getline(ss, part, ',');) out.push_back(std::stoul(part));
  return out;
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::size_t> sizes{10, 100, 1000, 10000};
  double seconds = 60.0;
  int repeat = 3;
  bool peer = true;
  const fs::path self = fs::canonical("/proc/self/exe");
  fs::path droopline_bin = self.parent_path().parent_path().parent_path() / "server" / "droopline";
  fs::path peer_script = fs::path(DROOPLINE_SOURCE_DIR) / "tests" / "bench" / "peer_fleet.py";
  if (argc > 1 && std::string(argv[1]) == "--sweep")
    return bench::sweep_bench(argc, argv, droopline_bin, DROOPLINE_SOURCE_DIR);
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--sizes" && i + 1 < argc) sizes = parse_sizes(argv[++i]);
    else if (a == "--seconds" && i + 1 < argc) seconds = std::stod(argv[++i]);
    else if (a == "--repeat" && i + 1 < argc) repeat = std::stoi(argv[++i]);
    else if (a == "--no-peer") peer = false;
    else if (a == "--emit" && i + 2 < argc) {  // write one fleet scenario and stop
      std::ofstream(argv[i + 2]) << fleet_file(fleet(std::stoul(argv[i + 1]), seconds));
      return 0;
    }
    else {
      std::cerr << "usage: droopline-bench [--sizes 10,100,1000,10000] [--seconds 60] [--repeat 3] [--no-peer]\n"
                   "       droopline-bench [--seconds 60] --emit UNITS FILE\n"
                   "       droopline-bench --sweep [--members 100,1000] [--repeat 3] [--no-peer]\n";
      return 2;
    }
  }
  const fs::path work = fs::temp_directory_path() / ("droopline-bench-" + std::to_string(getpid()));
  fs::create_directories(work);

  std::printf("droopline-bench: mixed fleets, %.0f s simulated at a 0.01 s step, best of %d\n", seconds, repeat);
  std::printf("%8s %14s %10s %10s %10s %9s %12s %9s %12s\n", "units", "unit-steps/s", "engine s",
              "all cores", "process s", "peak MiB", "peer solve s", "peer/us", "peer |df| Hz");
  for (std::size_t n : sizes) {
    const SystemDef def = fleet(n, seconds);
    const CheckResult checked = check(def);
    if (!checked.system) {
      std::cerr << "bench fleet invalid: " << checked.issues.front().text() << "\n";
      return 1;
    }
    // In process, one thread: stepping only.
    double best_engine = 1e300;
    std::int64_t steps = 0;
    for (int r = 0; r < repeat; ++r) {
      const std::unique_ptr<Engine> engine = Engine::create(*checked.system);
      const double t0 = now_s();
      engine->run();
      best_engine = std::min(best_engine, now_s() - t0);
      steps = engine->step_index();
    }
    const double unit_steps = static_cast<double>(steps) * static_cast<double>(n) / best_engine;
    // The same with every core (the engine splits fleets of 4096+ units over a TaskPool).
    double best_pool = 1e300;
    {
      TaskPool pool(std::max(1u, std::thread::hardware_concurrency()));
      for (int r = 0; r < repeat; ++r) {
        const std::unique_ptr<Engine> engine = Engine::create(*checked.system);
        engine->set_task_runner(&pool);
        const double t0 = now_s();
        engine->run();
        best_pool = std::min(best_pool, now_s() - t0);
      }
    }

    // Whole process on one thread: load the file, run, write series.csv and summary.json.
    const fs::path file = work / ("fleet_" + std::to_string(n) + ".json");
    std::ofstream(file) << fleet_file(def);
    double best_process = 1e300;
    long rss = 0;
    for (int r = 0; r < repeat; ++r) {
      // One thread, like the peer: the goal compares one core with one core.
      ChildResult c = run_child({droopline_bin.string(), "run", file.string(), "--out",
                                 (work / ("out_" + std::to_string(n))).string(), "--quiet", "--threads", "1"});
      if (c.status != 0) {
        std::cerr << "droopline run failed on the " << n << "-unit fleet\n";
        return 1;
      }
      best_process = std::min(best_process, c.wall_s);
      rss = std::max(rss, c.max_rss_kb);
    }
    // droopline's frequency at each output time, to compare the peer's accuracy against.
    std::vector<double> ours;
    {
      std::ifstream csv(work / ("out_" + std::to_string(n)) / "series.csv");
      std::string line;
      std::getline(csv, line);
      while (std::getline(csv, line)) {
        const auto c1 = line.find(','), c2 = line.find(',', c1 + 1);
        ours.push_back(std::stod(line.substr(c1 + 1, c2 - c1 - 1)));
      }
    }
    double best_peer = -1.0, peer_diff = 0.0;
    if (peer) {
      for (int r = 0; r < repeat; ++r) {
        ChildResult c = run_child({"/usr/bin/python3", peer_script.string(), file.string()});
        if (c.status != 0) {
          std::cerr << "peer failed on the " << n << "-unit fleet: " << c.out << "\n";
          return 1;
        }
        const auto j = nlohmann::json::parse(c.out);
        const double solve = j.at("solve_s").get<double>();
        const auto f = j.at("f_hz").get<std::vector<double>>();
        for (std::size_t k = 0; k < std::min(f.size(), ours.size()); ++k)
          peer_diff = std::max(peer_diff, std::fabs(f[k] - ours[k]));
        best_peer = best_peer < 0 ? solve : std::min(best_peer, solve);
      }
    }
    char peer_s[32] = "-", ratio[32] = "-", diff[32] = "-";
    if (peer) {
      std::snprintf(peer_s, sizeof peer_s, "%.4f", best_peer);
      std::snprintf(ratio, sizeof ratio, "%.2f", best_peer / best_process);
      std::snprintf(diff, sizeof diff, "%.1e", peer_diff);
    }
    std::printf("%8zu %14.3e %10.4f %10.4f %10.4f %9.1f %12s %9s %12s\n", n, unit_steps, best_engine,
                best_pool, best_process, static_cast<double>(rss) / 1024.0, peer_s, ratio, diff);
    std::fflush(stdout);
  }
  fs::remove_all(work);
  return 0;
}
