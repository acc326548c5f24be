// Model validation: playback of a frequency into units, fitting their parameters, injection tests.
#include <algorithm>
#include <cmath>
#include <random>
#include <string>
#include <vector>

#include "droopline/fit.hpp"
#include "droopline/inject.hpp"
#include "droopline/playback.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;

namespace {

// A recording made by droopline itself: a full grid run of `def`, sampled every step, with the
// frequency of `area` and the outputs of `units`.
Recording record_grid_run(const SystemDef& def, const std::string& area, const std::vector<std::string>& units,
                          double until_s) {
  auto engine = test::make(def);
  Recording rec;
  for (const std::string& u : units) rec.power_mw.push_back({u, {}});
  auto sample = [&] {
    rec.t_s.push_back(engine->time_s());
    rec.frequency_hz.push_back(test::freq(*engine, area.c_str()));
    for (std::size_t i = 0; i < units.size(); ++i)
      rec.power_mw[i].second.push_back(test::power(*engine, units[i].c_str()));
  };
  sample();
  while (engine->time_s() < until_s - 1e-9) {
    engine->step();
    sample();
  }
  return rec;
}

}  // namespace

TEST_CASE("a grid run's own recording played back reproduces each unit's output within 1e-6 MW") {
  SystemDef def = test::load("scenarios/demo_three_areas.json");
  for (AreaDef& a : def.areas) a.agc.enabled = false;         // secondary control moves setpoints: not played back
  const std::vector<std::string> units = {"O1", "O2", "O3"};  // reheat, gas and battery in the stepped area
  PlaybackSpec spec;
  spec.def = def;
  spec.units = units;
  spec.recording = record_grid_run(def, "oskany", units, 60.0);
  std::string error;
  const auto r = run_playback(spec, error);
  INFO(error);
  REQUIRE(r);
  REQUIRE(r->units.size() == 3);
  // The reheat unit within 1e-6 MW: the same kernel sees the same frequency. The others read the
  // frequency's bends harder (gas: the governor's short lag; battery: synthetic inertia reads its
  // slope), where the interpolation between two steps of the recording shows a little more.
  for (const UnitFit& u : r->units)
    INFO(u.unit << " largest error " << u.max_error_mw << " MW at " << u.max_error_at_s << " s");
  CHECK(r->units[0].max_error_mw < 1e-6);
  CHECK(r->units[1].max_error_mw < 1e-5);
  CHECK(r->units[2].max_error_mw < 1e-4);
  // The load step at 10 s is the one excursion; the responses compared are the recording's own.
  REQUIRE(r->units[0].excursions.size() == 1);
  CHECK(r->units[0].excursions[0].at_s > 10.0);
  CHECK(std::abs(*r->units[0].excursions[0].measured_10s_mw - *r->units[0].excursions[0].simulated_10s_mw) < 1e-6);
}

TEST_CASE("what the recording's reader repaired or assumed reaches the playback's warnings (a fit takes the same list)") {
  SystemDef def = test::load("scenarios/demo_three_areas.json");
  for (AreaDef& a : def.areas) a.agc.enabled = false;
  PlaybackSpec spec;
  spec.def = def;
  spec.units = {"O1"};
  spec.recording = record_grid_run(def, "oskany", spec.units, 30.0);
  spec.recording.warnings = {"channel \"O1.P\": 3 missing samples filled by interpolation"};
  std::string error;
  const auto r = run_playback(spec, error);
  INFO(error);
  REQUIRE(r);
  REQUIRE_FALSE(r->warnings.empty());
  CHECK(r->warnings.front() == spec.recording.warnings.front());
}

