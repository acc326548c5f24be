// Exercise files (bad inputs as `path: message`), the hidden script (timed and conditional
// firing, fire now, skip, shift, add, rewind) and the alarm monitor (each kind, raise, clear with
// hysteresis, acknowledge).
#include <fstream>
#include <functional>
#include <nlohmann/json.hpp>
#include <sstream>

#include "droopline/alarms.hpp"
#include "droopline/exercise.hpp"
#include "droopline/script.hpp"
#include "exercise_support.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;
using json = nlohmann::ordered_json;

using test::errors_of;
using test::load_ok;

namespace {

const char* kFile = "tests/data/exercise_two_areas.json";

json file_json() { return json::parse(test::read_source(kFile)); }

// Steps and feeds the runner after each step, applying what it hands out at its own step (as the
// live session does through its pipeline). Returns the firings with the step they were handed out.
struct Fired {
  ScriptFiring firing;
  std::int64_t handed_at;
};
std::vector<Fired> run_script(Engine& e, ScriptRunner& s, double until_s, std::int64_t lead,
                              const std::function<void(const Engine&)>& each = {}) {
  std::vector<Fired> fired;
  std::vector<ScriptFiring> waiting;
  while (e.time_s() < until_s - 1e-9) {
    for (auto it = waiting.begin(); it != waiting.end();) {
      if (it->at_step <= e.step_index()) {
        std::vector<Issue> issues;
        auto a = resolve(e.system(), it->command, "command", issues);
        REQUIRE(a);
        REQUIRE(e.apply(*a).ok);
        it = waiting.erase(it);
      } else {
        ++it;
      }
    }
    e.step();
    if (each) each(e);
    for (ScriptFiring& f : s.due(e, lead)) {
      fired.push_back({f, e.step_index()});
      waiting.push_back(f);
    }
  }
  return fired;
}

}  // namespace

TEST_CASE("exercise file: the test exercise loads with its seats, script ids and alarm defaults") {
  ExerciseLoad r = load_exercise_file(test::source_path(kFile));
  REQUIRE(r.exercise);
  const ExerciseDef& d = r.exercise->def;
  CHECK(d.seats.size() == 2);
  CHECK(d.seats[1].areas == std::vector<std::string>{"east"});
  REQUIRE(d.script.size() == 3);
  CHECK(d.script[0].id == "s1");      // made: the first unused sN
  CHECK(d.script[1].id == "relief");  // as written
  CHECK(d.script[2].id == "s2");
  CHECK(d.time_limit_s == 600.0);
  // 50 Hz defaults (EU SO Guideline Annex III, Continental Europe) with the file's value over them.
  CHECK(d.alarms.standard_band_hz == 0.05);
  CHECK(d.alarms.limit_band_hz == 0.2);
  CHECK(d.alarms.tie_loading_pct == 10.0);
  CHECK(looks_like_exercise(file_json().dump()));
  CHECK_FALSE(looks_like_exercise(file_json()["scenario"].dump()));
  // The same keys written with escapes are the same keys; the names inside a string are not keys.
  std::string escaped = file_json().dump();
  for (const std::string key : {"\"seats\"", "\"script\""})
    escaped.replace(escaped.find(key), key.size(), "\"\\u0073" + key.substr(2));
  REQUIRE(escaped.find("\"seats\"") == std::string::npos);
  REQUIRE(escaped.find("\"script\"") == std::string::npos);
  CHECK(looks_like_exercise(escaped));
  nlohmann::ordered_json named = file_json()["scenario"];
  named["name"] = "\"seats\" and \"script\"";
  CHECK_FALSE(looks_like_exercise(named.dump()));
}

TEST_CASE("exercise file: 60 Hz defaults differ from 50 Hz ones") {
  const AlarmLimits a50 = alarm_limits_for(50.0), a60 = alarm_limits_for(60.0);
  CHECK(a60.standard_band_hz == 0.036);  // FERC Order 842 deadband
  CHECK(a50.standard_band_hz == 0.05);
  CHECK(a60.limit_band_hz < a50.limit_band_hz);
}

