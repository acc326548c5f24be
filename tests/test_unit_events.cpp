// A fleet's units read from the parser's events (the fast path of the scenario loader) against
// the same units read from their documents: the same definitions, the same problems, and the
// gate's checks (duplicates, depth) kept for elements offered as events.
#include <catch2/catch.hpp>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "bad_scenarios.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"

using namespace droopline;
using json = nlohmann::ordered_json;

namespace {

std::vector<std::string> texts(const LoadResult& r) {
  std::vector<std::string> out;
  for (const Issue& i : r.issues) out.push_back(i.text());
  return out;
}

// Both reads of `text`: the same problems in the same order, and the same definition written
// back (every field, numbers to the last bit); returns how many units came from events.
std::size_t same_both_ways(const std::string& text) {
  INFO(text);
  std::size_t from_events = 0;
  const LoadResult fast =
      detail::parse_scenario(text, {.units_from_events = true, .units_read_from_events = &from_events});
  const LoadResult slow = detail::parse_scenario(text, {.units_from_events = false});
  CHECK(texts(fast) == texts(slow));
  REQUIRE(fast.system.has_value() == slow.system.has_value());
  if (fast.system) CHECK(scenario_to_json(fast.system->def()).dump() == scenario_to_json(slow.system->def()).dump());
  return from_events;
}

// The base scenario with one more unit, written as given.
std::string with_unit(const std::string& unit) {
  std::string text = bad_input::kBase;
  const std::string anchor = "\"units\": [";
  return text.insert(text.find(anchor) + anchor.size(), unit + ",");
}

}  // namespace

TEST_CASE("well-formed units read from events equal the units read from their documents") {
  const std::vector<std::string> units = {
      R"({"id": "S", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50,
          "governor": {"mode": "isochronous", "droop": 0.04, "deadband_hz": 0.02, "deadband": "step",
                       "lag_s": 0.3, "integral_s": 12}, "turbine": {"type": "steam", "steam_chest_s": 0.25}})",
      R"({"turbine": {"hp_fraction": 0.25, "type": "reheat", "reheat_s": 6.5, "steam_chest_s": 0.2},
          "setpoint_mw": 30.000000000000004, "id": "R", "inertia_s": 4.5, "area": "east", "rating_mw": 100,
          "min_mw": 10, "max_mw": 90, "ramp_mw_per_s": 1.5, "agc_share": 0.3, "online": false, "start_up_s": 600})",
      R"({"id": "H", "area": "west", "rating_mw": 100, "inertia_s": 3, "setpoint_mw": 60,
          "turbine": {"type": "hydro", "water_s": 1.2, "temporary_droop": 0.4, "reset_s": 5}})",
      R"({"id": "G", "area": "west", "rating_mw": 100, "inertia_s": 3, "setpoint_mw": 60,
          "turbine": {"type": "gas", "fuel_s": 0.5, "combustion_s": 0.2, "load_limit_mw": 95}})",
      R"({"id": "B", "area": "east", "rating_mw": 20, "setpoint_mw": -5, "min_mw": -20,
          "turbine": {"type": "battery", "response_s": 0.05, "synthetic_inertia_s": 2, "rocof_filter_s": 0.2,
                      "energy_mwh": 10, "soc": 0.6}})",
      R"({"id": "\u0055nicode", "area": "we\u0073t", "rating_mw": 1e2, "inertia_s": 4E0, "setpoint_mw": 5e1,
          "turbine": {"type": "steam"}})",
      R"({"id": "I", "area": "west", "rating_mw": 18446744073709551615, "inertia_s": -0, "setpoint_mw": -7,
          "governor": {}, "turbine": {"type": "gas"}})",
  };
  for (const std::string& u : units) CHECK(same_both_ways(with_unit(u)) == 5);  // this one and the base's four
}

TEST_CASE("units with a problem are read from their documents, with the same messages") {
  const std::vector<std::string> units = {
      // no inertia_s for a synchronous unit
      R"({"id": "A", "area": "west", "rating_mw": 100, "setpoint_mw": 50, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": "100", "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam"}})",
      R"({"id": 7, "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "online": 1,
          "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "colour": "red",
          "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam",
          "water_s": 2}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"water_s": 2}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "coal"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": ["steam"]})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "governor": [0.05],
          "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50,
          "governor": {"mode": "fast"}, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50,
          "governor": {"droop": {"pu": 0.05}}, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "min_mw": null,
          "turbine": {"type": "steam"}})",
      R"({"area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50})",
      R"({})",
      R"([])",
      R"([{"id": "A"}])",
      R"("unit")",
      R"(null)",
      R"(12)",
  };
  for (const std::string& u : units) {
    INFO(u);
    const std::string text = with_unit(u);
    CHECK(same_both_ways(text) == 0);  // the base's units come after the first problem: not kept
    CHECK_FALSE(parse_scenario(text).system.has_value());
  }
}