TEST_CASE("a recording that starts off nominal is played back from a unit settled there, not from rest") {
  SystemDef def = test::load("scenarios/demo_three_areas.json");
  for (AreaDef& a : def.areas) a.agc.enabled = false;  // the offset after the load step at 10 s stays
  def.events[1].at_s = 400.0;                          // the trip, once the hydro units have settled
  def.duration_s = 460.0;
  const std::vector<std::string> units = {"O1", "O2"};  // reheat and gas in the stepped area
  Recording rec = record_grid_run(def, "oskany", units, 460.0);
  // Cut at 350 s: the frequency sits steady below nominal there, and the trip at 400 s follows.
  const auto cut = static_cast<std::size_t>(std::lower_bound(rec.t_s.begin(), rec.t_s.end(), 350.0 - 1e-9) -
                                            rec.t_s.begin());
  rec.t_s.erase(rec.t_s.begin(), rec.t_s.begin() + static_cast<std::ptrdiff_t>(cut));
  rec.frequency_hz.erase(rec.frequency_hz.begin(), rec.frequency_hz.begin() + static_cast<std::ptrdiff_t>(cut));
  for (auto& [name, p] : rec.power_mw) p.erase(p.begin(), p.begin() + static_cast<std::ptrdiff_t>(cut));
  const double offset = rec.frequency_hz.front() - def.nominal_hz;
  INFO("the cut recording starts " << offset * 1000 << " mHz off nominal");
  REQUIRE(offset < -0.05);  // far outside every deadband: the case this test is about
  // The units' outputs at the cut are their droop answers above the scenario's setpoints.
  REQUIRE(rec.power_mw[0].second.front() - 560.0 > 5.0);
  PlaybackSpec spec;
  spec.def = def;
  spec.units = units;
  spec.recording = rec;
  std::string error;
  const auto r = run_playback(spec, error);
  INFO(error);
  REQUIRE(r);
  bool told = false;
  for (const std::string& w : r->warnings) told = told || w.find("settle there") != std::string::npos;
  CHECK(told);
  // Settled at the first frequency, each unit starts where the grid run had it and follows the
  // trip's excursion as in the grid; a unit started at rest would first answer the whole offset
  // (some 17 MW for O1). Not to 1e-6 MW: at the cut the grid's frequency still creeps up by about
  // 3 uHz/s (the hydro units' slow reset elsewhere), which the grid's reheat unit follows a few
  // seconds late, so its true state is a few kW from the settled one (5.4 kW measured).
  for (const UnitFit& u : r->units) {
    INFO(u.unit << " RMSE " << u.rmse_mw << " MW, largest error " << u.max_error_mw << " MW at " << u.max_error_at_s);
    CHECK(u.max_error_mw < 0.01);
  }
  REQUIRE(r->units[0].excursions.size() == 1);  // the trip at 400 s; the offset at the start is not one
  CHECK(r->units[0].excursions[0].at_s > 400.0);
}

TEST_CASE("a fit on a grid run's recording with seeded noise recovers droop, lag and reheat time within 2 %") {
  SystemDef def = test::load("scenarios/demo_three_areas.json");
  for (AreaDef& a : def.areas) a.agc.enabled = false;
  UnitDef* o1 = nullptr;
  for (UnitDef& u : def.units)
    if (u.id == "O1") o1 = &u;
  REQUIRE(o1);
  const double true_droop = 0.045, true_lag = 0.35, true_reheat = 6.0;  // the values to recover
  o1->governor.droop = true_droop;
  o1->governor.lag_s = true_lag;
  o1->turbine.reheat_s = true_reheat;
  Recording full = record_grid_run(def, "oskany", {"O1"}, 60.0);
  // 10 samples a second with seeded measurement noise on the output.
  Recording rec;
  rec.power_mw.push_back({"O1", {}});
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 0.1);  // MW
  for (std::size_t i = 0; i < full.t_s.size(); i += 10) {
    rec.t_s.push_back(full.t_s[i]);
    rec.frequency_hz.push_back(full.frequency_hz[i]);
    rec.power_mw[0].second.push_back(full.power_mw[0].second[i] + noise(rng));
  }
  FitSpec spec;
  spec.playback.def = test::load("scenarios/demo_three_areas.json");  // the scenario's own (wrong) values
  spec.playback.units = {"O1"};
  spec.playback.recording = rec;
  spec.params = {{"governor.droop", 0.02, 0.1}, {"governor.lag_s", 0.05, 1.0}, {"turbine.reheat_s", 2.0, 12.0}};
  spec.starts = 3;
  spec.seed = 11;
  std::vector<std::string> errors;
  const auto results = run_fits({spec}, 2, errors);
  INFO(errors[0]);
  REQUIRE(results[0]);
  const FitResult& r = *results[0];
  INFO("fitted " << r.values[0] << ", " << r.values[1] << ", " << r.values[2] << " +- " << r.sigma[0] << ", "
                 << r.sigma[1] << ", " << r.sigma[2] << " in " << r.evaluations << " runs");
  CHECK(std::abs(r.values[0] / true_droop - 1.0) < 0.02);
  CHECK(std::abs(r.values[1] / true_lag - 1.0) < 0.02);
  CHECK(std::abs(r.values[2] / true_reheat - 1.0) < 0.02);
  CHECK(r.rmse_after_mw < r.rmse_before_mw);
  CHECK(r.rmse_after_mw < 0.15);  // about the noise (0.1 MW)
  // The 1-sigma uncertainty covers the true value within a few sigma, and is not zero.
  CHECK(r.sigma[0] > 0.0);
  CHECK(std::abs(r.values[0] - true_droop) < 5 * r.sigma[0]);
  CHECK(r.fragment["governor"]["droop"].get<double>() == r.values[0]);
}

