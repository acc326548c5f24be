// The command line's jobs: `run` refuses every bad input with exit 2 and writes nothing, two runs
// give identical files (and the same text as a run in memory), and `sweep` shards merged by
// `merge` equal the whole sweep.
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "bad_scenarios.hpp"
#include "cli_debrief.hpp"
#include "cli_run.hpp"
#include "cli_sweep.hpp"
#include "droopline/batch.hpp"
#include "droopline/format.hpp"
#include "support.hpp"

using namespace droopline;
using json = nlohmann::ordered_json;
namespace fs = std::filesystem;

namespace {

fs::path temp_dir(const std::string& name) {
  return test::scratch_path("cli-" + name);
}

fs::path fresh_dir(const std::string& name) { return temp_dir("sweep-" + name); }

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

}  // namespace

TEST_CASE("run refuses every bad input of the loader's table with exit 2 and writes nothing") {
  const fs::path dir = temp_dir("bad");
  fs::create_directories(dir);
  int index = 0;
  for (const bad_input::BadCase& c : bad_input::kBad) {
    INFO("case " << index << " (" << c.pointer << ")");
    const fs::path file = dir / ("case" + std::to_string(index) + ".json");
    std::ofstream(file) << bad_input::mutate(c);
    const fs::path out = dir / ("out" + std::to_string(index));
    CHECK(cli::run(file.string(), out.string(), true) == 2);
    CHECK_FALSE(fs::exists(out));
    ++index;
  }
  fs::remove_all(dir);
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
  auto mem = study::run_to_strings(*loaded.system, {});
  CHECK(mem.series == sa);
  fs::remove_all(a);
  fs::remove_all(b);
}

TEST_CASE("three shards merged equal the whole sweep, and merge refuses what does not fit") {
  cli::SweepArgs a;
  a.scenario_file = test::source_path("scenarios/textbook_isolated_station.json");
  a.vary = {"units[unit1].governor.droop=0.04,0.05,0.06", "events[0].mw=20:50:10"};
  a.quiet = true;
  a.sample = 9;
  a.seed = 3;
  const fs::path whole = fresh_dir("whole");
  a.out_dir = whole.string();
  REQUIRE(cli::sweep(a) == 0);
  std::vector<std::string> shards;
  for (std::uint32_t i = 1; i <= 3; ++i) {
    a.shard = i;
    a.shards = 3;
    a.threads = i;  // thread counts differ between shards: results must not
    a.out_dir = fresh_dir("shard" + std::to_string(i)).string();
    REQUIRE(cli::sweep(a) == 0);
    shards.push_back(a.out_dir);
  }
  const std::string merged = fresh_dir("merged").string();
  REQUIRE(cli::merge(shards, merged, "nadir_hz", true) == 0);
  CHECK(slurp(fs::path(merged) / "sweep.csv") == slurp((whole / "sweep.csv")));
  CHECK(slurp(fs::path(merged) / "sweep.svg") == slurp((whole / "sweep.svg")));
  const auto whole_doc = json::parse(slurp((whole / "sweep.json")));
  const auto merged_doc = json::parse(slurp(fs::path(merged) / "sweep.json"));
  CHECK(whole_doc["rows"] == merged_doc["rows"]);
  CHECK(whole_doc["rows"].size() == 9);

  const std::string out = fresh_dir("refused").string();
  CHECK(cli::merge({shards[0], shards[1]}, out, "nadir_hz", true) == 2);             // shard 3 missing
  CHECK(cli::merge({shards[0], shards[0], shards[1]}, out, "nadir_hz", true) == 2);  // shard 1 twice
  a.seed = 4;                                                                        // another sample: another sweep
  a.shard = 3;
  a.out_dir = fresh_dir("other").string();
  REQUIRE(cli::sweep(a) == 0);
  CHECK(cli::merge({shards[0], shards[1], a.out_dir}, out, "nadir_hz", true) == 2);
  CHECK_FALSE(fs::exists(fs::path(out) / "sweep.csv"));  // nothing half-written
}