TEST_CASE("exercise file: a scenario path relative to the file's folder, and none that escapes it") {
  json j = file_json();
  j["scenario"] = "trajectory_three_areas.json";
  j["seats"] = json::array({{{"id", "one"}, {"name", "One"}, {"areas", {"a"}}}});
  j["script"] = json::array();
  const Exercise ex = load_ok(j.dump(), test::source_path("tests/data"));
  CHECK(ex.def.scenario_path == "trajectory_three_areas.json");
  CHECK(ex.system.def().areas.size() == 3);
  CHECK(ex.def.alarms.standard_band_hz == 0.036);  // a 60 Hz scenario
  j["scenario"] = "../data/trajectory_three_areas.json";
  CHECK(errors_of(j.dump(), test::source_path("tests/data")) ==
        "scenario: must be a path relative to the exercise file's folder, without \"..\", got "
        "\"../data/trajectory_three_areas.json\"\n");
  j["scenario"] = "/etc/passwd";
  CHECK(errors_of(j.dump(), test::source_path("tests/data")).rfind("scenario: must be a path relative", 0) == 0);
  j["scenario"] = "trajectory_three_areas.json";
  CHECK(errors_of(j.dump(), "") == "scenario: must be given inline (an object) here, not as a path\n");
  j["scenario"] = "missing.json";
  CHECK(errors_of(j.dump(), test::source_path("tests/data")).find("scenario: \"") == 0);
}