namespace {

// One area with one battery: with no synthetic inertia its output is a single lag behind the droop
// reference, Tr dP/dt = Pref - P.
SystemDef first_order_system(double response_s) {
  SystemDef def;
  def.name = "first order";
  def.duration_s = 20.0;
  def.areas.push_back({});
  def.areas[0].id = "a";
  def.areas[0].demand_mw = 50.0;
  UnitDef b;
  b.id = "B";
  b.area = "a";
  b.rating_mw = 100.0;
  b.inertia_s = 0.0;
  b.setpoint_mw = 0.0;
  b.governor.droop = 0.04;
  b.turbine.type = TurbineType::battery;
  b.turbine.response_s = response_s;
  b.turbine.synthetic_inertia_s = 0.0;
  b.turbine.energy_mwh = 100.0;
  UnitDef g;  // inertia for the area (not played back)
  g.id = "G";
  g.area = "a";
  g.rating_mw = 100.0;
  g.inertia_s = 5.0;
  g.setpoint_mw = 50.0;
  def.units = {b, g};
  return def;
}

}  // namespace

TEST_CASE("a single lag under an injected frequency step follows dP(t) = dP_inf (1 - exp(-t/T))") {
  const double T = 0.5, step_mhz = -100.0;
  const SystemDef def = first_order_system(T);
  InjectProfile profile;
  InjectTest test;
  test.name = "step";
  test.lead_s = 0.0;
  test.pieces = {{step_mhz, 0.0, 10.0}};
  test.require = {0.95, 3.0 * T + 0.1, 1.0, 0.1, 0.05, ""};
  profile.tests = {test};
  std::string error;
  const auto out = run_injection(def, "B", profile, error);
  INFO(error);
  REQUIRE(out);
  const InjectOutcome& o = (*out)[0];
  // The closed form: the static droop response S/(R f0) * |df| (no deadband) approached exponentially.
  const double dp_inf = def.units[0].rating_mw / (def.units[0].governor.droop * def.nominal_hz) * (-step_mhz / 1000.0);
  CHECK(std::abs(o.expected_mw - dp_inf) < 1e-12);
  double worst = 0.0;
  for (std::size_t i = 0; i < o.t_s.size(); ++i)
    worst = std::max(worst, std::abs(o.response_mw[i] - dp_inf * (1.0 - std::exp(-o.t_s[i] / T))));
  INFO("largest difference from the closed form " << worst << " MW");
  CHECK(worst < 1e-6 * dp_inf);  // RK4 at h = T/50
  // 95 % of a single lag is reached at T ln 20; 5 % at T ln(1/0.95).
  REQUIRE(o.reached_s);
  CHECK(std::abs(*o.reached_s - T * std::log(20.0)) <= def.step_s);
  CHECK(std::abs(*o.delay_s - T * std::log(1.0 / 0.95)) <= def.step_s);
  CHECK(o.passed);
  // The same test with a slower lag misses its time.
  const auto slow = run_injection(first_order_system(2.0), "B", profile, error);
  REQUIRE(slow);
  CHECK_FALSE((*slow)[0].passed);
  CHECK((*slow)[0].within_margin_s < 0.0);
}

TEST_CASE("bad injection profiles are refused with their place") {
  const std::vector<std::pair<std::string, std::string>> cases = {
      {R"({"name":"x","tests":[]})", "tests"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":-200,"hold_s":-1}],"require":{"share":1,"within_s":30,"max_delay_s":2}}]})",
       "tests[0].pieces[0].hold_s"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":-200,"hold_s":10}],"require":{"share":1.5,"within_s":30,"max_delay_s":2}}]})",
       "tests[0].require.share"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":-200,"hold_s":10}],"require":{"within_s":30,"max_delay_s":2}}]})",
       "tests[0].require.share"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":0,"hold_s":10}],"require":{"share":1,"within_s":30,"max_delay_s":2}}]})",
       "tests[0].pieces"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":-200,"hold_s":10,"extra":1}],"require":{"share":1,"within_s":30,"max_delay_s":2}}]})",
       "tests[0].pieces[0].extra"},
      {R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":-200,"hold_s":10}],"require":{"share":1,"within_s":3,"max_delay_s":5}}]})",
       "tests[0].require.max_delay_s"},
  };
  for (const auto& [text, where] : cases) {
    std::vector<Issue> issues;
    INFO(text);
    CHECK_FALSE(parse_inject_profile(text, issues));
    REQUIRE_FALSE(issues.empty());
    CHECK(issues[0].path == where);
  }
  // Well formed but not judgeable on this unit: inside its deadband, or beyond its room.
  const SystemDef plant = test::load("scenarios/validation/plant.json");
  auto run = [&](double mhz) {
    std::vector<Issue> issues;
    const auto profile = parse_inject_profile(
        R"({"name":"x","tests":[{"name":"a","pieces":[{"to_mhz":)" + std::to_string(mhz) +
            R"(,"hold_s":10}],"require":{"share":0.9,"within_s":30,"max_delay_s":2}}]})",
        issues);
    REQUIRE(profile);
    std::string error;
    CHECK_FALSE(run_injection(plant, "QH1", *profile, error));
    return error;
  };
  CHECK(run(-8).find("inside the deadband of QH1 (10 mHz)") != std::string::npos);
  CHECK(run(-4000).find("has only 100 MW of room above its setpoint of 300 MW") != std::string::npos);
}

