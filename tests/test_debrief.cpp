// The debrief from hand-written journals: the final lineage (a rewound-away action is absent, an
// acknowledgement follows its lineage), scores equal to a monitor fed directly the live way,
// escaping of what the journal holds, nothing fetched from outside, bad lines named.
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <regex>
#include <sstream>

#include "droopline/alarms.hpp"
#include "droopline/debrief.hpp"
#include "droopline/exercise.hpp"
#include "droopline/format.hpp"
#include "droopline/journal_read.hpp"
#include "droopline/objectives.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;
using json = nlohmann::ordered_json;
namespace fs = std::filesystem;

namespace {

const std::string kRun = "0123456789abcdef0123456789abcdef";

// The test exercise with objectives for every seat and one for the east desk only.
json exercise_json() {
  std::ifstream in(test::source_path("tests/data/exercise_two_areas.json"));
  std::stringstream ss;
  ss << in.rdbuf();
  json x = json::parse(ss.str());
  x["objectives"] = json::array({
      json{{"measure", "largest_deviation_hz"}, {"target", 0.3}, {"zero_at", 0.9}},
      json{{"measure", "time_outside_standard_s"}, {"target", 5.0}, {"zero_at", 60.0}, {"weight", 2}},
      json{{"seat", "east-desk"}, {"measure", "alarm_to_ack_s"}, {"target", 1.0}, {"zero_at", 5.0}},
      json{{"seat", "east-desk"}, {"measure", "alarm_to_action_s"}, {"target", 3.0}, {"zero_at", 30.0}},
  });
  return x;
}

Exercise exercise_of(const json& x) {
  ExerciseLoad r = parse_exercise(x.dump(), "");
  std::string msgs;
  for (const auto& i : r.issues) msgs += i.text() + "\n";
  INFO(msgs);
  REQUIRE(r.exercise);
  return std::move(*r.exercise);
}

// A journal file written line by line; removed at the end of the test.
struct JournalFile {
  fs::path path;
  explicit JournalFile(const std::vector<std::string>& lines, const std::string& tail = "") {
    static int n = 0;
    path = fs::temp_directory_path() /
           ("droopline_debrief_" + std::to_string(::getpid()) + "_" + std::to_string(++n) + ".jsonl");
    std::ofstream out(path, std::ios::binary);
    for (const std::string& l : lines) out << l << "\n";
    out << tail;
  }
  ~JournalFile() {
    std::error_code ec;
    fs::remove(path, ec);
  }
};

// What the test journal holds, in steps of the scenario (its step_s from the loaded exercise).
struct Plan {
  double step_s = 0.01;
  std::int64_t at(double t_s) const { return std::llround(t_s / step_s); }
};

json batch(std::int64_t step, const json& command, const std::string& by) {
  return json{{"type", "commands"}, {"step", step}, {"commands", json::array({command})}, {"by", by}};
}

// The trip's alarm: the monitor raises both areas' low-reserve warnings first (at 0.5 s), so it is
// the third (run_directly checks it is about e2).
constexpr std::uint64_t kTripAlarm = 3;

const json kTrip{{"kind", "unit_trip"}, {"unit", "e2"}};
const json kEastRaise{{"kind", "setpoint"}, {"unit", "e1"}, {"mw", 350}};
const json kWestDrop{{"kind", "load_step"}, {"area", "west"}, {"mw", -20}};  // rewound away
const json kEastMore{{"kind", "setpoint"}, {"unit", "e1"}, {"mw", 380}};

// A run: the script trips e2 at 5 s; the east desk acknowledges alarm 1 at 7 s and raises e1 at
// 10 s; the west desk drops load at 20 s; at 25 s the instructor rewinds to 15 s (the west action
// is undone); the east desk raises e1 again at 18 s; the exercise ends at 30 s.
std::vector<std::string> journal_lines(const Plan& p, const json& x, const std::string& trainee,
                                       const std::string& note) {
  return {
      json{{"type", "scenario"}, {"step", 0}, {"run", kRun}, {"scenario", x["scenario"]}}.dump(),
      json{{"type", "exercise"}, {"step", 0}, {"run", kRun}, {"exercise", x}}.dump(),
      json{{"type", "trainee"}, {"step", 0}, {"seat", "east-desk"}, {"name", trainee}}.dump(),
      batch(p.at(5), kTrip, "script").dump(),
      json{{"type", "ack"}, {"step", p.at(7)}, {"alarm", kTripAlarm}, {"by", "east-desk"}}.dump(),
      batch(p.at(10), kEastRaise, "east-desk").dump(),
      batch(p.at(20), kWestDrop, "west-desk").dump(),
      json{{"type", "rewind"}, {"step", p.at(25)}, {"taken", 3}, {"to_step", p.at(15)}, {"by", "instructor"}}.dump(),
      json{{"type", "note"}, {"step", p.at(16)}, {"by", "instructor"}, {"text", note}}.dump(),
      batch(p.at(18), kEastMore, "east-desk").dump(),
      json{{"type", "end"}, {"step", p.at(30)}, {"complete", false}, {"why", "ended by the instructor"}}.dump(),
  };
}

// The live way, fed by the test over the final lineage only: commands applied at their steps, the
// acknowledgement between steps, the alarm monitor after each step, then the objective monitor.
struct Direct {
  std::vector<SeatScore> scores;
  std::vector<double> f_end_hz;
};
Direct run_directly(const Exercise& ex, const Plan& p) {
  std::unique_ptr<Engine> e = Engine::create(ex.system);
  AlarmMonitor alarms(ex.system, ex.def.alarms);
  ObjectiveMonitor objectives(ex);
  const std::vector<std::tuple<std::int64_t, json, std::string>> batches = {
      {p.at(5), kTrip, "script"}, {p.at(10), kEastRaise, "east-desk"}, {p.at(18), kEastMore, "east-desk"}};
  std::size_t next = 0;
  std::vector<Notice> pending;
  while (e->step_index() <= p.at(30)) {
    if (e->step_index() == p.at(7)) {
      REQUIRE(alarms.find(kTripAlarm));
      REQUIRE(alarms.find(kTripAlarm)->subject == "e2");
      REQUIRE(alarms.acknowledge(kTripAlarm, "east-desk", e->time_s()));
    }
    if (next < batches.size() && std::get<0>(batches[next]) == e->step_index()) {
      CommandParse cp = parse_commands(json::array({std::get<1>(batches[next])}).dump());
      Resolved r = resolve_all(e->system(), cp.commands);
      REQUIRE(r.issues.empty());
      const ApplyResult a = e->apply_all(r.actions);
      REQUIRE(a.ok);
      objectives.actions_applied(std::get<2>(batches[next]), a.at_s);
      ++next;
    }
    if (e->step_index() == p.at(30)) break;
    e->step();
    for (Notice& n : e->take_notices()) pending.push_back(std::move(n));
    alarms.update(*e, pending);
    pending.clear();
    objectives.update(*e, &alarms);
  }
  Direct d{objectives.scores(&alarms), {}};
  d.f_end_hz = {e->area(AreaId{0}).f_hz, e->area(AreaId{1}).f_hz};
  return d;
}

json debrief_of(const fs::path& path, const DebriefExtras& extras = {}) {
  std::string error;
  std::optional<json> j = debrief_json(path.string(), "", extras, error);
  INFO(error);
  REQUIRE(j);
  return *j;
}

}  // namespace