TEST_CASE("exercise file: bad inputs, each as path: message") {
  struct Row {
    const char* what;
    std::function<void(json&)> change;
    const char* expected;
  };
  const std::vector<Row> rows = {
      {"unknown field", [](json& j) { j["colour"] = 1; }, "colour: unknown field"},
      {"missing briefing", [](json& j) { j.erase("briefing"); }, "briefing: required"},
      {"time limit type", [](json& j) { j["time_limit_s"] = "long"; }, "time_limit_s: must be a number, got a string"},
      {"time limit", [](json& j) { j["time_limit_s"] = 0; }, "time_limit_s: must lie within (0, 1e+07], got 0"},
      {"scenario error", [](json& j) { j["scenario"]["areas"][0]["demand_mw"] = "x"; },
       "scenario.areas[0].demand_mw: must be a number, got a string"},
      {"seat id", [](json& j) { j["seats"][0]["id"] = "a b"; },
       "seats[0].id: must be 1-32 letters, digits, '_' or '-', got \"a b\""},
      {"seat dup", [](json& j) { j["seats"][1]["id"] = "west-desk"; },
       "seats[1].id: duplicate id \"west-desk\" (also seats[0])"},
      {"seat area", [](json& j) { j["seats"][0]["areas"] = {"north"}; },
       "seats[0].areas[0]: no area \"north\" in the scenario"},
      {"area twice", [](json& j) { j["seats"][1]["areas"] = {"west"}; },
       "seats[1].areas[0]: area \"west\" already belongs to seats[0]"},
      {"no areas", [](json& j) { j["seats"][0]["areas"] = json::array(); },
       "seats[0].areas: must name at least one area"},
      {"both times", [](json& j) { j["script"][0]["when"] = j["script"][1]["when"]; },
       "script[0]: needs exactly one of \"at_s\" (a time) and \"when\" (a condition)"},
      {"neither", [](json& j) { j["script"][0].erase("at_s"); },
       "script[0]: needs exactly one of \"at_s\" (a time) and \"when\" (a condition)"},
      {"command unit", [](json& j) { j["script"][0]["command"]["unit"] = "zz"; }, "script[0].command.unit: "},
      {"command field", [](json& j) { j["script"][0]["command"]["mw"] = 5; },
       "script[0].command.mw: unknown field for unit_trip"},
      {"negative time", [](json& j) { j["script"][0]["at_s"] = -1; },
       "script[0].at_s: must lie within [0, 1e+07], got -1"},
      {"condition area", [](json& j) { j["script"][1]["when"]["area"] = "north"; },
       "script[1].when.area: no area \"north\""},
      {"condition hz", [](json& j) { j["script"][1]["when"]["below_hz"] = 51; },
       "script[1].when.below_hz: must lie between 0 and nominal_hz (50), got 51"},
      {"condition kind", [](json& j) { j["script"][1]["when"]["kind"] = "sometime"; },
       "script[1].when.kind: must be one of \"frequency_below\", \"tie_above\", got \"sometime\""},
      {"tie pct",
       [](json& j) {
         j["script"][1]["when"] = {{"kind", "tie_above"}, {"tie", "wx"}, {"above_pct", 150}};
       },
       "script[1].when.above_pct: must lie within (0, 100], got 150"},
      {"tie id",
       [](json& j) {
         j["script"][1]["when"] = {{"kind", "tie_above"}, {"tie", "zz"}, {"above_pct", 50}};
       },
       "script[1].when.tie: no tie \"zz\""},
      {"script dup", [](json& j) { j["script"][0]["id"] = "relief"; }, "script[1].id: duplicate id \"relief\""},
      {"note length", [](json& j) { j["script"][0]["note"] = std::string(1001, 'x'); },
       "script[0].note: must be at most 1000 characters, got 1001"},
      {"alarm field", [](json& j) { j["alarms"]["loudness"] = 3; }, "alarms.loudness: unknown field"},
      {"alarm bands", [](json& j) { j["alarms"]["limit_band_hz"] = 0.01; },
       "alarms.limit_band_hz: must be at least standard_band_hz (0.05), got 0.01"},
      {"alarm pct", [](json& j) { j["alarms"]["tie_loading_pct"] = 0; },
       "alarms.tie_loading_pct: must lie within (0, 100], got 0"},
      {"too many areas",
       [](json& j) {
         j["seats"][0]["areas"] = json::array();
         for (int i = 0; i < 1001; ++i) j["seats"][0]["areas"].push_back("west");
       },
       "seats[0].areas: at most 1000 areas, got 1001"},
      {"seat area type", [](json& j) { j["seats"][0]["areas"] = {1}; },
       "seats[0].areas[0]: must be a string, got a number"},
      {"missing command", [](json& j) { j["script"][0].erase("command"); }, "script[0].command: required"},
      {"too many seats",
       [](json& j) {
         j["seats"] = json::array();
         for (int i = 0; i < 33; ++i) j["seats"].push_back(j["seats"].size());
       },
       "seats: at most 32 seats, got 33"},
  };
  for (const Row& row : rows) {
    INFO(row.what);
    json j = file_json();
    row.change(j);
    const std::string msgs = errors_of(j.dump());
    INFO(msgs);
    CHECK(msgs.find(row.expected) != std::string::npos);
  }
  CHECK(errors_of("[1]") == "must be an object, got an array\n");
  CHECK(errors_of("{\"name\": 1, \"name\": 2}").find("json") == 0);
}

TEST_CASE("script: a timed event is handed out lead steps ahead with its own step") {
  const Exercise ex = load_ok(file_json().dump());
  auto e = Engine::create(ex.system);
  ScriptRunner s(ex.system, ex.def.script);
  const auto fired = run_script(*e, s, 4.0, 3);
  CHECK(fired.empty());
  const auto more = run_script(*e, s, 5.2, 3);
  REQUIRE(!more.empty());
  CHECK(more[0].firing.id == "s1");
  CHECK(more[0].firing.at_step == 500);  // 5 s at 0.01 s
  CHECK(more[0].handed_at == 497);
  CHECK(s.entries()[0].state == ScriptState::fired);
  CHECK(s.entries()[0].fired_at_s == 5.0);
  CHECK(e->unit(*e->find_unit("e2")).status == UnitStatus::tripped);
}

