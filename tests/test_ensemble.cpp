// Ensemble stepping (droopline/ensemble.hpp) and sweeps through it: for every kernel variant the processor runs, each
// member's results are the bits of its run alone, whether it stayed in the lanes, left them part-way (a tie trip in
// some members only) or never joined (a structure of its own); and a sweep's CSV is the same with the ensemble on and
// off.
#include <cstring>
#include <map>
#include <nlohmann/json.hpp>

#include "droopline/ensemble.hpp"
#include "droopline/kernel_choice.hpp"
#include "droopline/sweep.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;
using json = nlohmann::ordered_json;

namespace {

// Puts the kernels back as they were when the test ends.
struct KernelsRestored {
  std::string was = kernels_in_use();
  ~KernelsRestored() {
    std::string err;
    use_kernels(was, err);
  }
};

// Runs `check` with each kernel variant this processor runs in use in turn (one it cannot run is skipped with a
// message), then puts the kernels back as they were.
template <class F>
void each_variant(F check) {
  KernelsRestored restore;
  for (const char* v : {"avx512", "avx2", "baseline"}) {
    std::string err;
    if (!use_kernels(v, err)) {
      WARN("skipping the " << v << " kernels: " << err);
      continue;
    }
    INFO("kernels " << v);
    check();
  }
}

// A 20-unit single-area fleet, the five turbine types in turn, with ramp limits, valve limits, both deadband kinds, an
// isochronous unit; a load step at 1 s. Invented values.
json fleet20(double seconds) {
  SystemDef d;
  d.name = "ensemble test fleet";
  d.nominal_hz = 50.0;
  d.step_s = 0.01;
  d.duration_s = seconds;
  d.output_every_s = 0.5;
  AreaDef a;
  a.id = "grid";
  a.load_damping = 1.5;
  for (std::size_t i = 0; i < 20; ++i) {
    UnitDef u;
    u.id = "u" + std::to_string(i);
    u.area = "grid";
    const double f = static_cast<double>(i) / 19.0;
    u.rating_mw = 80.0 + 120.0 * f;
    u.setpoint_mw = 0.6 * u.rating_mw;
    u.inertia_s = 3.0 + 3.0 * f;
    u.governor.droop = 0.04 + 0.03 * f;
    u.governor.deadband_hz = i % 3 == 0 ? 0.0 : 0.01 + 0.02 * f;
    u.governor.deadband = i % 2 ? DeadbandKind::step : DeadbandKind::offset;
    u.governor.lag_s = 0.1 + 0.3 * f;
    if (i % 4 == 1) u.ramp_mw_per_s = 2.0 + 3.0 * f;
    if (i % 6 == 2) u.max_mw = 0.65 * u.rating_mw;  // little headroom: the valve limit acts
    if (i == 3) u.governor.mode = GovernorMode::isochronous;
    switch (i % 5) {
      case 0:
        u.turbine.type = TurbineType::steam;
        u.turbine.steam_chest_s = 0.2 + 0.3 * f;
        break;
      case 1:
        u.turbine.type = TurbineType::reheat;
        u.turbine.reheat_s = 4.0 + 5.0 * f;
        break;
      case 2:
        u.turbine.type = TurbineType::hydro;
        u.turbine.water_s = 1.0 + 1.5 * f;
        break;
      case 3:
        u.turbine.type = TurbineType::gas;
        break;
      default:
        u.turbine.type = TurbineType::battery;
        u.inertia_s = 0.0;
        u.rating_mw = 30.0;
        u.setpoint_mw = 0.0;
        u.governor.droop = 0.02;
        u.turbine.energy_mwh = 5.0 + 10.0 * f;
        u.turbine.synthetic_inertia_s = 2.0;
        break;
    }
    d.units.push_back(u);
  }
  for (const UnitDef& u : d.units) a.demand_mw += u.setpoint_mw;
  d.areas.push_back(a);
  EventDef ev{1.0, test::load_step("grid", 0.05 * a.demand_mw)};
  d.events.push_back(ev);
  ev.at_s = 8.0;
  ev.command.kind = CommandKind::load_ramp;
  ev.command.mw = -40.0;
  ev.command.over_s = 5.0;
  d.events.push_back(ev);
  return scenario_to_json(d);
}

SweepSpec spec_of(json scenario, const std::vector<std::string>& vary) {
  SweepSpec spec;
  spec.scenario = std::move(scenario);
  spec.threads = 1;
  for (const std::string& v : vary) {
    std::string err;
    auto parsed = parse_vary(v, err);
    INFO(err);
    REQUIRE(parsed);
    spec.vary.push_back(std::move(*parsed));
  }
  return spec;
}

std::vector<std::string> paths_of(const SweepSpec& spec) {
  std::vector<std::string> p;
  for (const Vary& v : spec.vary) p.push_back(v.path);
  return p;
}

SweepResult sweep(const SweepSpec& spec) {
  std::string err;
  SweepResult r = run_sweep(spec, err);
  INFO(err);
  REQUIRE(err.empty());
  return r;
}

// The CSV line of a row without its index (a one-member sweep numbers its row 0).
std::string row_text(const SweepSpec& spec, SweepRow row) {
  row.index = 0;
  return sweep_to_csv(paths_of(spec), {row});
}

// Every row of `spec` swept with the ensemble equals, byte for byte, the row of a one-member sweep of its combination
// (run alone through the ordinary engine), and the whole CSV equals the one of the sweep with the ensemble off, on one
// and two threads. Returns the ensemble's rows.
SweepResult check_against_alone(const SweepSpec& spec) {
  const SweepResult on = sweep(spec);
  SweepSpec off_spec = spec;
  off_spec.ensemble = false;
  const SweepResult off = sweep(off_spec);
  SweepSpec two = spec;
  two.threads = 2;
  const std::string csv = sweep_to_csv(paths_of(spec), on.rows);
  CHECK(csv == sweep_to_csv(paths_of(spec), off.rows));
  CHECK(csv == sweep_to_csv(paths_of(spec), sweep(two).rows));
  std::size_t valid = 0;
  for (const SweepRow& row : on.rows) valid += row.status == "ok";
  CHECK(off.alone_members == valid);
  CHECK(on.ensemble_members + on.diverged_members + on.alone_members == valid);
  for (const SweepRow& row : on.rows) {
    SweepSpec one = spec;
    one.ensemble = false;
    for (std::size_t k = 0; k < one.vary.size(); ++k) one.vary[k].values = {row.values[k]};
    const SweepResult alone = sweep(one);
    REQUIRE(alone.rows.size() == 1);
    INFO("row " << row.index << " went " << row.path);
    CHECK(row_text(spec, row) == row_text(spec, alone.rows[0]));
  }
  return on;
}

std::size_t distinct_nadirs(const SweepResult& r) {
  std::map<double, int> seen;
  for (const SweepRow& row : r.rows)
    if (row.metrics.size() > 3 && row.metrics[3]) ++seen[*row.metrics[3]];
  return seen.size();
}

bool same_bits(double a, double b) { return std::memcmp(&a, &b, sizeof a) == 0; }

}  // namespace