TEST_CASE("debrief: the final lineage's actions with their authors, the ack, trainee and note", "[debrief]") {
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  JournalFile f(journal_lines(p, x, "Ilse Varrow", "west desk hesitated"));
  const json d = debrief_of(f.path);

  CHECK(d["run"] == kRun);
  CHECK(d["status"]["complete"] == false);
  CHECK(d["status"]["why"] == "ended by the instructor");
  CHECK(d["status"]["end_s"].get<double>() == Approx(30.0));
  // Actions and script firings on the final lineage: the west desk's load drop was rewound away.
  std::vector<std::tuple<std::string, std::string, double>> acted;
  bool rewind = false, acked = false;
  for (const json& e : d["timeline"]) {
    if (e["kind"] == "action" || e["kind"] == "script") acted.emplace_back(e["kind"], e["by"], e["t_s"].get<double>());
    if (e["kind"] == "rewind") rewind = e["by"] == "instructor" && e["t_s"].get<double>() == Approx(25.0);
    if (e["kind"] == "alarm acknowledged")
      acked = e["by"] == "east-desk" && e["marker"] == "A" + std::to_string(kTripAlarm) &&
              e["t_s"].get<double>() == Approx(7.0);
  }
  REQUIRE(acted.size() == 3);
  CHECK(std::get<0>(acted[0]) == "script");
  CHECK(std::get<1>(acted[0]) == "script");
  CHECK(std::get<2>(acted[0]) == Approx(5.0));
  CHECK(std::get<1>(acted[1]) == "east-desk");
  CHECK(std::get<2>(acted[1]) == Approx(10.0));
  CHECK(std::get<1>(acted[2]) == "east-desk");
  CHECK(std::get<2>(acted[2]) == Approx(18.0));
  CHECK(rewind);
  CHECK(acked);
  // The trip's alarm, raised at 5 s: acknowledged 2 s later, the east desk's first action 5 s later.
  bool raised = false;
  for (const json& e : d["timeline"])
    if (e["kind"] == "alarm raised" && e["marker"] == "A" + std::to_string(kTripAlarm)) {
      CHECK(e["t_s"].get<double>() == Approx(5.0));
      raised = true;
      CHECK(e["to_ack_s"].get<double>() == Approx(7.0 - e["t_s"].get<double>()));
      CHECK(e["to_action_s"].get<double>() == Approx(10.0 - e["t_s"].get<double>()));
      CHECK(e["action_by"] == "east-desk");
    }
  CHECK(raised);
  CHECK(d["seats"][1]["id"] == "east-desk");
  CHECK(d["seats"][1]["trainee"] == "Ilse Varrow");
  CHECK(d["seats"][0]["trainee"] == "");
  REQUIRE(d["notes"].size() == 1);
  CHECK(d["notes"][0]["text"] == "west desk hesitated");
  CHECK(d["notes"][0]["t_s"].get<double>() == Approx(16.0));
  // The trip is a disturbance with its droop prediction.
  REQUIRE(d["disturbances"].size() >= 1);
  CHECK(d["disturbances"][0]["at_s"].get<double>() == Approx(5.0));

  SECTION("the scores equal an objective monitor fed directly over the final lineage") {
    const Direct direct = run_directly(ex, p);
    REQUIRE(d["scores"].size() == direct.scores.size());
    // Partial scores (not all full or none), so equal scores say something.
    CHECK(direct.scores.at(1).score > 0.0);
    CHECK(direct.scores.at(1).score < 100.0);
    for (std::size_t s = 0; s < direct.scores.size(); ++s) {
      CHECK(d["scores"][s]["seat"] == direct.scores[s].seat);
      CHECK(d["scores"][s]["score"].get<double>() == direct.scores[s].score);
      REQUIRE(d["scores"][s]["objectives"].size() == direct.scores[s].objectives.size());
      for (std::size_t o = 0; o < direct.scores[s].objectives.size(); ++o)
        CHECK(d["scores"][s]["objectives"][o]["score"].get<double>() == direct.scores[s].objectives[o].score);
    }
    // The charts follow the same lineage: the last sample is the state the direct run ended in.
    const json& series = d["series"];
    CHECK(series["t_s"].back().get<double>() == Approx(30.0));
    CHECK(series["west.f_hz"].back().get<double>() == direct.f_end_hz[0]);
    CHECK(series["east.f_hz"].back().get<double>() == direct.f_end_hz[1]);
  }

  SECTION("the records' trainee names and notes come over the journal's") {
    DebriefExtras extras;
    extras.trainees = {{"east-desk", "Oda Pemberley"}, {"west-desk", "Rafe Munro"}};
    extras.notes = {{std::nullopt, "instructor", "talked through the trip afterwards"}};
    const json e = debrief_of(f.path, extras);
    CHECK(e["seats"][0]["trainee"] == "Rafe Munro");
    CHECK(e["seats"][1]["trainee"] == "Oda Pemberley");
    REQUIRE(e["notes"].size() == 2);
    CHECK(e["notes"][1]["text"] == "talked through the trip afterwards");
    CHECK(e["notes"][1]["t_s"].is_null());
  }
}