TEST_CASE("run: the operator actions end to end, in the series and the summary") {
  const fs::path out = temp_dir("actions");
  REQUIRE(cli::run(test::source_path("tests/data/operator_actions.json"), out.string(), true) == 0);
  const json summary = json::parse(slurp(out / "summary.json"));
  std::vector<std::string> notices;
  for (const json& n : summary["notices"])
    notices.push_back(fmt_num(n["t_s"].get<double>()) + " " + n["kind"].get<std::string>() + ": " +
                      n["text"].get<std::string>());
  auto has = [&](const std::string& line) { return std::find(notices.begin(), notices.end(), line) != notices.end(); };
  INFO(summary["notices"].dump(1));
  CHECK(has("5 command: unit HG3 starting: synchronises in 30 s, then loads to 150 MW"));
  CHECK(has("35 unit_synchronised: unit HG3 synchronised, loading to 150 MW"));
  CHECK(has("40 command: unit HH2 stopping: unloading at 10 MW/s, then offline"));
  CHECK(has("80 command: scheduled export of area marsh from 150.0 to 250 MW over 60 s"));
  CHECK(has("161 command: load shed by hand: 60 MW in area hollin"));
  CHECK(has("165 command: secondary control on in area hollin, constant interchange control"));
  CHECK(has("240 command: shed load restored: 60.0 MW in area hollin"));
  bool stopped = false;
  for (const std::string& n : notices)
    stopped = stopped || n.find("unit_stopped: unit HH2 offline after a stop") != std::string::npos;
  CHECK(stopped);
  // The start opened a disturbance when the unit synchronised; the stop opened none.
  REQUIRE(summary["disturbances"].size() == 2);
  CHECK(summary["disturbances"][0]["kind"] == "unit_start");
  CHECK(summary["disturbances"][0]["at_s"] == 35.0);
  const json& fin = summary["final"];
  CHECK(fin["units"]["HH2"]["status"] == "offline");
  CHECK(fin["units"]["HG3"]["status"] == "online");
  CHECK(fin["areas"]["hollin"]["shed_mw"] == 0.0);
  // The new schedule is met again after the step, the shedding and the restoration.
  CHECK(fin["ties"]["hm"]["flow_mw"].get<double>() == Approx(-250.0).margin(3.0));
  CHECK(fin["areas"]["hollin"]["f_hz"].get<double>() == Approx(50.0).margin(2e-3));
  // Series: HG3 gives nothing while starting, then loads; HH2 is at zero once off.
  std::istringstream series(slurp(out / "series.csv"));
  std::string line;
  std::getline(series, line);
  CHECK(line == "t_s,hollin.f_hz,marsh.f_hz,HR1.p_mw,HH2.p_mw,HG3.p_mw,MS1.p_mw,MH2.p_mw,hm.flow_mw");
  double hg3_before = -1.0, hg3_after = -1.0, hh2_end = -1.0;
  while (std::getline(series, line)) {
    std::vector<double> v;
    std::istringstream cells(line);
    for (std::string cell; std::getline(cells, cell, ',');) v.push_back(std::stod(cell));
    if (v[0] == 34.9) hg3_before = v[5];
    if (v[0] == 70.0) hg3_after = v[5];
    hh2_end = v[4];
  }
  CHECK(hg3_before == 0.0);
  CHECK(hg3_after == Approx(150.0).margin(5.0));
  CHECK(hh2_end == 0.0);
  fs::remove_all(out);
}

