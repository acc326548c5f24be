#pragma once
// What the fleet and sweep benchmarks share: the bench fleet, its scenario file, and running a
// program with its time and peak memory.
#include <sys/resource.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "child_process.hpp"
#include "droopline/defs.hpp"
#include "droopline/scenario_io.hpp"

namespace bench {

using namespace droopline;

// A deterministic mixed fleet in one 50 Hz area: the five turbine types in turn, parameters
// spread over their typical ranges, a load step of 5 % of demand at t = 1 s.
inline SystemDef fleet(std::size_t n, double seconds) {
  SystemDef d;
  d.name = "bench fleet of " + std::to_string(n) + " units";
  d.nominal_hz = 50.0;
  d.step_s = 0.01;
  d.duration_s = seconds;
  d.output_every_s = 1.0;
  AreaDef a;
  a.id = "grid";
  a.load_damping = 1.0;
  double demand = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    UnitDef u;
    u.id = "u" + std::to_string(i);
    u.area = "grid";
    const double spread = static_cast<double>((i * 7919) % 101) / 100.0;  // 0 .. 1
    u.rating_mw = 50.0 + 250.0 * spread;
    u.setpoint_mw = 0.7 * u.rating_mw;
    u.inertia_s = 3.0 + 4.0 * spread;
    u.governor.droop = 0.04 + 0.02 * spread;
    u.governor.deadband_hz = 0.01 + 0.01 * spread;
    u.governor.lag_s = 0.15 + 0.2 * spread;
    switch (i % 5) {
      case 0:
        u.turbine.type = TurbineType::steam;
        u.turbine.steam_chest_s = 0.2 + 0.2 * spread;
        break;
      case 1:
        u.turbine.type = TurbineType::reheat;
        u.turbine.reheat_s = 5.0 + 4.0 * spread;
        break;
      case 2:
        u.turbine.type = TurbineType::hydro;
        u.turbine.water_s = 1.0 + 1.0 * spread;
        break;
      case 3:
        u.turbine.type = TurbineType::gas;
        break;
      case 4:
        u.turbine.type = TurbineType::battery;
        u.inertia_s = 0.0;
        u.rating_mw = 20.0 + 30.0 * spread;
        u.setpoint_mw = 0.0;
        u.governor.droop = 0.02;
        u.turbine.energy_mwh = 2.0 * u.rating_mw;
        u.turbine.synthetic_inertia_s = 2.0 + 2.0 * spread;
        break;
    }
    demand += u.setpoint_mw;
    d.units.push_back(u);
  }
  a.demand_mw = demand;
  d.areas.push_back(a);
  EventDef ev;
  ev.at_s = 1.0;
  ev.command.kind = CommandKind::load_step;
  ev.command.area = "grid";
  ev.command.mw = 0.05 * demand;
  d.events.push_back(ev);
  return d;
}

// The fleet as a scenario file written the way a script would write it: only the fields that
// differ from the defaults, no indentation.
inline std::string fleet_file(const SystemDef& d) {
  nlohmann::ordered_json j = scenario_to_json(d);
  const UnitDef plain;
  for (auto& u : j["units"]) {
    const bool battery = u["turbine"]["type"] == "battery";
    u.erase("online");
    u.erase("agc_share");
    u.erase("max_mw");
    if (!battery) u.erase("min_mw");
    auto& g = u["governor"];
    g.erase("mode");
    g.erase("deadband");
    g.erase("integral_s");
    if (battery) g.erase("lag_s");
    auto& t = u["turbine"];
    for (const char* k : {"load_limit_mw", "temporary_droop", "reset_s", "soc", "rocof_filter_s", "response_s",
                          "fuel_s", "combustion_s", "hp_fraction", "steam_chest_s"})
      if (t.contains(k) && !(t["type"] == "steam" && std::string(k) == "steam_chest_s")) t.erase(k);
  }
  for (auto& a : j["areas"]) {
    a.erase("agc");
    a.erase("shedding");
  }
  return j.dump();
}

inline double now_s() {
  return std::chrono::duration<double>(std::chrono::steady_clock::now().time_since_epoch()).count();
}

struct ChildResult {
  int status = -1;
  double wall_s = 0.0;
  long max_rss_kb = 0;
  std::string out;
};

// Runs a program, capturing stdout, timing it and reading its peak resident memory.
inline ChildResult run_child(const std::vector<std::string>& argv) {
  ChildResult r;
  const double t0 = now_s();
  const Child c = spawn(argv);
  if (c.pid < 0) return r;
  char buf[4096];
  for (ssize_t k; (k = read(c.out_fd, buf, sizeof buf)) > 0;) r.out.append(buf, static_cast<std::size_t>(k));
  close(c.out_fd);
  struct rusage ru {};
  wait4(c.pid, &r.status, 0, &ru);
  r.wall_s = now_s() - t0;
  r.max_rss_kb = ru.ru_maxrss;
  return r;
}

/// droopline-bench --sweep (bench_sweep.cpp): argv as main got it.
int sweep_bench(int argc, char** argv, const std::filesystem::path& droopline_bin,
                const std::filesystem::path& source_dir);

}  // namespace bench