TEST_CASE("ensemble sweep of a 20-unit mixed fleet: every row is its run alone, for every kernel variant") {
  each_variant([&] {
    // Very different values side by side: lanes mixed up would show in every comparison.
    const SweepSpec spec =
        spec_of(fleet20(60.0),
                {"units[u0].governor.droop=0.02,0.1", "units[u1].governor.lag_s=0.05,0.6",
                 "units[u2].turbine.water_s=0.8,2.8", "units[u6].turbine.reheat_s=3,10", "events[0].mw=20,140,400"});
    const SweepResult r = check_against_alone(spec);
    CHECK(r.ensemble_members == r.rows.size());
    CHECK(distinct_nadirs(r) > r.rows.size() / 2);
  });
}

TEST_CASE("ensemble sweep of two areas with a tie and secondary control") {
  json base = scenario_to_json(test::load("scenarios/textbook_two_areas_agc.json"));
  base["duration_s"] = 90;
  each_variant([&] {
    const SweepSpec spec = spec_of(base, {"units[gen1].governor.droop=0.03,0.05,0.08", "ties[tie12].pmax_mw=300,2000",
                                          "areas[area2].agc.ki_per_s=0.02,0.08", "events[0].mw=60,187.5"});
    const SweepResult r = check_against_alone(spec);
    CHECK(r.ensemble_members == r.rows.size());
    CHECK(distinct_nadirs(r) > r.rows.size() / 2);
  });
}

