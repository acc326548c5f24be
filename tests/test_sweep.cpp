// Parameter sweeps: value lists, paths, sampling and sharding, and the swept results against the
// static droop formula. Merging shard folders (`droopline merge`) is tested in test_cli.cpp.
#include <filesystem>
#include <fstream>
#include <set>
#include <sstream>

#include <nlohmann/json.hpp>

#include "droopline/sweep.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;
using json = nlohmann::ordered_json;
namespace fs = std::filesystem;

namespace {

json scenario_json(const std::string& rel) { return scenario_to_json(test::load(rel)); }

std::size_t metric_index(const std::string& name) {
  const auto& n = metric_names();
  return static_cast<std::size_t>(std::find(n.begin(), n.end(), name) - n.begin());
}

}  // namespace

TEST_CASE("value lists: explicit, ranges with the end included, and their errors") {
  std::string err;
  auto v = parse_vary("units[G1].governor.droop=0.03,0.04,0.05", err);
  REQUIRE(v);
  CHECK(v->path == "units[G1].governor.droop");
  CHECK(v->values == std::vector<double>{0.03, 0.04, 0.05});
  v = parse_vary("events[0].mw=100:200:25", err);
  REQUIRE(v);
  CHECK(v->values == std::vector<double>{100, 125, 150, 175, 200});
  v = parse_vary("x=0.02:0.06:0.01", err);  // 0.06 reached despite binary rounding
  REQUIRE(v);
  CHECK(v->values.size() == 5);
  CHECK(v->values.back() == Approx(0.06));

  const std::vector<std::pair<std::string, std::string>> bad{
      {"droop", "expected PATH=V1,V2,... or PATH=START:STOP:STEP"},
      {"x=", "expected PATH="},
      {"x=1,abc", "\"abc\" is not a number"},
      {"x=1,,2", "\"\" is not a number"},
      {"x=0x1p-5,1", "\"0x1p-5\" is not a number"},  // decimal only, as in scenarios and recordings
      {"x=1,+-2", "\"+-2\" is not a number"},
      {"x=0:inf:1", "is not START:STOP:STEP"},
      {"x=1:2", "is not START:STOP:STEP"},
      {"x=1:2:3:4", "is not START:STOP:STEP"},
      {"x=0:1:0", "STEP must be > 0"},
      {"x=2:1:0.5", "STOP 1 is below START 2"},
      {"x=1,2,1", "a value is listed twice"},
      {"x=0:1e9:1", "1e+09 values, more than the 1e+06"},
  };
  for (const auto& [spec, msg] : bad) {
    INFO(spec);
    err.clear();
    CHECK_FALSE(parse_vary(spec, err));
    CHECK_THAT(err, Catch::Contains(msg));
  }
}

TEST_CASE("a sweep's fields and values are bounded before any range is expanded") {
  std::string err;
  std::vector<std::string> many(17, "x=1,2");
  CHECK_FALSE(parse_varies(many, err));
  CHECK(err == "17 fields varied, at most 16");
  // 600,000 values, then 500,000 more: the second is refused against what is left.
  err.clear();
  CHECK_FALSE(parse_varies({"a=0:599999:1", "b=0:499999:1"}, err));
  CHECK(err == "--vary b: 500000 values, more than the 400000 left of a sweep's 1e+06");
  err.clear();
  CHECK_FALSE(parse_varies({"a=0:999998:1", "b=1,2"}, err));
  CHECK_THAT(err, Catch::Contains("more than the 1 values left of a sweep's 1e+06"));
  auto fine = parse_varies({"a=0:9:1", "b=1,2"}, err);
  REQUIRE(fine);
  CHECK(fine->size() == 2);
}

TEST_CASE("a field varied twice, by one path or by an id and an index, is refused, as is a huge grid unsampled") {
  SweepSpec spec;
  spec.scenario = scenario_json("scenarios/demo_three_areas.json");
  const std::string first_id = spec.scenario["units"][0]["id"].get<std::string>();
  std::string err;
  spec.vary = *parse_varies({"units[" + first_id + "].governor.droop=0.03,0.05", "units[0].governor.droop=0.04"}, err);
  run_sweep(spec, err);
  CHECK(err == "--vary units[0].governor.droop: the same field as --vary units[" + first_id +
                   "].governor.droop (/units/0/governor/droop); vary each field once");
  err.clear();
  spec.vary = *parse_varies({"events[0].mw=10,20", "events[0].mw=30"}, err);
  run_sweep(spec, err);
  CHECK_THAT(err, Catch::Contains("the same field as --vary events[0].mw"));
  // 990 x 990 x 100 combinations: refused whole, taken as a sample.
  err.clear();
  spec.vary = *parse_varies({"units[0].governor.droop=0.01:0.999:0.001", "units[1].governor.droop=0.01:0.999:0.001",
                             "events[0].mw=1:100:1"},
                            err);
  REQUIRE(err.empty());
  run_sweep(spec, err);
  CHECK(err == "the grid has 98010000 combinations, more than the 10000000 a sweep runs whole; use --sample N "
               "(or fewer values)");
  err.clear();
  spec.sample = 2;
  const SweepResult r = run_sweep(spec, err);
  CHECK(err.empty());
  CHECK(r.rows.size() == 2);
}