TEST_CASE("script: frequency_below fires once the condition has held for for_s") {
  const Exercise ex = load_ok(file_json().dump());
  auto e = Engine::create(ex.system);
  ScriptRunner s(ex.system, ex.def.script);
  std::int64_t below_at = -1;
  const auto fired = run_script(*e, s, 40.0, 2, [&](const Engine& en) {
    if (below_at < 0 && en.area(*en.find_area("east")).f_hz < 49.9) below_at = en.step_index();
  });
  std::optional<std::int64_t> relief;
  for (const Fired& f : fired)
    if (f.firing.id == "relief") relief = f.handed_at;
  REQUIRE(relief);
  REQUIRE(below_at > 0);
  CHECK(*relief - below_at == 100);  // held for 1 s = 100 steps
  for (const Fired& f : fired)
    if (f.firing.id == "relief") CHECK(f.firing.at_step == *relief + 2);  // lead steps ahead
  CHECK(s.entries()[1].state == ScriptState::fired);
}

TEST_CASE("script: tie_above fires on a share of the tie's pull-out power") {
  json j = file_json();
  j["script"] = json::array({{{"at_s", 1}, {"command", {{"kind", "load_step"}, {"area", "east"}, {"mw", 120}}}},
                             {{"id", "heavy"},
                              {"when", {{"kind", "tie_above"}, {"tie", "wx"}, {"above_pct", 20}}},
                              {"command", {{"kind", "agc"}, {"area", "east"}, {"enabled", true}}}}});
  const Exercise ex = load_ok(j.dump());
  auto e = Engine::create(ex.system);
  ScriptRunner s(ex.system, ex.def.script);
  std::int64_t over_at = -1;
  const auto fired = run_script(*e, s, 30.0, 2, [&](const Engine& en) {
    if (over_at < 0 && std::fabs(en.tie(TieId{0}).flow_mw) > 80.0) over_at = en.step_index();
  });
  REQUIRE(fired.size() == 2);
  CHECK(fired[1].firing.id == "heavy");
  // Handed out at the first step after the flow passed 80 MW (20 % of 400 MW).
  REQUIRE(over_at > 0);
  CHECK(fired[1].handed_at == over_at);
}

TEST_CASE("script: fire now, skip, shift, add, and rewound") {
  const Exercise ex = load_ok(file_json().dump());
  auto e = Engine::create(ex.system);
  ScriptRunner s(ex.system, ex.def.script);
  test::run_until(*e, 1.0);
  std::string why;
  CHECK_FALSE(s.fire_now("nope", *e, why));
  CHECK(why == "no script event \"nope\"");
  auto f = s.fire_now("s2", *e, why);
  REQUIRE(f);
  CHECK(f->at_step == 100);
  CHECK_FALSE(s.skip("s2", why));
  CHECK(why == "script event \"s2\" has already fired");
  CHECK(s.shift("s1", 20.0, e->time_s(), why));
  CHECK(s.entries()[0].def.at_s == 20.0);
  CHECK_FALSE(s.shift("s1", 0.5, e->time_s(), why));
  CHECK(why == "at_s: must not be in the past (now 1 s), got 0.5");
  CHECK_FALSE(s.shift("relief", 30.0, e->time_s(), why));
  CHECK(why.find("only a timed event can be shifted") != std::string::npos);
  CHECK(s.skip("relief", why));
  CHECK(s.entries()[1].state == ScriptState::skipped);

  ScriptEventDef add;
  add.at_s = 10.0;
  add.command.kind = CommandKind::load_step;
  add.command.area = "nowhere";
  CHECK_FALSE(s.add(add, "instructor", e->time_s(), why));
  CHECK(why.rfind("command.area: ", 0) == 0);
  add.command.area = "west";
  add.command.mw = 10.0;
  REQUIRE(s.add(add, "instructor", e->time_s(), why));
  CHECK(s.entries().back().def.id == "s3");  // the first unused sN
  CHECK(s.entries().back().added_by == "instructor");
  add.id = "s3";
  CHECK_FALSE(s.add(add, "instructor", e->time_s(), why));
  CHECK(why == "id: duplicate id \"s3\"");

  // Parsed from JSON as the API receives it.
  std::vector<Issue> issues;
  auto parsed = parse_script_event(
      R"({"at_s": 12, "command": {"kind": "agc", "area": "east", "enabled": true}, "note": "n"})", issues);
  REQUIRE(parsed);
  CHECK(parsed->note == "n");
  CHECK_FALSE(parse_script_event(R"({"at_s": 12, "command": {"kind": "agc"}, "extra": 1})", issues));
  REQUIRE(issues.size() == 3);
  CHECK(issues[0].text() == "extra: unknown field");

  // s1 (now at 20 s) fires; rewinding to a step before it makes it pending again.
  run_script(*e, s, 21.0, 2);
  CHECK(s.entries()[0].state == ScriptState::fired);
  s.rewound(1500);
  CHECK(s.entries()[0].state == ScriptState::pending);
  CHECK(s.entries()[1].state == ScriptState::skipped);  // a skip is an edit, not a firing
  CHECK(s.entries()[2].state == ScriptState::fired);    // fired at step 100
  const json listed = script_to_json(s.entries());
  CHECK(listed["events"][0]["state"] == "pending");
  CHECK(listed["events"][1]["when"]["kind"] == "frequency_below");
  CHECK(listed["events"][3]["added_by"] == "instructor");
  CHECK(listed["events"][2]["fired_at_s"] == 1.0);
}