TEST_CASE("debrief: a restore goes back to the save point's lineage", "[debrief]") {
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  // Save point 1 at 6 s (after the trip at 5 s); the east desk acts at 10 s and acknowledges at 11 s;
  // at 12 s the instructor restores save point 1: both are undone. The east desk acts again at 8 s.
  JournalFile f({
      json{{"type", "scenario"}, {"step", 0}, {"run", kRun}, {"scenario", x["scenario"]}}.dump(),
      json{{"type", "exercise"}, {"step", 0}, {"run", kRun}, {"exercise", x}}.dump(),
      batch(p.at(5), kTrip, "script").dump(),
      json{{"type", "savepoint"},
           {"step", p.at(6)},
           {"taken", 1},
           {"id", 1},
           {"name", "after the trip"},
           {"by", "instructor"}}
          .dump(),
      batch(p.at(10), kEastRaise, "east-desk").dump(),
      json{{"type", "ack"}, {"step", p.at(11)}, {"alarm", kTripAlarm}, {"by", "east-desk"}}.dump(),
      json{{"type", "restore"},
           {"step", p.at(12)},
           {"taken", 2},
           {"savepoint", 1},
           {"to_step", p.at(6)},
           {"by", "instructor"}}
          .dump(),
      batch(p.at(8), kEastMore, "east-desk").dump(),
  });
  JournalRead jr = read_journal(f.path.string());
  REQUIRE(jr.issues.empty());
  std::string error;
  const std::optional<FinalLineage> lineage = final_lineage(jr.runs.at(0), error);
  REQUIRE(lineage);
  CHECK(lineage->batches == std::vector<std::size_t>{0, 2});
  CHECK(lineage->acks.empty());
  // An acknowledgement journalled before the save point for a step after it (it waits for its step
  // like a batch) is not in the save point; one still waiting at the restore is refused by it.
  JournalFile waiting({
      json{{"type", "scenario"}, {"step", 0}, {"run", kRun}, {"scenario", x["scenario"]}}.dump(),
      batch(p.at(5), kTrip, "script").dump(),
      json{{"type", "ack"}, {"step", p.at(6) + 2}, {"alarm", kTripAlarm}, {"by", "east-desk"}}.dump(),
      json{{"type", "savepoint"}, {"step", p.at(6)}, {"taken", 1}, {"id", 1}, {"name", "s"}, {"by", "instructor"}}
          .dump(),
      json{{"type", "ack"}, {"step", p.at(12) + 2}, {"alarm", 4}, {"by", "east-desk"}}.dump(),
      json{{"type", "restore"},
           {"step", p.at(12)},
           {"taken", 1},
           {"savepoint", 1},
           {"to_step", p.at(6)},
           {"by", "instructor"}}
          .dump(),
      json{{"type", "ack"}, {"step", p.at(7)}, {"alarm", 5}, {"by", "west-desk"}}.dump(),
  });
  JournalRead jw = read_journal(waiting.path.string());
  REQUIRE(jw.issues.empty());
  const std::optional<FinalLineage> lw = final_lineage(jw.runs.at(0), error);
  REQUIRE(lw);
  CHECK(lw->batches == std::vector<std::size_t>{0});
  CHECK(lw->acks == std::vector<std::size_t>{2});

  const json d = debrief_of(f.path);
  std::vector<double> times;
  for (const json& e : d["timeline"]) {
    if (e["kind"] == "action") times.push_back(e["t_s"].get<double>());
    CHECK(e["kind"] != "alarm acknowledged");
  }
  REQUIRE(times.size() == 1);
  CHECK(times[0] == Approx(8.0));
  CHECK(d["status"]["complete"] == false);  // no end record
}

