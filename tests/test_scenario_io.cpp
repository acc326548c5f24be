// Scenario loading and validation (a table of bad inputs with their exact messages), the JSON
// form, and every shipped scenario. The command line's outputs are tested in test_cli.cpp.
#include <algorithm>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <nlohmann/json.hpp>

#include "bad_scenarios.hpp"
#include "droopline/json_input.hpp"
#include "support.hpp"

using namespace droopline;
using namespace bad_input;
using json = nlohmann::ordered_json;
namespace fs = std::filesystem;

namespace {

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

TEST_CASE("bad inputs give their exact message") {
  CHECK(std::size(kBad) >= 25);
  int index = 0;
  for (const BadCase& c : kBad) {
    const std::string text = mutate(c);
    LoadResult r = parse_scenario(text);
    const auto errors = error_texts(r);
    INFO("case " << index << " (" << c.pointer << "): got " << Catch::Detail::stringify(errors));
    CHECK_FALSE(r.system.has_value());
    CHECK(std::find(errors.begin(), errors.end(), std::string(c.expected)) != errors.end());
    ++index;
  }
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

TEST_CASE("a number beyond a double's range is named, with where it is") {
  std::vector<Issue> issues;
  CHECK_FALSE(parse_untrusted_json("{\"a\": 1,\n \"b\": -1e400}", issues));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: line 2, column 12: the number -1e400 is beyond the range of a double "
                            "(about 1.8e308 in magnitude)");
  // A long one is cut in the message; the largest double itself still reads.
  issues.clear();
  CHECK_FALSE(parse_untrusted_json("[" + std::string(400, '9') + "]", issues));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text().find("the number " + std::string(40, '9') + "... is beyond") != std::string::npos);
  issues.clear();
  CHECK(parse_untrusted_json("[1.7976931348623157e308, 4.9e-324, 1e-400]", issues));
  CHECK(issues.empty());
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

TEST_CASE("operator commands: read, written back the same, restore without mw means all") {
  const char* text = R"([{"kind": "unit_stop", "unit": "G1"},
    {"kind": "unit_stop", "unit": "G1", "ramp_mw_per_s": 4},
    {"kind": "schedule", "area": "west", "mw": -120, "over_s": 30},
    {"kind": "schedule", "area": "west", "mw": 80},
    {"kind": "shed", "area": "west", "mw": 25},
    {"kind": "restore", "area": "west", "mw": 10},
    {"kind": "restore", "area": "west"},
    {"kind": "agc", "area": "west", "enabled": true, "mode": "constant_frequency"},
    {"kind": "agc", "area": "west", "enabled": false}])";
  auto parsed = parse_commands(text);
  REQUIRE(parsed.issues.empty());
  REQUIRE(parsed.commands.size() == 9);
  CHECK_FALSE(parsed.commands[0].ramp_mw_per_s);
  CHECK(parsed.commands[2].over_s == 30.0);
  CHECK(parsed.commands[3].over_s == 0.0);
  CHECK_FALSE(parsed.commands[5].all_shed);
  CHECK(parsed.commands[6].all_shed);
  CHECK(parsed.commands[7].agc_mode == AgcMode::constant_frequency);
  CHECK_FALSE(parsed.commands[8].agc_mode);
  CHECK_FALSE(parsed.commands[7].mode);  // the governor's mode is not touched
  const std::vector<std::string> expected = {
      R"({"kind":"unit_stop","unit":"G1"})",
      R"({"kind":"unit_stop","unit":"G1","ramp_mw_per_s":4.0})",
      R"({"kind":"schedule","area":"west","mw":-120.0,"over_s":30.0})",
      R"({"kind":"schedule","area":"west","mw":80.0,"over_s":0.0})",
      R"({"kind":"shed","area":"west","mw":25.0})",
      R"({"kind":"restore","area":"west","mw":10.0})",
      R"({"kind":"restore","area":"west"})",
      R"({"kind":"agc","area":"west","enabled":true,"mode":"constant_frequency"})",
      R"({"kind":"agc","area":"west","enabled":false})"};
  for (std::size_t i = 0; i < expected.size(); ++i) {
    const std::string written = command_to_json(parsed.commands[i]).dump();
    CHECK(written == expected[i]);
    auto back = parse_commands(written);
    REQUIRE(back.commands.size() == 1);
    CHECK(command_to_json(back.commands[0]).dump() == written);
  }
  // Against the base scenario: ids and bounds resolve (the state checks are the engine's).
  LoadResult r = parse_scenario(kBase);
  REQUIRE(r.system);
  Resolved res = resolve_all(*r.system, parsed.commands);
  CHECK(res.issues.empty());
  REQUIRE(res.actions.size() == 9);
  CHECK_FALSE(std::get<Restore>(res.actions[6]).mw);
  CHECK(std::get<Restore>(res.actions[5]).mw == 10.0);
}