TEST_CASE("bad fit arguments are refused with what is wrong and where") {
  const SystemDef plant = test::load("scenarios/validation/plant.json");
  Recording rec;
  rec.power_mw.push_back({"QH1", {}});
  for (int i = 0; i <= 100; ++i) {
    rec.t_s.push_back(0.1 * i);
    rec.frequency_hz.push_back(50.0);
    rec.power_mw[0].second.push_back(300.0);
  }
  auto spec_with = [&](std::vector<FitParam> params) {
    FitSpec s;
    s.playback.def = plant;
    s.playback.units = {"QH1"};
    s.playback.recording = rec;
    s.params = std::move(params);
    return s;
  };
  auto refused = [](const FitSpec& s) {
    std::string error;
    CHECK_FALSE(check_fit(s, error));
    return error;
  };
  CHECK(refused(spec_with({{"governor.speed", 1, 2}})).find("no number \"governor.speed\" in unit QH1") !=
        std::string::npos);
  CHECK(
      refused(spec_with({{"governor.droop", 0.08, 0.03}})).find("governor.droop: LO (0.08) must be below HI (0.03)") !=
      std::string::npos);
  const std::string outside = refused(spec_with({{"governor.droop", 0.0, 0.1}}));
  CHECK(outside.find("bound 0 is outside what the model accepts") != std::string::npos);
  CHECK(outside.find("units[0].governor.droop") != std::string::npos);  // the scenario check's own place
  FitSpec late = spec_with({{"governor.droop", 0.02, 0.1}});
  for (double& t : late.playback.recording.t_s) t += 1000.0;  // the plant scenario runs 600 s
  CHECK(refused(late).find("less than one step") != std::string::npos);
  // Finite but not sensible: a glitch to 5 kHz, and an output in kW read as MW.
  FitSpec glitch = spec_with({{"governor.droop", 0.02, 0.1}});
  glitch.playback.recording.frequency_hz[37] = 5000.0;
  CHECK(refused(glitch).find("sample 38 (t = 3.7 s) has frequency 5000 Hz, outside 45 .. 55 Hz") != std::string::npos);
  FitSpec kw = spec_with({{"governor.droop", 0.02, 0.1}});
  kw.playback.recording.power_mw[0].second[5] = 300000.0;
  CHECK(refused(kw).find("sample 6 (t = 0.5 s) has output 300000 MW in \"QH1\", beyond ten times the rating of QH1") !=
        std::string::npos);
  // Too few samples to pin anything down, and a start the scenario cannot take (3,999 MW from a
  // 400 MW unit: kW read as MW, say) blamed on the recording, not on a parameter's bound.
  FitSpec few = spec_with({{"governor.droop", 0.02, 0.1}, {"governor.lag_s", 0.05, 1.0}});
  few.playback.recording.t_s.resize(12);
  few.playback.recording.frequency_hz.resize(12);
  few.playback.recording.power_mw[0].second.resize(12);
  CHECK(refused(few).find("the recording has 12 sample(s) within the scenario's run; a fit of 2 parameter(s) needs at "
                          "least 20") != std::string::npos);
  FitSpec high = spec_with({{"governor.droop", 0.02, 0.1}});
  for (double& p : high.playback.recording.power_mw[0].second) p = 3999.0;
  const std::string blamed = refused(high);
  CHECK(blamed.find("the recording starts QH1 where the scenario cannot") != std::string::npos);
  CHECK(blamed.find("bound") == std::string::npos);
  std::string error;
  CHECK_FALSE(parse_fit_param("governor.droop=0.1:0.05", error));
  CHECK(error.find("must be below") != std::string::npos);
  CHECK_FALSE(parse_fit_param("governor.droop=a:0.05", error));
  CHECK(error.find("must be numbers") != std::string::npos);
  for (const char* not_decimal : {"governor.droop=0x1p-5:0.05", "governor.droop=0.01:+-0.05", "governor.droop=0.01:nan"}) {
    INFO(not_decimal);
    error.clear();
    CHECK_FALSE(parse_fit_param(not_decimal, error));
    CHECK(error.find("must be numbers") != std::string::npos);
  }
  REQUIRE(parse_fit_param("governor.droop=+0.01:5e-2", error));  // one plus and exponents are decimal
  CHECK(check_fit(spec_with({{"governor.droop", 0.02, 0.1}}), error));
}