TEST_CASE("debrief: journal text is escaped and nothing is fetched from outside", "[debrief]") {
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  JournalFile f(journal_lines(p, x, "<script>alert('x')</script>", "<img src=x onerror=alert(1)> & \"quotes\""));
  std::string error;
  const std::optional<std::string> html = debrief_html(f.path.string(), "", {}, error);
  INFO(error);
  REQUIRE(html);
  CHECK(html->find("<script") == std::string::npos);
  CHECK(html->find("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt;") != std::string::npos);
  CHECK(html->find("<img") == std::string::npos);
  CHECK(html->find("&lt;img src=x onerror=alert(1)&gt; &amp; &quot;quotes&quot;") != std::string::npos);
  // No outside resource: no address, and no tag that loads or links anything.
  CHECK(html->find("http://") == std::string::npos);
  CHECK(html->find("https://") == std::string::npos);
  CHECK(html->find("url(") == std::string::npos);
  CHECK(html->find("@import") == std::string::npos);
  CHECK_FALSE(std::regex_search(*html, std::regex(R"(<[a-zA-Z][^>]*\s(src|href)\s*=)")));
  // The parts of the page are there: charts with lines, the objective and timeline tables.
  CHECK(html->find("<svg") != std::string::npos);
  CHECK(html->find("<polyline") != std::string::npos);
  CHECK(html->find("class=\"objectives\"") != std::string::npos);
  CHECK(html->find("class=\"timeline\"") != std::string::npos);
  CHECK(html->find("@media print") != std::string::npos);
  CHECK(html->find("not a compliance assessment") != std::string::npos);
}