TEST_CASE("start_up_s and the agc mode round-trip, typical start-up ranges warn") {
  nlohmann::ordered_json j = nlohmann::ordered_json::parse(kBase);
  j["units"][1]["start_up_s"] = 600;  // reheat: typical 1-4 h
  j["areas"][0]["agc"] = {{"enabled", true}, {"mode", "constant_interchange"}};
  LoadResult r = parse_scenario(j.dump());
  REQUIRE(r.system);
  CHECK(r.system->def().units[1].start_up_s == 600.0);
  CHECK(r.system->def().areas[0].agc.mode == AgcMode::constant_interchange);
  bool warned = false;
  for (const Issue& i : r.issues)
    warned = warned || (i.warning && i.text() ==
                                         "units[1].start_up_s: 600 is outside the typical range 3600-14400 of "
                                         "hot steam unit start-up (s)");
  CHECK(warned);
  const std::string once = scenario_to_json(r.system->def()).dump();
  LoadResult again = parse_scenario(once);
  REQUIRE(again.system);
  CHECK(again.system->def().units[1].start_up_s == 600.0);
  CHECK(again.system->def().areas[0].agc.mode == AgcMode::constant_interchange);
}

TEST_CASE("the scenario round-trips through its JSON form") {
  LoadResult r = parse_scenario(kBase);
  REQUIRE(r.system);
  const std::string once = scenario_to_json(r.system->def()).dump();
  LoadResult again = parse_scenario(once);
  REQUIRE(again.system);
  CHECK(scenario_to_json(again.system->def()).dump() == once);
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
  CHECK(c.issues[0].text() == "json: duplicate key \"tie\" in [0]");
  LoadResult r = parse_scenario(R"({"name": "x", "areas": [], "areas": [{"id": "a", "x": {"y": 1}}]})");
  REQUIRE(r.issues.size() == 1);
  CHECK(r.issues[0].text() == "json: duplicate key \"areas\"");
}

TEST_CASE("a streamed array: each element is handed over once, in order, and left out of the document") {
  std::vector<std::pair<std::size_t, json>> got;
  const StreamedArray streamed{"units", [&](json&& e, std::size_t i) { got.emplace_back(i, std::move(e)); }, {}};
  std::vector<Issue> issues;
  const auto j = parse_untrusted_json(
      R"({"a": 1, "units": [{"id": "x", "units": [5]}, 7, [1, [2]], null, {}], "b": {"units": [1]}})", issues,
      JsonLimits{}, streamed);
  REQUIRE(j);
  CHECK(issues.empty());
  REQUIRE(got.size() == 5);
  for (std::size_t i = 0; i < got.size(); ++i) CHECK(got[i].first == i);
  CHECK(got[0].second == json::parse(R"({"id": "x", "units": [5]})"));  // an inner "units" is not streamed
  CHECK(got[1].second == 7);
  CHECK(got[2].second == json::parse("[1, [2]]"));
  CHECK(got[3].second.is_null());
  CHECK(got[4].second == json::object());
  CHECK((*j)["units"] == json::array());
  CHECK((*j)["b"]["units"] == json::parse("[1]"));  // only the root's member
  CHECK((*j)["a"] == 1);

  // Not an array at the root: nothing is handed over, the value stays for the reader to refuse.
  got.clear();
  const auto o = parse_untrusted_json(R"({"units": {"u": [1]}})", issues, JsonLimits{}, streamed);
  REQUIRE(o);
  CHECK(got.empty());
  CHECK((*o)["units"]["u"] == json::parse("[1]"));
}

TEST_CASE("a streamed array keeps the gate's checks: duplicates and depth inside an element fail the parse") {
  std::size_t taken = 0;
  const StreamedArray streamed{"units", [&](json&&, std::size_t) { ++taken; }, {}};
  std::vector<Issue> issues;
  CHECK_FALSE(parse_untrusted_json(R"({"units": [{"id": "a"}, {"id": "b", "id": "c"}]})", issues, JsonLimits{},
                                   streamed));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: duplicate key \"id\" in units[1]");
  issues.clear();
  CHECK_FALSE(parse_untrusted_json(R"({"units": [[[1]]]})", issues, {.max_depth = 3}, streamed));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text() == "json: line 1, column 13: nested deeper than 3 levels of objects and arrays");
  issues.clear();
  CHECK_FALSE(parse_untrusted_json(R"({"units": [1, 2,]})", issues, JsonLimits{}, streamed));
  REQUIRE(issues.size() == 1);
  CHECK(issues[0].text().rfind("json: line 1, column 17: syntax error", 0) == 0);
  CHECK(taken == 4);  // handed over before the failure was known: the caller throws them away
}