namespace {

// A one-area system whose frequency is moved by load steps: alarms against known deviations.
struct OneArea {
  std::unique_ptr<Engine> e;
  std::optional<CheckedSystem> sys;
  explicit OneArea(double demand = 400.0, bool battery = false) {
    SystemDef d;
    d.nominal_hz = 50.0;
    d.duration_s = 600.0;
    AreaDef a;
    a.id = "solo";
    a.demand_mw = demand;
    d.areas.push_back(a);
    UnitDef u;
    u.id = "g1";
    u.area = "solo";
    u.rating_mw = 500;
    u.inertia_s = 5;
    u.setpoint_mw = battery ? demand - 10.0 : demand;
    u.governor.droop = 0.05;
    d.units.push_back(u);
    if (battery) {
      UnitDef b;
      b.id = "bat";
      b.area = "solo";
      b.rating_mw = 10;
      b.setpoint_mw = 10;
      b.turbine.type = TurbineType::battery;
      b.turbine.energy_mwh = 0.1;
      b.turbine.soc = 0.2;
      d.units.push_back(b);
    }
    auto c = check(d);
    REQUIRE(c.system);
    sys = *c.system;
    e = Engine::create(*sys);
  }
  void step_load(double mw) {
    LoadStep s{AreaId{0}, mw};
    REQUIRE(e->apply(Action{s}).ok);
  }
};

// 50 Hz defaults with the reserve alarm out of the way (a one-unit area never covers its own loss).
AlarmLimits quiet_reserve() {
  AlarmLimits lim = alarm_limits_for(50.0);
  lim.reserve_mw = 1.0;
  return lim;
}

struct Watcher {
  AlarmMonitor m;
  std::vector<std::pair<AlarmChange::What, std::string>> seen;  // what, kind
  void run(Engine& e, double until_s) {
    while (e.time_s() < until_s - 1e-9) {
      e.step();
      for (const AlarmChange& c : m.update(e, e.take_notices())) seen.push_back({c.what, m.find(c.id)->kind});
    }
  }
  int count(AlarmChange::What w, const std::string& kind) const {
    int n = 0;
    for (auto& [what, k] : seen) n += what == w && k == kind;
    return n;
  }
  const Alarm* active(const std::string& kind) const {
    for (const Alarm& a : m.alarms())
      if (a.kind == kind && !a.cleared_s) return &a;
    return nullptr;
  }
};

}  // namespace

