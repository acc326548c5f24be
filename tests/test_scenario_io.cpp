// Scenario loading and validation (a table of bad inputs with their exact messages), the CLI's
// all-or-nothing outputs, determinism, and every shipped scenario.
#include <filesystem>
#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "cli_run.hpp"
#include "droopline/json_input.hpp"
#include "support.hpp"

using namespace droopline;
using json = nlohmann::ordered_json;
namespace fs = std::filesystem;

namespace {

const char* kBase = R"({
  "name": "validation base",
  "nominal_hz": 50,
  "duration_s": 60,
  "areas": [
    { "id": "west", "demand_mw": 600, "shedding": [ { "below_hz": 49.0, "delay_s": 0.1, "shed_pct": 5 } ] },
    { "id": "east", "demand_mw": 400 }
  ],
  "ties": [ { "id": "link", "from": "west", "to": "east", "pmax_mw": 800, "damping_mw_per_hz": 100 } ],
  "units": [
    { "id": "G1", "area": "west", "rating_mw": 500, "inertia_s": 5, "setpoint_mw": 400,
      "governor": { "droop": 0.05 }, "turbine": { "type": "steam" } },
    { "id": "G2", "area": "east", "rating_mw": 600, "inertia_s": 4, "setpoint_mw": 450,
      "turbine": { "type": "reheat" } },
    { "id": "B1", "area": "east", "rating_mw": 50, "inertia_s": 0, "setpoint_mw": 0,
      "turbine": { "type": "battery", "energy_mwh": 20 } },
    { "id": "H1", "area": "west", "rating_mw": 300, "inertia_s": 4, "setpoint_mw": 150,
      "turbine": { "type": "hydro", "water_s": 1.5 } }
  ],
  "events": [
    { "at_s": 1, "kind": "load_step", "area": "west", "mw": 30 },
    { "at_s": 20, "kind": "setpoint", "unit": "G1", "mw": 420 }
  ]
})";

struct BadCase {
  const char* pointer;   // JSON pointer to change
  const char* value;     // new JSON value; nullptr removes the field
  const char* expected;  // exact `path: message` that must be among the errors
};