TEST_CASE("a repeated key inside a unit offered as events is still the gate's error") {
  const std::string repeated[] = {
      R"({"id": "A", "id": "B", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50,
          "governor": {"droop": 0.05, "droop": 0.04}, "turbine": {"type": "steam"}})",
      R"({"id": "A", "area": "west", "rating_mw": 100, "inertia_s": 5, "setpoint_mw": 50, "turbine": {"type": "steam",
          "type": "gas"}})",
  };
  const char* expected[] = {"json: duplicate key \"id\" in units[0]",
                            "json: duplicate key \"droop\" in units[0].governor",
                            "json: duplicate key \"type\" in units[0].turbine"};
  for (std::size_t i = 0; i < std::size(repeated); ++i) {
    const LoadResult r = parse_scenario(with_unit(repeated[i]));
    REQUIRE(r.issues.size() == 1);
    CHECK(r.issues[0].text() == expected[i]);
    same_both_ways(with_unit(repeated[i]));
  }
}

TEST_CASE("the gate offers each container element as events, and a declined one reaches take as its document") {
  std::vector<std::string> offered;
  std::vector<std::pair<std::size_t, json>> taken;
  StreamedArray streamed{"units", [&](json&& e, std::size_t i) { taken.emplace_back(i, std::move(e)); },
                         [&](const JsonEvents& e, std::size_t i) {
                           std::string seen = std::to_string(i) + ":";
                           for (const JsonEvents::Event& ev : e.events)
                             seen += " " + std::to_string(static_cast<int>(ev.kind)) +
                                     (ev.kind == JsonEvents::Kind::key || ev.kind == JsonEvents::Kind::string
                                          ? "=" + std::string(e.text_of(ev))
                                      : JsonEvents::is_number(ev) ? "=" + std::to_string(JsonEvents::number(ev))
                                                                  : "");
                           offered.push_back(seen);
                           return i % 2 == 0;  // take the even ones
                         }};
  std::vector<Issue> issues;
  const auto j = parse_untrusted_json(R"({"units": [{"a": 1}, {"b": [true, null, -2]}, 3, ["x"], {"c": {"d": 1.5}}]})",
                                      issues, JsonLimits{}, streamed);
  REQUIRE(j);
  CHECK(issues.empty());
  // Kinds: 0 null, 1 boolean, 2 integer (negative), 3 unsigned, 4 floating, 5 string, 6 key, 7 object,
  // 8 array, 9 close.
  CHECK(offered == std::vector<std::string>{"0: 7 6=a 3=1.000000 9", "1: 7 6=b 8 1 0 2=-2.000000 9 9", "3: 8 5=x 9",
                                            "4: 7 6=c 7 6=d 4=1.500000 9 9"});
  REQUIRE(taken.size() == 3);  // 1 and 3 declined; 2 is no container and is never offered
  CHECK(taken[0].first == 1);
  CHECK(taken[0].second == json::parse(R"({"b": [true, null, -2]})"));
  CHECK(taken[1].first == 2);
  CHECK(taken[1].second == 3);
  CHECK(taken[2].first == 3);
  CHECK(taken[2].second == json::parse(R"(["x"])"));
  CHECK((*j)["units"] == json::array());

  // The depth limit holds inside a recorded element, at the same bracket as without events.
  for (bool with_events : {true, false}) {
    StreamedArray s = streamed;
    if (!with_events) s.read_events = nullptr;
    issues.clear();
    CHECK_FALSE(parse_untrusted_json(R"({"units": [{"a": [[1]]}]})", issues, {.max_depth = 4}, s));
    REQUIRE(issues.size() == 1);
    CHECK(issues[0].text() == "json: line 1, column 19: nested deeper than 4 levels of objects and arrays");
  }
}

TEST_CASE("an element too long to record is built as its document, not offered as events") {
  std::size_t offered = 0;
  std::vector<json> taken;
  const StreamedArray streamed{"units", [&](json&& e, std::size_t) { taken.push_back(std::move(e)); },
                               [&](const JsonEvents&, std::size_t) { return ++offered, true; }};
  std::string numbers;
  for (int i = 0; i < 10000; ++i) numbers += (i ? "," : "") + std::to_string(i);
  const std::string text =
      R"({"units": [{"a": 1}, {"id": "long", "v": [)" + numbers + R"(], "w": {"x": [1]}}, {"b": 2}]})";
  std::vector<Issue> issues;
  const auto j = parse_untrusted_json(text, issues, JsonLimits{}, streamed);
  REQUIRE(j);
  CHECK(offered == 2);  // the first and the last
  REQUIRE(taken.size() == 1);
  CHECK(taken[0]["id"] == "long");
  REQUIRE(taken[0]["v"].size() == 10000);
  CHECK(taken[0]["v"][9999] == 9999);
  CHECK(taken[0]["w"] == json::parse(R"({"x": [1]})"));

  // A key repeated after the recording stopped, and one before it, are both the gate's errors.
  issues.clear();
  CHECK_FALSE(parse_untrusted_json(R"({"units": [{"id": 1, "v": [)" + numbers + R"(], "id": 2}]})", issues,
                                   JsonLimits{}, streamed));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: duplicate key \"id\" in units[0]");
  issues.clear();
  CHECK_FALSE(parse_untrusted_json(R"({"units": [{"id": 1, "id": 2, "v": [)" + numbers + R"(]}]})", issues,
                                   JsonLimits{}, streamed));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: duplicate key \"id\" in units[0]");
}