TEST_CASE("debrief: bad journals are named by line, and a torn last line ends the journal", "[debrief]") {
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  std::vector<std::string> lines = journal_lines(p, x, "Ilse Varrow", "note");
  std::string error;

  SECTION("a bad record") {
    lines[4] = json{{"type", "ack"}, {"step", p.at(7)}, {"alarm", "one"}, {"by", "east-desk"}}.dump();
    JournalFile f(lines);
    CHECK_FALSE(debrief_html(f.path.string(), "", {}, error));
    CHECK(error == "journal line 5: alarm: must be a whole number from 0 to 2^53");
  }
  SECTION("a line cut short in the middle") {
    lines[5] = lines[5].substr(0, 20);
    JournalFile f(lines);
    CHECK_FALSE(debrief_json(f.path.string(), "", {}, error));
    CHECK(error.rfind("journal line 6: not a journal record", 0) == 0);
  }
  SECTION("a bad exercise record names the exercise's field") {
    json bad = x;
    bad["seats"][0]["areas"] = json::array({"nowhere"});
    lines[1] = json{{"type", "exercise"}, {"step", 0}, {"run", kRun}, {"exercise", bad}}.dump();
    JournalFile f(lines);
    CHECK_FALSE(debrief_json(f.path.string(), "", {}, error));
    CHECK(error.rfind("journal line 2: exercise.seats[0].areas[0]", 0) == 0);
  }
  SECTION("a torn last line (a crash mid-write) is left out") {
    JournalFile f(lines, R"({"type":"commands","step":12,"comm)");
    CHECK(debrief_json(f.path.string(), "", {}, error));
  }
  SECTION("no such run") {
    JournalFile f(lines);
    CHECK_FALSE(debrief_json(f.path.string(), "feedfacefeedfacefeedfacefeedface", {}, error));
    CHECK(error == "no run feedfacefeedfacefeedfacefeedface in " + f.path.string());
    CHECK(debrief_json(f.path.string(), kRun, {}, error));
  }
  SECTION("an older journal without run ids or training records still reads") {
    JournalFile f({json{{"type", "scenario"}, {"step", 0}, {"scenario", x["scenario"]}}.dump(),
                   batch(p.at(2), kTrip, "instructor").dump(), json{{"type", "stop"}, {"step", p.at(4)}}.dump()});
    const json d = debrief_of(f.path);
    CHECK(d["run"] == "");
    CHECK(d["scores"].empty());
    CHECK(d["status"]["end_s"].get<double>() == Approx(4.0));
  }
}