const BadCase kBad[] = {
    {"/units/0/governor/droop", "-0.05", "units[0].governor.droop: must lie within [0.001, 1], got -0.05"},
    {"/units/0/rating_mw", "0", "units[0].rating_mw: must be > 0, got 0"},
    {"/units/0/govrnor", "{}", "units[0].govrnor: unknown field"},
    {"/units/1/id", "\"G1\"", "units[1].id: duplicate id \"G1\" (also units[0])"},
    {"/units/0/area", "\"nowhere\"", "units[0].area: unknown area \"nowhere\""},
    {"/ties/0/to", "\"x\"", "ties[0].to: unknown area \"x\""},
    {"/ties/0/to", "\"west\"", "ties[0].to: must differ from \"from\" (\"west\")"},
    {"/units/1/turbine/hp_fraction", "1.5", "units[1].turbine.hp_fraction: must lie within [0, 1], got 1.5"},
    {"/units/0/setpoint_mw", "600", "units[0].setpoint_mw: must lie within [min_mw, max_mw] = [0, 500], got 600"},
    {"/units/0/min_mw", "600", "units[0].min_mw: must be <= max_mw (500), got 600"},
    {"/step_s", "0", "step_s: must be > 0, got 0"},
    {"/step_s", "0.05", "step_s: 0.05 s is too large for the fastest time constant, units[2].turbine.response_s = 0.1 s: the fixed RK4 step must be at most a fifth of it (0.02 s) to stay accurate and stable"},
    {"/output_every_s", "0.015", "output_every_s: must be a whole multiple of step_s (0.01), got 0.015"},
    {"/duration_s", nullptr, "duration_s: required"},
    {"/areas/0/demand_mw", "\"600\"", "areas[0].demand_mw: must be a number, got a string"},
    {"/units/0/turbine/type", "\"nuclear\"", "units[0].turbine.type: must be one of \"steam\", \"reheat\", \"hydro\", \"gas\", \"battery\", got \"nuclear\""},
    {"/events/0/kind", "\"explode\"", "events[0].kind: must be one of \"load_step\", \"load_ramp\", \"unit_trip\", \"unit_start\", \"setpoint\", \"governor\", \"tie_trip\", \"tie_close\", \"agc\", \"fluctuation\", got \"explode\""},
    {"/events/1/unit", "\"G9\"", "events[1].unit: unknown unit \"G9\""},
    {"/events/0/at_s", "100", "events[0].at_s: must lie within [0, duration_s] = [0, 60], got 100"},
    {"/units/2/inertia_s", "3", "units[2].inertia_s: a battery has no physical inertia, got 3 (use turbine.synthetic_inertia_s)"},
    {"/units/2/turbine/energy_mwh", nullptr, "units[2].turbine.energy_mwh: required for a battery"},
    {"/areas/1/demand_mw", "420", "areas: generation 1000.0 MW does not balance demand 1020.0 MW in the island {west, east} (allowed difference 0.1 MW)"},
    {"/ties/0/pmax_mw", "40", "ties: the scheduled exchanges of the island {west, east} exceed what its ties can carry below the 90 degree pull-out angle (largest area surplus 50.0 MW in \"west\")"},
    {"/units/1/area", "\"west\"", "areas[1]: area \"east\" has no inertia: no online synchronous unit with inertia_s > 0"},
    {"/areas/0/shedding/0/shed_pct", "0", "areas[0].shedding[0].shed_pct: must lie within (0, 100], got 0"},
    {"/areas/0/shedding/0/below_hz", "51", "areas[0].shedding[0].below_hz: must lie between 0 and nominal_hz (50), got 51"},
    {"/events/0/unit", "\"G1\"", "events[0].unit: unknown field for load_step"},
    {"/units/0/governor/deadband", "\"square\"", "units[0].governor.deadband: must be one of \"offset\", \"step\", got \"square\""},
    {"/seed", "-1", "seed: must be a whole number >= 0, got -1"},
    {"/units/0/governor/deadband_hz", "-0.01", "units[0].governor.deadband_hz: must be >= 0, got -0.01"},
    {"/areas/0/id", "\"we st\"", "areas[0].id: must be 1-64 letters, digits, '_' or '-', got \"we st\""},
    {"/events/1/mw", "900", "events[1].mw: must lie within [min_mw, max_mw] = [0, 500] of unit \"G1\", got 900"},
    {"/events/1", R"({"at_s": 2, "kind": "governor", "unit": "G1"})", "events[1]: a governor command needs at least one of droop, deadband_hz, deadband, mode"},
    {"/units/0/inertia_s", nullptr, "units[0].inertia_s: required for a synchronous unit"},
    {"/units/1/turbine/reheat_s", "0", "units[1].turbine.reheat_s: must be > 0, got 0"},
    {"/units/3/turbine/water_s", "-1", "units[3].turbine.water_s: must be > 0, got -1"},
    {"/ties/0/pmax_mw", "-5", "ties[0].pmax_mw: must be > 0, got -5"},
    {"/areas/0/agc", R"({"enabled": "yes"})", "areas[0].agc.enabled: must be true or false, got a string"},
    // Physical bounds: finite is not yet sensible.
    {"/events/0/mw", "1e308", "events[0].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got 1e+308"},
    {"/events/0/mw", "-9000", "events[0].mw: must lie within +/-8000 MW (ten times the size of area \"west\", 800 MW), got -9000"},
    {"/events/0", R"({"at_s": 1, "kind": "load_ramp", "area": "east", "mw": 20000, "over_s": 5})", "events[0].mw: must lie within +/-6500 MW (ten times the size of area \"east\", 650 MW), got 20000"},
    {"/events/0", R"({"at_s": 1, "kind": "fluctuation", "area": "east", "sigma_mw": 5000, "tau_s": 5})", "events[0].sigma_mw: must be at most 650 MW (the size of area \"east\", 650 MW), got 5000"},
    {"/events/1", R"({"at_s": 2, "kind": "governor", "unit": "G1", "droop": 3})", "events[1].droop: must lie within [0.001, 1], got 3"},
    {"/events/1", R"({"at_s": 2, "kind": "setpoint", "unit": "G1", "mw": 410, "ramp_mw_per_s": 1e12})", "events[1].ramp_mw_per_s: must be at most 1e+06 MW/s (beyond what a real system can have), got 1e+12"},
    {"/units/0/rating_mw", "3e6", "units[0].rating_mw: must be at most 2e+06 MW (beyond what a real system can have), got 3e+06"},
    {"/units/0/inertia_s", "1000", "units[0].inertia_s: must be at most 100 s (beyond what a real system can have), got 1000"},
    {"/areas/0/demand_mw", "1e9", "areas[0].demand_mw: must be at most 2e+06 MW (beyond what a real system can have), got 1e+09"},
    {"/nominal_hz", "1e5", "nominal_hz: must lie within [10, 1000], got 100000"},
    {"/duration_s", "1e8", "duration_s: must be at most 1e+07 s (beyond what a real system can have), got 1e+08"},
    {"/step_s", "2", "step_s: must be at most 1 s (beyond what a real system can have), got 2"},
    {"/units/1/turbine/reheat_s", "1e5", "units[1].turbine.reheat_s: must be at most 10000 s (beyond what a real system can have), got 100000"},
    {"/units/2/turbine/energy_mwh", "1e9", "units[2].turbine.energy_mwh: must be at most 1e+06 MWh (beyond what a real system can have), got 1e+09"},
    {"/ties/0/pmax_mw", "1e7", "ties[0].pmax_mw: must be at most 2e+06 MW (beyond what a real system can have), got 1e+07"},
    {"/units/0/governor/droop", "5", "units[0].governor.droop: must lie within [0.001, 1], got 5"},
    {"/units/0/governor/deadband_hz", "10", "units[0].governor.deadband_hz: must be at most 5 Hz (beyond what a real system can have), got 10"},
    {"/areas/0/agc", R"({"enabled": true, "ki_per_s": 1000})", "areas[0].agc.ki_per_s: must be at most 100 /s (beyond what a real system can have), got 1000"},
    {"/units/0/ramp_mw_per_s", "1e9", "units[0].ramp_mw_per_s: must be at most 1e+06 MW/s (beyond what a real system can have), got 1e+09"},
    {"/units/2/min_mw", "-1e7", "units[2].min_mw: must be at least -2e+06 MW (beyond what a real system can have), got -1e+07"},
};

