// droopline-bench --sweep: a droop x load-step grid over the 20-unit bench fleet, run by
// `droopline sweep` as a whole process on one thread and on every core, and the same grid solved
// as one vectorized ensemble by a SciPy peer (tests/bench/peer_sweep.py). Prints a table;
// nothing here is a test.
//
//   droopline-bench --sweep [--members 100,1000] [--repeat 3] [--no-peer]
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "bench_common.hpp"

namespace fs = std::filesystem;

namespace bench {
namespace {

// A grid of about `members` points: droop of unit u0 (the varied unit, steam) x the load step
// (MW), the droop axis the longer one for 1,000 members (40 x 25) and square for 100.
struct Grid {
  std::vector<double> droop, mw;
};

Grid grid_of(std::size_t members, double demand_mw) {
  const std::size_t nd = members >= 1000 ? 40 : static_cast<std::size_t>(std::lround(std::sqrt(members)));
  const std::size_t nm = (members + nd - 1) / nd;
  Grid g;
  for (std::size_t i = 0; i < nd; ++i)
    g.droop.push_back(0.03 + 0.04 * static_cast<double>(i) / static_cast<double>(nd));
  for (std::size_t i = 0; i < nm; ++i)
    g.mw.push_back(demand_mw * (0.02 + 0.06 * static_cast<double>(i) / static_cast<double>(nm)));
  return g;
}

// Values as a list with every digit, so droopline and the peer read the same doubles.
std::string listed(const std::vector<double>& v) {
  std::string out;
  char buf[40];
  for (double x : v) {
    std::snprintf(buf, sizeof buf, "%.17g", x);
    out += (out.empty() ? "" : ",") + std::string(buf);
  }
  return out;
}

// The nadir_hz column of a sweep.csv, in row (grid) order.
std::vector<double> nadirs_of(const fs::path& csv_path) {
  std::ifstream csv(csv_path);
  std::string line;
  std::getline(csv, line);
  std::vector<std::string> head;
  std::stringstream hs(line);
  for (std::string cell; std::getline(hs, cell, ',');) head.push_back(cell);
  const auto col = static_cast<std::size_t>(std::find(head.begin(), head.end(), "nadir_hz") - head.begin());
  std::vector<double> out;
  while (std::getline(csv, line)) {
    std::stringstream ls(line);
    std::string cell;
    for (std::size_t i = 0; i <= col && std::getline(ls, cell, ','); ++i) {
    }
    out.push_back(cell.empty() ? NAN : std::stod(cell));
  }
  return out;
}

}  // namespace

int sweep_bench(int argc, char** argv, const fs::path& droopline_bin, const fs::path& source_dir) {
  std::vector<std::size_t> sizes{100, 1000};
  int repeat = 3;
  bool peer = true;
  for (int i = 2; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--members" && i + 1 < argc) {
      sizes.clear();
      std::stringstream ss(argv[++i]);
      for (std::string part; std::getline(ss, part, ',');) sizes.push_back(std::stoul(part));
    } else if (a == "--repeat" && i + 1 < argc) {
      repeat = std::stoi(argv[++i]);
    } else if (a == "--no-peer") {
      peer = false;
    } else {
      std::cerr << "usage: droopline-bench --sweep [--members 100,1000] [--repeat 3] [--no-peer]\n";
      return 2;
    }
  }
  const unsigned cores = std::max(1u, std::thread::hardware_concurrency());
  const fs::path work = fs::temp_directory_path() / ("droopline-sweep-bench-" + std::to_string(getpid()));
  fs::create_directories(work);
  const SystemDef def = fleet(20, 60.0);
  const fs::path file = work / "fleet_20.json";
  std::ofstream(file) << fleet_file(def);
  const double demand = def.areas.front().demand_mw;
  const fs::path peer_script = source_dir / "tests" / "bench" / "peer_sweep.py";

  std::printf("droopline-bench --sweep: the 20-unit fleet, 60 s at 0.01 s, droop of u0 x load step; best of %d\n",
              repeat);
  std::printf("%8s %14s %12s %9s %10s %11s %16s\n", "members", "1 thread s", "cores s", "speed-up", "peer s", "peer/us",
              "max |dnadir| Hz");
  for (std::size_t members : sizes) {
    const Grid g = grid_of(members, demand);
    const std::size_t n = g.droop.size() * g.mw.size();
    auto sweep_with = [&](unsigned threads) {
      double best = 1e300;
      for (int r = 0; r < repeat; ++r) {
        const ChildResult c =
            run_child({droopline_bin.string(), "sweep", file.string(), "--vary",
                       "units[u0].governor.droop=" + listed(g.droop), "--vary", "events[0].mw=" + listed(g.mw),
                       "--threads", std::to_string(threads), "--out", (work / "sweep").string(), "--quiet"});
        if (c.status != 0) return -1.0;
        best = std::min(best, c.wall_s);
      }
      return best;
    };
    const double one = sweep_with(1);
    const std::vector<double> ours = nadirs_of(work / "sweep" / "sweep.csv");
    const double all = sweep_with(cores);
    if (one < 0.0 || all < 0.0 || ours.size() != n) {
      std::cerr << "droopline sweep failed on " << n << " members\n";
      return 1;
    }
    char peer_s[32] = "-", ratio[32] = "-", diff[32] = "-";
    if (peer) {
      double best = 1e300, worst_diff = 0.0;
      for (int r = 0; r < repeat; ++r) {
        const ChildResult c = run_child({"/usr/bin/python3", peer_script.string(), file.string(), "--droop", "u0",
                                         listed(g.droop), "--mw", listed(g.mw)});
        if (c.status != 0) {
          std::cerr << "peer failed on " << n << " members: " << c.out << "\n";
          return 1;
        }
        const auto j = nlohmann::json::parse(c.out);
        best = std::min(best, j.at("solve_s").get<double>());
        const auto theirs = j.at("nadir_hz").get<std::vector<double>>();
        for (std::size_t k = 0; k < std::min(theirs.size(), ours.size()); ++k)
          worst_diff = std::max(worst_diff, std::fabs(theirs[k] - ours[k]));
      }
      std::snprintf(peer_s, sizeof peer_s, "%.3f", best);
      std::snprintf(ratio, sizeof ratio, "%.2f", best / one);
      std::snprintf(diff, sizeof diff, "%.1e", worst_diff);
    }
    std::printf("%8zu %14.3f %12.3f %9.2f %10s %11s %16s\n", n, one, all, one / all, peer_s, ratio, diff);
    std::fflush(stdout);
  }
  fs::remove_all(work);
  return 0;
}

}  // namespace bench
