// Requirement checks: measured values against the published isolated-station figures, pass and
// fail at the margins, cases that never arise, and bad requirement files.
#include <fstream>
#include <sstream>

#include "droopline/assess.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;

namespace {

Requirements parse_ok(const std::string& text) {
  std::vector<Issue> issues;
  auto r = parse_requirements(text, issues);
  std::string msgs;
  for (const auto& i : issues) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(r);
  return *r;
}

const CheckRow& row(const Assessment& a, const std::string& starts) {
  for (const CheckRow& r : a.rows)
    if (r.requirement.rfind(starts, 0) == 0) return r;
  FAIL("no row " << starts);
  return a.rows.front();
}

}  // namespace

// The isolated station of the model notes (H. Saadat, Power System Analysis, ch. 12): settles at
// -0.5769 Hz (published); nadir -0.893 Hz and 500 ms RoCoF -1.111 Hz/s (regression values of the
// same linear model, model notes check A). One droop unit: once settled it sits on its droop line
// (common practice), so its delivered share of the droop response is 1.
TEST_CASE("isolated station: measured values, margins and the unit on its droop line") {
  const SystemDef def = test::load("scenarios/textbook_isolated_station.json");
  const Requirements req = parse_ok(R"({"name": "t", "limits": {
      "lowest_hz_min": {"value": 59.0, "source": "test"},
      "highest_hz_max": {"value": 60.1, "source": "test"},
      "settling_deviation_hz_max": {"value": 0.5, "source": "test"},
      "rocof_hz_per_s_max": {"value": 1.5, "source": "test"}},
    "unit_response": [{"deviation_mhz": 200, "within_s": 30, "share_min": 0.99, "source": "test"},
                      {"units": ["unit1"], "deviation_mhz": 2000, "within_s": 5, "share_min": 1, "source": "never"}]})");
  const Assessment a = assess(def, req);
  const CheckRow& low = row(a, "lowest frequency");
  CHECK(*low.measured == Approx(60.0 - 0.893).margin(0.002));
  CHECK(low.margin == Approx(*low.measured - 59.0));
  CHECK(low.result == "pass");
  const CheckRow& settle = row(a, "largest settling deviation");
  CHECK(*settle.measured == Approx(0.5769).margin(0.002));
  CHECK(settle.result == "fail");  // 0.577 > 0.5
  CHECK(settle.margin == Approx(0.5 - *settle.measured));
  CHECK(*row(a, "largest RoCoF").measured == Approx(1.111).margin(0.002));
  CHECK(row(a, "highest frequency").result == "pass");
  const CheckRow& unit = row(a, "unit1 response 30 s after 200 mHz");
  REQUIRE(unit.measured);
  CHECK(*unit.measured == Approx(1.0).margin(0.005));
  CHECK(unit.result == "pass");
  const CheckRow& never = row(a, "unit1 response 5 s after 2000 mHz");
  CHECK_FALSE(never.measured);
  CHECK(never.result == "not tested");
  CHECK_FALSE(a.passed);  // the settling limit failed
  CHECK((a.failed == 1 && a.untested == 1));
  CHECK(verdict_text(a) == "requirements NOT met: 1 failed");
}

TEST_CASE("a requirement never tested keeps the verdict from met, and one on a missing unit is refused") {
  const SystemDef def = test::load("scenarios/textbook_isolated_station.json");
  const Requirements never = parse_ok(R"({"name": "t", "unit_response": [
      {"units": ["unit1"], "deviation_mhz": 2000, "within_s": 5, "share_min": 1, "source": "never"}]})");
  CHECK(requirement_issues(def, never).empty());
  const Assessment a = assess(def, never);
  CHECK_FALSE(a.passed);
  CHECK((a.failed == 0 && a.untested == 1));
  CHECK(verdict_text(a) == "not shown met: 1 of 1 not tested (the run never reached their case)");
  const Requirements typo = parse_ok(R"({"name": "t", "unit_response": [
      {"deviation_mhz": 200, "within_s": 30, "share_min": 1, "source": "s"},
      {"units": ["unit1", "UNIT1"], "deviation_mhz": 200, "within_s": 30, "share_min": 1, "source": "s"}]})");
  const std::vector<Issue> issues = requirement_issues(def, typo);
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "unit_response[1].units[1]: no unit \"UNIT1\" in the scenario (unit ids are case-sensitive)");
}