TEST_CASE("a scenario's units are reported in the reading order wherever they sit in the text") {
  // The units are read while the text is parsed; their problems still come after the areas'
  // and before the events', as the reader's order has them, even with units first in the file.
  json base = json::parse(kBase);
  base["areas"][0]["demand_mw"] = "a lot";
  base["units"][1]["governor"]["droop"] = "steep";
  base["events"][0]["at_s"] = "soon";
  json units_first = json::object();
  units_first["units"] = base["units"];
  for (auto& [key, value] : base.items())
    if (key != "units") units_first[key] = value;
  const auto a = error_texts(parse_scenario(base.dump()));
  const auto b = error_texts(parse_scenario(units_first.dump()));
  CHECK(a == b);
  REQUIRE(a.size() == 3);
  CHECK(a[0].rfind("areas[0].demand_mw:", 0) == 0);
  CHECK(a[1].rfind("units[1].governor.droop:", 0) == 0);
  CHECK(a[2].rfind("events[0].at_s:", 0) == 0);
}

TEST_CASE("a duplicate key says which object holds it, and a flood of them is counted, not listed") {
  LoadResult r = parse_scenario(
      R"({"areas": [{"id": "a", "agc": {"kp": 1, "kp": 2}}], "units": [{}, {"turbine": {"type": "steam", "type": "gas"}}]})");
  REQUIRE(r.issues.size() == 2);
  CHECK(r.issues[0].text() == "json: duplicate key \"kp\" in areas[0].agc");
  CHECK(r.issues[1].text() == "json: duplicate key \"type\" in units[1].turbine");
  std::string flood = "{\"a\": 1";
  for (int i = 0; i < 5000; ++i) flood += ", \"a\": 1";
  LoadResult f = parse_scenario(flood + "}");
  REQUIRE(f.issues.size() == 101);
  CHECK(f.issues[100].text() == "json: 4900 more duplicate keys not listed");
}

TEST_CASE("a text of many bad units lists the first thousand problems and counts the rest") {
  std::string text = "{\"units\": [";
  for (int i = 0; i < 3000; ++i) text += (i ? ",{}" : "{}");
  LoadResult r = parse_scenario(text + "]}");
  CHECK_FALSE(r.system);
  // areas and duration_s are missing (2), then each of the 3,000 units lacks id, area, rating_mw,
  // setpoint_mw, turbine and inertia_s (18,000): 1,000 listed, the rest counted.
  REQUIRE(r.issues.size() == 1001);
  CHECK(r.issues[0].text() == "duration_s: required");
  CHECK(r.issues[1000].text() == "17002 more problems not listed (the first 1000 are)");
}

#if defined(__linux__)
#include <sys/mman.h>
#include <unistd.h>

#include "droopline/page_hint.hpp"

TEST_CASE("prepare_pages makes a fresh buffer present and leaves every byte as it was", "[loader]") {
  const std::size_t page = static_cast<std::size_t>(sysconf(_SC_PAGESIZE)), bytes = 6 * 1024 * 1024 + 123;
  // A written buffer, hinted from an odd address to an odd end: nothing in it changes.
  std::vector<unsigned char> written(bytes);
  for (std::size_t i = 0; i < bytes; ++i) written[i] = static_cast<unsigned char>(i * 7 + 3);
  detail::prepare_pages(written.data() + 5, bytes - 11);
  bool same = true;
  for (std::size_t i = 0; i < bytes; ++i) same = same && written[i] == static_cast<unsigned char>(i * 7 + 3);
  CHECK(same);
  // Fresh anonymous memory (as a large allocation gets it): absent until written, present after
  // the hint, on a kernel that knows the advice (probed first; Linux 5.14 and later).
  void* map = mmap(nullptr, bytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  REQUIRE(map != MAP_FAILED);
  const std::size_t pages = (bytes + page - 1) / page;
  auto resident = [&] {
    std::vector<unsigned char> in(pages);
    REQUIRE(mincore(map, bytes, in.data()) == 0);
    return static_cast<std::size_t>(std::count_if(in.begin(), in.end(), [](unsigned char c) { return c & 1; }));
  };
  CHECK(resident() == 0);
  const bool knows = madvise(static_cast<char*>(map) + (pages - 1) * page, page, 23 /* MADV_POPULATE_WRITE */) == 0;
  detail::prepare_pages(map, bytes);
  if (knows) CHECK(resident() == pages);
  const auto* b = static_cast<const unsigned char*>(map);
  CHECK(std::all_of(b, b + bytes, [](unsigned char c) { return c == 0; }));
  // Small buffers and null are left alone.
  detail::prepare_pages(nullptr, bytes);
  detail::prepare_pages(written.data(), 100);
  munmap(map, bytes);
}
#endif

TEST_CASE("find_text finds what string_view::find finds", "[loader]") {
  const std::string_view text = "{\"units\": [{\"turbine\": 1}, {\"turbine\":2}], \"x\": \"turbine\"}";
  for (const std::string_view needle : {"\"turbine\"", "\"", "}", "{\"units\"", "turbine\"}", "absent", ""})
    for (std::size_t from = 0; from <= text.size() + 2; ++from) {
      INFO("needle " << needle << " from " << from);
      CHECK(detail::find_text(text, needle, from) == text.find(needle, from));
    }
  CHECK(detail::find_text("", "a") == std::string_view::npos);
  CHECK(detail::find_text("ab", "abc") == std::string_view::npos);
}