std::string mutate(const BadCase& c) {
  json j = json::parse(kBase);
  const json::json_pointer ptr(c.pointer);
  if (c.value)
    j[ptr] = json::parse(c.value);
  else
    j[ptr.parent_pointer()].erase(ptr.back());
  return j.dump(2);
}

fs::path temp_dir(const std::string& name) {
  fs::path p = fs::temp_directory_path() / ("droopline-test-" + name + "-" + std::to_string(::getpid()));
  fs::remove_all(p);
  return p;
}

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

std::vector<std::string> error_texts(const LoadResult& r) {
  std::vector<std::string> out;
  for (const Issue& i : r.issues)
    if (!i.warning) out.push_back(i.text());
  return out;
}

}  // namespace

TEST_CASE("the base scenario of the bad-input table is valid") {
  LoadResult r = parse_scenario(kBase);
  INFO(Catch::Detail::stringify(error_texts(r)));
  CHECK(r.system.has_value());
}

TEST_CASE("bad inputs give their exact message and no output") {
  CHECK(std::size(kBad) >= 25);
  const fs::path dir = temp_dir("bad");
  fs::create_directories(dir);
  int index = 0;
  for (const BadCase& c : kBad) {
    const std::string text = mutate(c);
    LoadResult r = parse_scenario(text);
    const auto errors = error_texts(r);
    INFO("case " << index << " (" << c.pointer << "): got " << Catch::Detail::stringify(errors));
    CHECK_FALSE(r.system.has_value());
    CHECK(std::find(errors.begin(), errors.end(), std::string(c.expected)) != errors.end());
    // The CLI refuses it with exit 2 and writes nothing.
    const fs::path file = dir / ("case" + std::to_string(index) + ".json");
    std::ofstream(file) << text;
    const fs::path out = dir / ("out" + std::to_string(index));
    CHECK(cli::run(file.string(), out.string(), true) == 2);
    CHECK_FALSE(fs::exists(out));
    ++index;
  }
  fs::remove_all(dir);
}