TEST_CASE("the shipped example requirements parse and every figure names its source") {
  std::ifstream in(test::source_path("scenarios/requirements/grid_code_example.json"));
  std::stringstream ss;
  ss << in.rdbuf();
  const Requirements r = parse_ok(ss.str());
  CHECK(r.limits.size() == 4);
  REQUIRE(r.responses.size() == 1);
  for (const Limit& l : r.limits) CHECK_FALSE(l.source.empty());
  CHECK_THAT(r.responses[0].source, Catch::Contains("2017/1485"));
  const Assessment a = assess(test::load("scenarios/demo_three_areas.json"), r);
  CHECK(row(a, "lowest frequency").result == "pass");
}

TEST_CASE("bad requirement files say what and where") {
  const std::vector<std::pair<std::string, std::string>> bad{
      {"[1]", "must be a JSON object"},
      {R"({"name": 5, "limits": {}})", "name: must be a string"},
      {R"({"note": [], "limits": {"lowest_hz_min": {"value": 49, "source": "x"}}})", "note: must be a string"},
      {R"({"name": "a", "name": "b"})", "duplicate key \"name\""},
      {std::string(100, '[') + std::string(100, ']'), "nested deeper than 64 levels"},
      {"{\"limits\": ", "json: line 1, column 12"},
      {R"({"limits": {"lowest_hz_min": {"value": 1e999, "source": "x"}}})", "json: "},
      {R"({"limits": {"lowest_hz_min": {"value": 49, "source": 7}}})", "limits.lowest_hz_min.source: required"},
      {R"({"unit_response": 5})", "unit_response: must be a list"},
      {R"({"unit_response": [7]})", "unit_response[0]: must be an object"},
      {"{}", "nothing to check"},
      {R"({"limits": {"nadir": {"value": 49, "source": "x"}}})", "limits.nadir: unknown limit"},
      {R"({"limits": {"lowest_hz_min": {"value": 49}}})", "limits.lowest_hz_min.source: required"},
      {R"({"limits": {"lowest_hz_min": {"value": "49", "source": "x"}}})", "limits.lowest_hz_min.value: must be a number"},
      {R"({"limits": {"lowest_hz_min": 49}})", "limits.lowest_hz_min: must be an object"},
      {R"({"unit_response": [{"deviation_mhz": 0, "within_s": 30, "share_min": 1, "source": "x"}]})",
       "unit_response[0].deviation_mhz: must lie within [1, 5000], got 0"},
      {R"({"unit_response": [{"deviation_mhz": 200, "share_min": 1, "source": "x"}]})", "unit_response[0].within_s: required"},
      {R"({"unit_response": [{"units": "V1", "deviation_mhz": 200, "within_s": 30, "share_min": 1, "source": "x"}]})",
       "unit_response[0].units: must be a list of unit ids"},
      {R"({"limitz": {}})", "limitz: unknown field"},
  };
  for (const auto& [text, msg] : bad) {
    INFO(text);
    std::vector<Issue> issues;
    CHECK_FALSE(parse_requirements(text, issues));
    std::string all;
    for (const auto& i : issues) all += i.text() + "\n";
    CHECK_THAT(all, Catch::Contains(msg));
  }
  // A limit given wrongly is reported as that, not also as "nothing to check".
  std::vector<Issue> issues;
  CHECK_FALSE(parse_requirements(R"({"limits": {"lowest_hz_min": 49}})", issues));
  REQUIRE(issues.size() == 1);
  CHECK_THAT(issues[0].text(), Catch::Contains("must be an object"));
}