TEST_CASE("ensemble sweep: members of another structure run alone, and an invalid one is reported") {
  each_variant([&] {
    // Durations and steps change the step count: only members sharing the group's first one's structure join it; a
    // negative droop is refused by validation.
    const SweepSpec spec =
        spec_of(fleet20(20.0), {"duration_s=20,25", "step_s=0.01,0.02", "units[u0].governor.droop=-0.05,0.03,0.06"});
    const SweepResult r = check_against_alone(spec);
    CHECK(r.alone_members > 0);
    CHECK(r.ensemble_members > 0);
    std::size_t invalid = 0;
    for (const SweepRow& row : r.rows) invalid += row.status == "invalid";
    CHECK(invalid == 4);
  });
}

TEST_CASE("ensemble sweep: trips, shedding and a tie trip in some members only") {
  json island = scenario_to_json(test::load("scenarios/demo_unit_trip_shedding.json"));
  island["duration_s"] = 40;
  json two = scenario_to_json(test::load("scenarios/textbook_two_areas_agc.json"));
  two["duration_s"] = 40;
  json trip;
  trip["at_s"] = 10;
  trip["kind"] = "tie_trip";
  trip["tie"] = "tie12";
  two["events"].push_back(trip);
  each_variant([&] {
    // The inertia left decides how many shedding stages pick up; the trip time differs between members, so the lanes
    // see it at different steps.
    const SweepResult shed =
        check_against_alone(spec_of(island, {"units[ellery_a].inertia_s=1,4,12", "events[0].at_s=5,5.5,7"}));
    std::map<double, int> shed_mw;
    for (const SweepRow& row : shed.rows) ++shed_mw[*row.metrics[9]];
    CHECK(shed_mw.size() > 1);  // some shed, some did not
    // A tie trip at 10 s, or at 30 or 35 s: those that trip while others do not leave the lanes.
    const SweepResult tie = check_against_alone(spec_of(two, {"events[1].at_s=10,30,35", "events[0].mw=80,187.5"}));
    CHECK(tie.diverged_members > 0);
    CHECK(tie.ensemble_members > 0);
  });
}

TEST_CASE("Ensemble: each member's state after every step is its run alone, bit for bit") {
  const SystemDef two = test::load("scenarios/textbook_two_areas_agc.json");
  std::vector<std::unique_ptr<Engine>> lanes, alone;
  for (int i = 0; i < 5; ++i) {
    SystemDef d = two;
    d.duration_s = 30;
    d.units[0].governor.droop = 0.03 + 0.02 * i;
    d.ties[0].pmax_mw = 200.0 + 900.0 * i;
    d.events[0].command.mw = 50.0 + 60.0 * i;
    lanes.push_back(test::make(d));
    alone.push_back(test::make(d));
  }
  std::vector<Engine*> members;
  for (auto& e : lanes) members.push_back(e.get());
  Ensemble ens(members);
  std::size_t compared = 0;
  while (!ens.finished()) {
    ens.step();
    for (std::size_t m = 0; m < lanes.size(); ++m) {
      alone[m]->step();
      for (const char* a : {"area1", "area2"})
        compared +=
            same_bits(lanes[m]->area(*lanes[m]->find_area(a)).f_hz, alone[m]->area(*alone[m]->find_area(a)).f_hz);
      for (const char* u : {"gen1", "gen2"})
        compared += same_bits(test::power(*lanes[m], u), test::power(*alone[m], u));
      compared += same_bits(test::flow(*lanes[m], "tie12"), test::flow(*alone[m], "tie12"));
    }
  }
  CHECK(compared == 5u * 5u * 3000u);
  for (std::size_t m = 0; m < lanes.size(); ++m) CHECK(ens.left_at(m) == -1);
  CHECK(test::freq(*lanes[0], "area1") != test::freq(*lanes[4], "area1"));
  // A member of another structure is refused, saying why.
  SystemDef other = two;
  other.duration_s = 31;
  auto odd = test::make(other);
  CHECK(Ensemble::differs(*lanes[0], *odd) == "a different step count or duration");
  CHECK_THROWS_WITH(Ensemble({lanes[0].get(), odd.get()}),
                    "ensemble member 1 differs from the first: a different "
                    "step count or duration");
}