TEST_CASE("alarms: frequency bands raise after the dwell, clear with hysteresis, and ack") {
  OneArea s;
  AlarmLimits lim = quiet_reserve();  // the reserve alarm out of the way
  Watcher w{AlarmMonitor(*s.sys, lim), {}};
  w.run(*s.e, 1.0);
  CHECK(w.seen.empty());
  // 10 MW on 500 MW at 5 % droop, D = 1 (4 MW/Hz... ): the steady deviation is about 0.05 Hz * 10/ (500/2.5+8)
  s.step_load(30.0);  // steady deviation about 30 / (500/(0.05*50) + 400*1/50) = 0.144 Hz: beyond 0.05, inside 0.2
  w.run(*s.e, 30.0);
  CHECK(w.count(AlarmChange::What::raised, "frequency_band") == 1);
  const Alarm* band = w.active("frequency_band");
  REQUIRE(band);
  CHECK(band->severity == AlarmSeverity::warning);
  CHECK(band->area == 0u);
  CHECK(band->message.find("outside the standard band of +/-50 mHz") != std::string::npos);
  CHECK(w.m.acknowledge(band->id, "instructor", s.e->time_s()));
  CHECK_FALSE(w.m.acknowledge(band->id, "instructor", s.e->time_s()));  // once
  CHECK(w.active("frequency_band"));                                    // a level alarm stays until clear
  CHECK(w.m.find(band->id)->acked_by == "instructor");
  // Back to a deviation of about 0.047 Hz: inside the band but not by the 10 % margin: stays raised.
  s.step_load(-20.2);
  w.run(*s.e, 60.0);
  CHECK(w.active("frequency_band"));
  CHECK(w.count(AlarmChange::What::cleared, "frequency_band") == 0);
  s.step_load(-9.8);
  w.run(*s.e, 90.0);
  CHECK_FALSE(w.active("frequency_band"));
  CHECK(w.count(AlarmChange::What::cleared, "frequency_band") == 1);
  CHECK(w.count(AlarmChange::What::raised, "frequency_band") == 1);  // no chatter on the way
  const json j = alarm_to_json(s.sys->def(), w.m.alarms()[0]);
  CHECK(j["area"] == "solo");
  CHECK(j["acked_by"] == "instructor");
  CHECK(j["cleared_s"].is_number());
}

TEST_CASE("alarms: a condition shorter than the raise dwell raises nothing") {
  OneArea s;
  AlarmLimits lim = quiet_reserve();
  lim.rocof_hz_per_s = 0.3;
  Watcher w{AlarmMonitor(*s.sys, lim), {}};
  w.run(*s.e, 1.0);
  s.step_load(100.0);  // RoCoF at once 100*50/(2*5*500) = 1 Hz/s, falling off within a fraction of a second
  w.run(*s.e, 1.2);
  CHECK(w.count(AlarmChange::What::raised, "rocof") == 0);
  w.run(*s.e, 20.0);
  // 100 MW on a 5 s, 500 MW unit: frequency falls beyond 0.2 Hz: limit band alarm (severity alarm).
  const Alarm* lim_alarm = w.active("frequency_limit");
  REQUIRE(lim_alarm);
  CHECK(lim_alarm->severity == AlarmSeverity::alarm);
}

TEST_CASE("alarms: RoCoF held beyond its limit raises an alarm") {
  OneArea s;
  AlarmLimits lim = quiet_reserve();
  lim.rocof_hz_per_s = 0.05;
  Watcher w{AlarmMonitor(*s.sys, lim), {}};
  s.step_load(100.0);
  w.run(*s.e, 10.0);
  CHECK(w.count(AlarmChange::What::raised, "rocof") == 1);
}