TEST_CASE("replay of a restore: every branch as streamed, and the final lineage equals a run that never left it") {
  const fs::path dir = temp_dir("replay-restore");
  fs::create_directories(dir);
  const json scenario = json::parse(scenario_to_json(test::load("scenarios/demo_three_areas.json")).dump());
  auto journal = [&](const std::string& name, const std::vector<std::string>& records) {
    std::ofstream out(dir / name);
    out << json{{"type", "scenario"}, {"step", 0}, {"scenario", scenario}}.dump() << '\n';
    for (const std::string& r : records) out << r << '\n';
    return (dir / name).string();
  };
  // Saved at 1 s, a load step at 1.5 s by a seat, back to the save point at 3 s, stopped at 4 s.
  const std::string branched = journal(
      "branched.jsonl",
      {R"({"type":"savepoint","step":100,"taken":0,"id":1,"name":"a","by":"instructor"})",
       R"({"type":"commands","step":150,"commands":[{"kind":"load_step","area":"oskany","mw":30}],"by":"seat-x"})",
       R"({"type":"restore","step":300,"taken":1,"savepoint":1,"to_step":100,"by":"instructor"})",
       R"({"type":"stop","step":400})"});
  const std::string straight = journal("straight.jsonl", {R"({"type":"stop","step":400})"});
  REQUIRE(cli::replay(branched, (dir / "streamed").string(), 0, true) == 0);
  REQUIRE(cli::replay(branched, (dir / "final").string(), 0, true, true) == 0);
  REQUIRE(cli::replay(straight, (dir / "straight").string(), 0, true) == 0);
  // The final lineage never saw the load step: the same bytes as the run without it.
  CHECK(slurp(dir / "final" / "series.csv") == slurp(dir / "straight" / "series.csv"));
  CHECK(slurp(dir / "final" / "summary.json") == slurp(dir / "straight" / "summary.json"));
  // As streamed: rows 0 .. 3 s of the first branch, then 1.1 .. 4 s of the second.
  std::istringstream streamed(slurp(dir / "streamed" / "series.csv"));
  std::vector<double> times;
  std::string line;
  std::getline(streamed, line);  // header
  while (std::getline(streamed, line)) times.push_back(std::stod(line.substr(0, line.find(','))));
  REQUIRE(times.size() == 31 + 30);
  CHECK(times[30] == 3.0);
  CHECK(times[31] == 1.1);
  CHECK(times.back() == 4.0);
  const json applied = json::parse(slurp(dir / "streamed" / "commands.jsonl"));
  CHECK(applied["by"] == "seat-x");
  CHECK(applied["step"] == 150);
  // A mark that can never come (three batches taken before it, none journalled) stops the replay.
  const std::string unreachable =
      journal("unreachable.jsonl", {R"({"type":"savepoint","step":100,"taken":3,"id":1,"name":"a"})"});
  CHECK(cli::replay(unreachable, (dir / "unreachable").string(), 0, true) == 2);
  fs::remove_all(dir);
}

TEST_CASE("debrief of a journal of several runs says which run it wrote and lists the others") {
  // A journal kept across two starts of the service: the same exercise run twice, the second cut short.
  const json x = json::parse(slurp(test::source_path("tests/data/exercise_two_areas.json")));
  const std::string first(32, 'a'), second(32, 'b');
  const fs::path dir = temp_dir("debrief-runs");
  fs::create_directories(dir);
  {
    std::ofstream j(dir / "session.jsonl");
    for (const std::string& run : {first, second}) {
      j << json{{"type", "scenario"}, {"step", 0}, {"run", run}, {"scenario", x["scenario"]}}.dump() << "\n";
      j << json{{"type", "exercise"}, {"step", 0}, {"run", run}, {"exercise", x}}.dump() << "\n";
      j << json{{"type", "stop"}, {"step", run == first ? 1250 : 300}}.dump() << "\n";
    }
  }
  std::ostringstream said;
  std::streambuf* const was = std::cout.rdbuf(said.rdbuf());
  const int status = cli::debrief((dir / "session.jsonl").string(), (dir / "d.html").string(), "", false, false);
  std::cout.rdbuf(was);
  CHECK(status == 0);
  INFO(said.str());
  CHECK(said.str().find("of the last of the journal's 2 runs (" + second + ")") != std::string::npos);
  CHECK(said.str().find("    " + first + "  " + x["name"].get<std::string>() + ", to t = 12.50 s") != std::string::npos);
  CHECK(said.str().find("    " + second + "  ") != std::string::npos);
  CHECK(slurp(dir / "d.html").find(second) != std::string::npos);
  // Naming a run writes that one and lists nothing.
  said.str("");
  std::cout.rdbuf(said.rdbuf());
  CHECK(cli::debrief((dir / "session.jsonl").string(), (dir / "d.html").string(), first, false, false) == 0);
  std::cout.rdbuf(was);
  CHECK(said.str().find("picks another") == std::string::npos);
  CHECK(slurp(dir / "d.html").find(first) != std::string::npos);
  fs::remove_all(dir);
}