TEST_CASE("paths resolve by id or index and say where they fail") {
  json s = scenario_json("scenarios/demo_three_areas.json");
  std::string err;
  REQUIRE(set_path(s, "units[V1].governor.droop", 0.07, err));
  CHECK(s["units"][0]["governor"]["droop"] == 0.07);
  REQUIRE(set_path(s, "events[1].at_s", 150, err));
  CHECK(s["events"][1]["at_s"] == 150.0);
  REQUIRE(set_path(s, "ties[0].pmax_mw", 900, err));
  REQUIRE(set_path(s, "duration_s", 90, err));
  CHECK(s["duration_s"] == 90.0);

  const std::vector<std::pair<std::string, std::string>> bad{
      {"units[V9].governor.droop", "no element \"V9\" in units (9 element(s): V1, V2, V3, O1, O2, O3, ...)"},
      {"units[V1].governor.drop", "no number \"units[V1].governor.drop\" in the scenario (numbers here: droop"},
      {"units[V1].id", "\"units[V1].id\" is not a number"},
      {"units[V1]", "names an element, not a number"},
      {"units.droop", "\"units\" is not an object"},
      {"unitz[V1].governor.droop", "no field \"unitz\""},
      {"units[V1.droop", "unclosed ["},
      {"units[V1].", "ends with ."},
      {"events[7].mw", "no element \"7\" in events (2 element(s))"},
  };
  for (const auto& [path, msg] : bad) {
    INFO(path);
    json c = scenario_json("scenarios/demo_three_areas.json");
    err.clear();
    CHECK_FALSE(set_path(c, path, 1.0, err));
    CHECK_THAT(err, Catch::Contains(msg));
  }
}

TEST_CASE("a seeded sample is the same everywhere, distinct, and the shards partition it") {
  SweepSpec spec;
  spec.sample = 50;
  spec.seed = 7;
  const auto a = selected_indices(spec, 1000);
  const auto b = selected_indices(spec, 1000);
  CHECK(a == b);
  REQUIRE(a.size() == 50);
  CHECK(std::set<std::uint64_t>(a.begin(), a.end()).size() == 50);
  CHECK(std::is_sorted(a.begin(), a.end()));
  CHECK(a.back() < 1000);
  spec.seed = 8;
  CHECK(selected_indices(spec, 1000) != a);
  spec.sample = 5000;  // more than the grid: the grid
  CHECK(selected_indices(spec, 1000).size() == 1000);
}

// The static droop formula (common practice): after a load step dP on an isolated unit with
// droop R and load damping D, all in per unit of the unit's rating, the frequency settles at
// df = -dP / (1/R + D). The isolated station: 250 MW, D 0.8 pu on 250 MW, +50 MW = 0.2 pu, 60 Hz.
TEST_CASE("a droop sweep of the isolated station settles on the droop formula at every point") {
  SweepSpec spec;
  spec.scenario = scenario_json("scenarios/textbook_isolated_station.json");
  std::string err;
  spec.vary.push_back(*parse_vary("units[unit1].governor.droop=0.03:0.09:0.01", err));
  spec.threads = 2;
  const SweepResult r = run_sweep(spec, err);
  REQUIRE(err.empty());
  REQUIRE(r.rows.size() == 7);
  for (const SweepRow& row : r.rows) {
    const double R = row.values[0];
    const double expect = 60.0 - 60.0 * 0.2 / (1.0 / R + 0.8);
    INFO("R = " << R);
    REQUIRE(row.status == "ok");
    CHECK(row.metrics[metric_index("final_min_hz")].value() == Approx(expect).margin(0.002));
    CHECK(row.metrics[metric_index("settling_hz")].value() == Approx(expect).margin(0.005));
    CHECK(row.metrics[metric_index("nadir_hz")].value() < expect);  // the nadir overshoots
  }
  // A larger droop means a deeper steady deviation: the sweep sees the ordering.
  for (std::size_t i = 1; i < r.rows.size(); ++i)
    CHECK(*r.rows[i].metrics[metric_index("final_min_hz")] < *r.rows[i - 1].metrics[metric_index("final_min_hz")]);
}

TEST_CASE("invalid combinations become rows saying why, the rest run") {
  SweepSpec spec;
  spec.scenario = scenario_json("scenarios/textbook_isolated_station.json");
  std::string err;
  spec.vary.push_back(*parse_vary("units[unit1].governor.droop=-0.05,0.05", err));
  const SweepResult r = run_sweep(spec, err);
  REQUIRE(err.empty());
  REQUIRE(r.rows.size() == 2);
  CHECK(r.rows[0].status == "invalid");
  CHECK_THAT(r.rows[0].error, Catch::Contains("governor.droop: must lie within [0.001, 1], got -0.05"));
  CHECK(r.rows[1].status == "ok");
  spec.vary[0] = *parse_vary("units[nope].governor.droop=0.05", err);
  err.clear();
  run_sweep(spec, err);
  CHECK_THAT(err, Catch::Contains("--vary units[nope].governor.droop: no element \"nope\""));
}