TEST_CASE("alarms: trip, start, shedding events clear once acknowledged, unit limit and reserve") {
  const Exercise ex = load_ok(file_json().dump());
  auto e = Engine::create(ex.system);
  Watcher w{AlarmMonitor(ex.system, ex.def.alarms), {}};
  w.run(*e, 1.0);
  // The west holds 150 MW up, less than its largest unit's 200 MW output (the N-1 default).
  REQUIRE(w.active("reserve_low"));
  CHECK(w.active("reserve_low")->subject == "west");
  std::vector<Issue> issues;
  Command trip;
  trip.kind = CommandKind::unit_trip;
  trip.unit = "e2";
  REQUIRE(e->apply(*resolve(ex.system, trip, "command", issues)).ok);
  w.run(*e, 3.0);
  const Alarm* t = w.active("unit_tripped");
  REQUIRE(t);
  CHECK(t->subject == "e2");
  CHECK(t->severity == AlarmSeverity::alarm);
  CHECK(t->message.find("100.0 MW lost") != std::string::npos);
  CHECK(w.m.acknowledge(t->id, "east-desk", e->time_s()));
  CHECK_FALSE(w.active("unit_tripped"));
  // Tie loading: the west helps the east over 10 % (40 MW) of the tie's pull-out power (the file's threshold).
  w.run(*e, 20.0);
  const Alarm* tie = w.active("tie_loading");
  REQUIRE(tie);
  CHECK(tie->areas == std::vector<std::uint32_t>{0, 1});
  CHECK(tie->subject == "wx");
  Command start;
  start.kind = CommandKind::unit_start;
  start.unit = "e2";
  start.mw = 50;
  REQUIRE(e->apply(*resolve(ex.system, start, "command", issues)).ok);
  w.run(*e, 21.0);
  REQUIRE(w.active("unit_started"));
  CHECK(w.active("unit_started")->severity == AlarmSeverity::warning);
}

TEST_CASE("alarms: reserve below the largest unit, unit at its limit, ACE held, battery low, shedding") {
  OneArea s(480.0, true);  // g1 at 470 of 500 MW: 30 MW up, less than its own 470 MW output
  AlarmLimits lim = alarm_limits_for(50.0);
  lim.ace_mw = 5.0;
  lim.ace_for_s = 3.0;
  Watcher w{AlarmMonitor(*s.sys, lim), {}};
  w.run(*s.e, 1.0);
  REQUIRE(w.active("reserve_low"));
  CHECK(w.active("reserve_low")->message.find("its largest unit's output") != std::string::npos);
  s.step_load(60.0);  // beyond g1's headroom: it reaches its upper limit; ACE = B df stays beyond 5 MW
  w.run(*s.e, 3.0);
  CHECK_FALSE(w.active("ace"));  // not yet held for 3 s
  w.run(*s.e, 40.0);
  CHECK(w.active("unit_limit"));
  CHECK(w.active("unit_limit")->message.find("upper limit") != std::string::npos);
  CHECK(w.active("ace"));
  // The battery (0.1 MWh, 20 % charged, discharging 10+ MW) runs low within seconds.
  CHECK(w.count(AlarmChange::What::raised, "battery_low") == 1);
}

TEST_CASE("alarms: a shedding stage raises an alarm that clears on acknowledgement") {
  SystemDef d = OneArea().sys->def();
  d.areas[0].shedding.push_back({49.7, 0.1, 10.0});
  auto c = check(d);
  REQUIRE(c.system);
  auto e = Engine::create(*c.system);
  AlarmLimits lim = quiet_reserve();
  Watcher w{AlarmMonitor(*c.system, lim), {}};
  REQUIRE(e->apply(Action{LoadStep{AreaId{0}, 150.0}}).ok);
  w.run(*e, 10.0);
  const Alarm* shed = w.active("shedding");
  REQUIRE(shed);
  CHECK(shed->message.find("shedding stage 1 shed 40.0 MW") != std::string::npos);
  CHECK(w.m.acknowledge(shed->id, "instructor", 10.0));
  CHECK(w.m.find(shed->id)->cleared_s == 10.0);
}

TEST_CASE("alarms: a copied monitor carries on as the original (save points)") {
  OneArea s;
  AlarmLimits lim = quiet_reserve();
  Watcher w{AlarmMonitor(*s.sys, lim), {}};
  s.step_load(30.0);
  w.run(*s.e, 0.3);  // the band condition holds, not yet for the dwell
  AlarmMonitor copy = w.m;
  auto e2 = s.e->clone();
  w.run(*s.e, 5.0);
  Watcher w2{copy, {}};
  w2.run(*e2, 5.0);
  REQUIRE(w.m.alarms().size() == w2.m.alarms().size());
  CHECK(w.m.alarms()[0].raised_s == w2.m.alarms()[0].raised_s);
}