TEST_CASE("syntax errors and duplicate keys are reported with where they are") {
  LoadResult r = parse_scenario("{\n  \"name\": \"x\",\n  \"areas\": [ 1, ]\n}");
  REQUIRE(r.issues.size() == 1);
  CHECK(r.issues[0].text().rfind("json: line 3, column 17: syntax error", 0) == 0);
  LoadResult d = parse_scenario(R"({"name": "a", "name": "b"})");
  REQUIRE(d.issues.size() == 1);
  CHECK(d.issues[0].text() == "json: duplicate key \"name\"");
  LoadResult top = parse_scenario("[]");
  REQUIRE(top.issues.size() == 1);
  CHECK(top.issues[0].text() == "must be an object, got an array");
}

TEST_CASE("untrusted JSON: nesting and size are bounded before anything walks the value") {
  std::vector<Issue> issues;
  // 64 levels pass; the 65th opening bracket is refused, with where it is.
  CHECK(parse_untrusted_json(std::string(64, '[') + std::string(64, ']'), issues));
  CHECK(issues.empty());
  CHECK_FALSE(parse_untrusted_json(std::string(65, '[') + std::string(65, ']'), issues));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: line 1, column 65: nested deeper than 64 levels of objects and arrays");
  // Brackets inside strings (escaped quotes too) are not nesting.
  issues.clear();
  CHECK(parse_untrusted_json(R"({"a": "[[[[\"{{{{", "b": [1]})", issues, {.max_depth = 2}));
  CHECK(issues.empty());
  CHECK_FALSE(parse_untrusted_json("{\"a\": \"[[\\\"\",\n \"b\": [[1]]}", issues, {.max_depth = 2}));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: line 2, column 8: nested deeper than 2 levels of objects and arrays");
  // A scenario nested half a million levels deep is refused without recursion (no stack overflow).
  issues.clear();
  const std::string deep = "{\"scenario\": " + std::string(500000, '[') + std::string(500000, ']') + "}";
  CHECK_FALSE(parse_untrusted_json(deep, issues));
  std::string objects;
  for (int i = 0; i < 500000; ++i) objects += "{\"a\":";
  LoadResult r = parse_scenario(objects);
  REQUIRE(r.issues.size() == 1);
  CHECK(r.issues[0].text().find("nested deeper than 64 levels") != std::string::npos);
  CommandParse c = parse_commands(std::string(300000, '['));
  REQUIRE(c.issues.size() == 1);
  CHECK(c.issues[0].text().find("nested deeper than 64 levels") != std::string::npos);
  // The size limit is checked before parsing.
  issues.clear();
  CHECK_FALSE(parse_untrusted_json("[1, 2, 3]", issues, {.max_bytes = 4}));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: text of 9 bytes is longer than the limit of 4 bytes");
}

TEST_CASE("a folder or a missing file given as the scenario is one clear error") {
  for (const std::string& path : {fs::temp_directory_path().string(), std::string("/nonexistent/scenario.json")}) {
    LoadResult r = load_scenario_file(path);
    REQUIRE(r.issues.size() == 1);
    CHECK(r.issues[0].text() == "file: \"" + path + "\" is not a readable file");
    CHECK_FALSE(r.system);
  }
}

TEST_CASE("every problem is reported at once") {
  json j = json::parse(kBase);
  j["units"][0]["governor"]["droop"] = -1;
  j["units"][1]["turbine"]["hp_fraction"] = 2;
  j["ties"][0]["pmax_mw"] = 0;
  LoadResult r = parse_scenario(j.dump());
  CHECK(error_texts(r).size() >= 3);
}

TEST_CASE("typical-range findings are warnings, not errors") {
  json j = json::parse(kBase);
  j["units"][0]["governor"]["droop"] = 0.2;
  j["ties"][0]["damping_mw_per_hz"] = 0;
  LoadResult r = parse_scenario(j.dump());
  REQUIRE(r.system.has_value());
  std::vector<std::string> warnings;
  for (const Issue& i : r.issues)
    if (i.warning) warnings.push_back(i.text());
  CHECK(std::find(warnings.begin(), warnings.end(),
                  "units[0].governor.droop: 0.2 is outside the typical range 0.02-0.12 of droop (pu)") !=
        warnings.end());
  bool undamped = false;
  for (auto& w : warnings) undamped = undamped || w.rfind("ties[0].damping_mw_per_hz: 0 leaves the inter-area swing", 0) == 0;
  CHECK(undamped);
}

TEST_CASE("commands: one object or an array, at_s refused, types checked") {
  auto one = parse_commands(R"({"kind": "load_step", "area": "north", "mw": 40})");
  REQUIRE(one.issues.empty());
  REQUIRE(one.commands.size() == 1);
  CHECK(one.commands[0].mw == 40.0);
  auto many = parse_commands(R"([{"kind": "tie_trip", "tie": "t1"}, {"kind": "agc", "area": "a", "enabled": true}])");
  CHECK(many.commands.size() == 2);
  auto timed = parse_commands(R"({"kind": "load_step", "area": "north", "mw": 40, "at_s": 3})");
  REQUIRE(timed.issues.size() == 1);
  CHECK(timed.issues[0].text() == "command.at_s: not allowed in a live command (it applies now)");
  auto bad = parse_commands(R"([{"kind": "setpoint", "unit": "G1"}, {"kind": "load_step", "area": 3, "mw": 1}])");
  CHECK(bad.commands.empty());
  REQUIRE(bad.issues.size() == 2);
  CHECK(bad.issues[0].text() == "commands[0].mw: required");
  CHECK(bad.issues[1].text() == "commands[1].area: must be a string, got a number");
}

TEST_CASE("the scenario round-trips through its JSON form") {
  LoadResult r = parse_scenario(kBase);
  REQUIRE(r.system);
  const std::string once = scenario_to_json(r.system->def()).dump();
  LoadResult again = parse_scenario(once);
  REQUIRE(again.system);
  CHECK(scenario_to_json(again.system->def()).dump() == once);
}

TEST_CASE("determinism: two runs give byte-identical files") {
  const fs::path a = temp_dir("det-a"), b = temp_dir("det-b");
  const std::string file = test::source_path("scenarios/demo_island.json");
  REQUIRE(cli::run(file, a.string(), true) == 0);
  REQUIRE(cli::run(file, b.string(), true) == 0);
  const std::string sa = slurp(a / "series.csv"), sb = slurp(b / "series.csv");
  CHECK(sa.size() > 1000);
  CHECK(sa == sb);
  CHECK(slurp(a / "summary.json") == slurp(b / "summary.json"));
  // In memory (the HTTP replay path) gives the same text as the files.
  auto loaded = load_scenario_file(test::source_path("scenarios/demo_island.json"));
  REQUIRE(loaded.system);
  auto mem = cli::run_to_strings(*loaded.system, {});
  CHECK(mem.series == sa);
  fs::remove_all(a);
  fs::remove_all(b);
}

TEST_CASE("the series has the documented columns") {
  auto e = test::make(test::load("scenarios/textbook_two_areas.json"));
  const std::string header = SeriesCsv::header(*e);
  CHECK(header == "t_s,area1.f_hz,area2.f_hz,gen1.p_mw,gen2.p_mw,tie12.flow_mw\n");
}

TEST_CASE("every shipped scenario validates and runs to its end") {
  int count = 0;
  for (const auto& entry : fs::directory_iterator(test::source_path("scenarios"))) {
    if (entry.path().extension() != ".json") continue;
    INFO(entry.path().string());
    auto def = test::load("scenarios/" + entry.path().filename().string());
    auto e = test::make(def);
    e->run();
    CHECK(e->finished());
    for (std::size_t a = 0; a < def.areas.size(); ++a)
      CHECK(std::isfinite(e->area(AreaId{static_cast<std::uint32_t>(a)}).f_hz));
    ++count;
  }
  CHECK(count >= 7);
}

// Found by fuzz_commands / fuzz_scenario: a repeated key whose second value is a container used
// to throw from the parser (a crash of `droopline check`) instead of reporting the duplicate.
TEST_CASE("a repeated key holding a container is reported, not thrown") {
  auto c = parse_commands(R"([{"kind": "tie_trip", "tie": "t", "tie": ["k"]}, {"kind": false}])");
  REQUIRE_FALSE(c.issues.empty());
  CHECK(c.issues[0].text() == "json: duplicate key \"tie\"");
  LoadResult r = parse_scenario(R"({"name": "x", "areas": [], "areas": [{"id": "a", "x": {"y": 1}}]})");
  REQUIRE(r.issues.size() == 1);
  CHECK(r.issues[0].text() == "json: duplicate key \"areas\"");
}