TEST_CASE("debrief: each disturbance's settling deviation, measured and predicted, is from its own pre-event frequency",
          "[debrief]") {
  // Two load steps 60 s apart: the second starts from the first's settled frequency, well off
  // nominal, so a prediction measured from nominal instead would show the first step's deviation too.
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  const json more{{"kind", "load_step"}, {"area", "west"}, {"mw", 30}};
  JournalFile f({
      json{{"type", "scenario"}, {"step", 0}, {"run", kRun}, {"scenario", x["scenario"]}}.dump(),
      batch(p.at(2), more, "instructor").dump(),
      batch(p.at(62), more, "instructor").dump(),
      json{{"type", "end"}, {"step", p.at(122)}, {"complete", false}, {"why", "ended by the instructor"}}.dump(),
  });
  const json d = debrief_of(f.path);
  REQUIRE(d["disturbances"].size() == 2);
  const json& second = d["disturbances"][1];
  const double pre = second.at("pre_hz").get<double>(), predicted = second.at("predicted_settling_hz").get<double>();
  REQUIRE(std::fabs(pre - ex.system.def().nominal_hz) > 0.005);
  std::string error;
  const std::optional<std::string> html = debrief_html(f.path.string(), "", {}, error);
  REQUIRE(html);
  // The second table's settling-deviation row: measured and predicted, both from pre_hz.
  std::size_t at = html->find("<h3>2. ");
  REQUIRE(at != std::string::npos);
  at = html->find("<td>settling deviation</td>", at);
  REQUIRE(at != std::string::npos);
  const std::string row = html->substr(at, html->find("</tr>", at) - at);
  CHECK(row.find(fmt_fixed(second["settling_hz"].get<double>() - pre, 3) + " Hz") != std::string::npos);
  CHECK(row.find(fmt_fixed(predicted - pre, 3) + " Hz") != std::string::npos);
  // Secondary control off throughout: no caveat on either.
  CHECK_FALSE(d["disturbances"][0]["secondary_in_window"].get<bool>());
  CHECK(html->find("Secondary control was on in this island") == std::string::npos);
}

TEST_CASE("debrief: a disturbance whose settling window secondary control acted in says so", "[debrief]") {
  // Secondary control switched on in the west at 10 s, after a load step at 2 s (window 22..54 s)
  // and before one at 62 s (window 82..114 s): both windows see it; a run with it switched off
  // again at 15 s sees it in neither.
  const json x = exercise_json();
  const Exercise ex = exercise_of(x);
  const Plan p{ex.system.def().step_s};
  const json step{{"kind", "load_step"}, {"area", "west"}, {"mw", 30}};
  auto lines = [&](bool off_again) {
    std::vector<std::string> l{
        json{{"type", "scenario"}, {"step", 0}, {"run", kRun}, {"scenario", x["scenario"]}}.dump(),
        batch(p.at(2), step, "instructor").dump(),
        batch(p.at(10), json{{"kind", "agc"}, {"area", "west"}, {"enabled", true}}, "instructor").dump()};
    if (off_again) l.push_back(batch(p.at(15), json{{"kind", "agc"}, {"area", "west"}, {"enabled", false}}, "instructor").dump());
    l.push_back(batch(p.at(62), step, "instructor").dump());
    l.push_back(json{{"type", "end"}, {"step", p.at(122)}, {"complete", false}, {"why", "ended"}}.dump());
    return l;
  };
  JournalFile on(lines(false)), off(lines(true));
  const json d_on = debrief_of(on.path), d_off = debrief_of(off.path);
  REQUIRE(d_on["disturbances"].size() == 2);
  REQUIRE(d_off["disturbances"].size() == 2);
  CHECK(d_on["disturbances"][0]["secondary_in_window"].get<bool>());
  CHECK(d_on["disturbances"][1]["secondary_in_window"].get<bool>());
  CHECK_FALSE(d_off["disturbances"][0]["secondary_in_window"].get<bool>());
  CHECK_FALSE(d_off["disturbances"][1]["secondary_in_window"].get<bool>());
  std::string error;
  const std::optional<std::string> html = debrief_html(on.path.string(), "", {}, error);
  REQUIRE(html);
  CHECK(html->find("Secondary control was on in this island during the settling window") != std::string::npos);
}
