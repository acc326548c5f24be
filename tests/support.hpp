#pragma once
// Helpers shared by the test executables.
#include <catch2/catch.hpp>

#include <unistd.h>

#include <cmath>
#include <filesystem>
#include <string>
#include <system_error>
#include <vector>

#include "droopline/engine.hpp"
#include "droopline/scenario_io.hpp"

namespace test {

/// A path in the system's temporary folder named for `name` and this process, nothing there yet;
/// removed, with whatever the test put there, when the test program ends.
inline std::filesystem::path scratch_path(const std::string& name) {
  struct Cleanup {
    std::vector<std::filesystem::path> paths;
    ~Cleanup() {
      std::error_code ec;
      for (const auto& p : paths) std::filesystem::remove_all(p, ec);
    }
  };
  static Cleanup cleanup;
  const auto p = std::filesystem::temp_directory_path() / ("droopline-test-" + name + "-" + std::to_string(::getpid()));
  std::filesystem::remove_all(p);
  cleanup.paths.push_back(p);
  return p;
}

inline std::string source_path(const std::string& rel) {
  return std::string(DROOPLINE_SOURCE_DIR) + "/" + rel;
}

/// Loads a shipped scenario; fails the test with the messages when it does not validate.
inline droopline::SystemDef load(const std::string& rel) {
  auto r = droopline::load_scenario_file(source_path(rel));
  std::string msgs;
  for (auto& i : r.issues)
    if (!i.warning) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(r.system.has_value());
  return r.system->def();
}

/// Checks a definition and creates an engine; fails the test with the messages when it has errors.
inline std::unique_ptr<droopline::Engine> make(const droopline::SystemDef& def) {
  auto c = droopline::check(def);
  std::string msgs;
  for (auto& i : c.issues)
    if (!i.warning) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(c.system);
  return droopline::Engine::create(*c.system);
}

/// Steps until simulation time t (s).
inline void run_until(droopline::Engine& e, double t) {
  const auto target = std::llround(t / e.def().step_s);
  while (e.step_index() < target) e.step();
}

inline double freq(const droopline::Engine& e, const char* area) {
  return e.area(*e.find_area(area)).f_hz;
}
inline double power(const droopline::Engine& e, const char* unit) {
  return e.unit(*e.find_unit(unit)).p_mw;
}
inline double flow(const droopline::Engine& e, const char* tie) {
  return e.tie(*e.find_tie(tie)).flow_mw;
}

/// A load step command.
inline droopline::Command load_step(const char* area, double mw) {
  droopline::Command c;
  c.kind = droopline::CommandKind::load_step;
  c.area = area;
  c.mw = mw;
  return c;
}

/// A unit command (trip, start, setpoint) with an optional MW value.
inline droopline::Command unit_cmd(droopline::CommandKind kind, const char* unit, double mw = 0.0) {
  droopline::Command c;
  c.kind = kind;
  c.unit = unit;
  c.mw = mw;
  return c;
}

/// Resolves `commands` against the engine's system (ids, static checks) and applies them (state
/// checks), as the live pipeline does: the issues of whichever step refused them.
inline droopline::ApplyResult apply(droopline::Engine& e, const std::vector<droopline::Command>& commands) {
  droopline::Resolved r = droopline::resolve_all(e.system(), commands);
  if (!r.issues.empty()) return droopline::ApplyResult{false, std::move(r.issues), e.time_s()};
  return e.apply_all(r.actions);
}

/// A minimal valid one-area system: one steam unit of `rating` MW at `setpoint` MW.
inline droopline::SystemDef one_area(double f0 = 50.0, double rating = 500.0, double setpoint = 300.0) {
  droopline::SystemDef d;
  d.name = "test";
  d.nominal_hz = f0;
  d.duration_s = 120.0;
  droopline::AreaDef a;
  a.id = "A";
  a.demand_mw = setpoint;
  d.areas.push_back(a);
  droopline::UnitDef u;
  u.id = "G1";
  u.area = "A";
  u.rating_mw = rating;
  u.inertia_s = 5.0;
  u.setpoint_mw = setpoint;
  d.units.push_back(u);
  return d;
}

/// Two areas, `west` and `east`, joined by the tie `link`: one steam unit of 1000 MW at 600 MW
/// (`Gw`, `Ge`) and 600 MW of demand each.
inline droopline::SystemDef two_areas(double pmax_mw, double damping_mw_per_hz) {
  droopline::SystemDef d = one_area(50.0, 1000.0, 600.0);
  d.areas[0].id = "west";
  d.units[0].area = "west";
  d.units[0].id = "Gw";
  droopline::AreaDef east = d.areas[0];
  east.id = "east";
  d.areas.push_back(east);
  droopline::UnitDef ge = d.units[0];
  ge.id = "Ge";
  ge.area = "east";
  d.units.push_back(ge);
  droopline::TieDef t;
  t.id = "link";
  t.from = "west";
  t.to = "east";
  t.pmax_mw = pmax_mw;
  t.damping_mw_per_hz = damping_mw_per_hz;
  d.ties.push_back(t);
  return d;
}

}  // namespace test
