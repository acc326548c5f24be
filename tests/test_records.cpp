// The training records store: schema versions and the migration from version 1,
// reopening, refusing a newer file, crash recovery from the journal, the CSV
// cells, a full file.
#include <sqlite3.h>

#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <future>
#include <string>

#include "droopline/journal_read.hpp"
#include "records_store.hpp"
#include "support.hpp"

namespace fs = std::filesystem;
using droopline::RunSeat;
using droopline::RunStart;
using droopline::records::RecordsStore;
using droopline::records::RunFilter;

namespace {

fs::path temp_dir(const std::string& name) {
  fs::path d = test::scratch_path("records-" + name);
  fs::create_directories(d);
  return d;
}

// The test's own reader (not the store's code): one value of `sql` as text.
std::string scalar(const fs::path& file, const std::string& sql) {
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) == SQLITE_OK);
  sqlite3_stmt* st = nullptr;
  REQUIRE(sqlite3_prepare_v2(db, sql.c_str(), -1, &st, nullptr) == SQLITE_OK);
  std::string out;
  if (sqlite3_step(st) == SQLITE_ROW && sqlite3_column_text(st, 0))
    out = reinterpret_cast<const char*>(sqlite3_column_text(st, 0));
  sqlite3_finalize(st);
  sqlite3_close(db);
  return out;
}

void exec(const fs::path& file, const std::string& sql) {
  sqlite3* db = nullptr;
  REQUIRE(sqlite3_open(file.c_str(), &db) == SQLITE_OK);
  char* msg = nullptr;
  const int rc = sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &msg);
  INFO((msg ? msg : ""));
  sqlite3_free(msg);
  sqlite3_close(db);
  REQUIRE(rc == SQLITE_OK);
}

const std::string kRun = "0123456789abcdef0123456789abcdef";

RunStart start_of(const std::string& id, const std::string& journal = "") {
  RunStart s;
  s.run_id = id;
  s.exercise = "Morning pickup at Tarnwick";
  s.scenario = "Tri-valley interconnection";
  s.journal_path = journal;
  s.started_unix_s = 1'800'000'000.0;  // 2027-01-15 08:00 UTC
  s.seats = {RunSeat{"north", "North desk", {"vellmark"}}, RunSeat{"south", "South desk", {"oskany", "dreyholt"}}};
  return s;
}

nlohmann::ordered_json seat_scores(double north, double south) {
  using oj = nlohmann::ordered_json;
  auto seat = [](const char* id, double score) {
    return oj{{"seat", id}, {"score", score}, {"objectives", oj::array({oj{{"objective", "band"}, {"score", score}}})}};
  };
  return oj::array({seat("north", north), seat("south", south)});
}

}  // namespace

TEST_CASE("a new records file is schema version 2 in WAL mode") {
  const fs::path file = temp_dir("new") / "records.sqlite3";
  {
    RecordsStore store(file.string());
    INFO(store.status().error);
    REQUIRE(store.ok());
  }
  CHECK(scalar(file, "PRAGMA user_version") == "2");
  CHECK(scalar(file, "PRAGMA journal_mode") == "wal");
  for (const char* table : {"runs", "seats", "trainees", "actions", "alarms", "scores", "notes"})
    CHECK(scalar(file, std::string("SELECT count(*) FROM sqlite_master WHERE "
                                   "type = 'table' AND name = '") +
                           table + "'") == "1");
}

TEST_CASE("a version 1 file migrates to version 2 and keeps its rows") {
  const fs::path file = temp_dir("v1") / "records.sqlite3";
  // The first schema as it shipped, written here independently of the store's
  // own text.
  exec(file, R"sql(
    CREATE TABLE runs(run_id TEXT PRIMARY KEY, exercise TEXT NOT NULL, scenario TEXT NOT NULL,
      journal_path TEXT NOT NULL, started_at REAL NOT NULL, ended_at REAL, ended_s REAL,
      status TEXT NOT NULL CHECK (status IN ('running', 'complete', 'incomplete')), why TEXT NOT NULL DEFAULT '');
    CREATE TABLE seats(run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE, seat TEXT NOT NULL,
      name TEXT NOT NULL, areas TEXT NOT NULL, PRIMARY KEY (run_id, seat));
    CREATE TABLE actions(id INTEGER PRIMARY KEY, run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
      t_s REAL NOT NULL, by TEXT NOT NULL, commands TEXT NOT NULL);
    CREATE TABLE alarms(run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE, alarm TEXT NOT NULL,
      latest TEXT NOT NULL, raised_s REAL, acked_by TEXT, acked_s REAL, cleared_s REAL, PRIMARY KEY (run_id, alarm));
    CREATE TABLE notes(id INTEGER PRIMARY KEY, run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
      t_s REAL, by TEXT NOT NULL, text TEXT NOT NULL, written_at REAL NOT NULL);
    INSERT INTO runs VALUES('0123456789abcdef0123456789abcdef', 'Evening ramp', 'Tri-valley', '', 1790000000,
      1790000600, 600, 'complete', 'time limit');
    INSERT INTO seats VALUES('0123456789abcdef0123456789abcdef', 'north', 'North desk', 'vellmark');
    INSERT INTO actions(run_id, t_s, by, commands) VALUES('0123456789abcdef0123456789abcdef', 12.5, 'north',
      '[{"kind":"load_step","area":"vellmark","mw":5}]');
    INSERT INTO notes(run_id, t_s, by, text, written_at) VALUES('0123456789abcdef0123456789abcdef', 30, 'instructor',
      'slow to raise the schedule', 1790000100);
    PRAGMA user_version = 1;
  )sql");
  RecordsStore store(file.string());
  INFO(store.status().error);
  REQUIRE(store.ok());
  CHECK(scalar(file, "PRAGMA user_version") == "2");
  std::string error;
  auto run = store.run(kRun, error);
  REQUIRE(run);
  CHECK((*run)["status"] == "complete");
  CHECK((*run)["exercise"] == "Evening ramp");
  CHECK((*run)["seats"].size() == 1);
  CHECK((*run)["seats"][0]["areas"][0] == "vellmark");
  REQUIRE((*run)["actions"].size() == 1);
  CHECK((*run)["actions"][0]["t_s"] == 12.5);
  CHECK((*run)["notes"][0]["text"] == "slow to raise the schedule");
  // The new tables work on the migrated file.
  store.trainee_joined(kRun, "north", "Ilse Marrow", 3.0);
  store.flush();
  CHECK(scalar(file, "SELECT name FROM trainees") == "Ilse Marrow");
  // A trainee carried over a reset who never acted is taken off when somebody else joins: that
  // name's row of that seat and run goes, the newcomer's stays.
  store.trainee_joined(kRun, "north", "Tomas Brenn", 4.0);
  store.trainee_withdrawn(kRun, "north", "Ilse Marrow");
  store.flush();
  CHECK(scalar(file, "SELECT group_concat(name) FROM trainees") == "Tomas Brenn");
}

TEST_CASE("the records survive a reopen") {
  const fs::path file = temp_dir("reopen") / "records.sqlite3";
  {
    RecordsStore store(file.string());
    REQUIRE(store.ok());
    store.run_started(start_of(kRun));
    store.trainee_joined(kRun, "north", "Ilse Marrow", 1.0);
    store.trainee_joined(kRun, "south", "Tomas Brenn", 2.0);
    store.actions(kRun, 12.0, "north", nlohmann::json::parse(R"([{"kind":"load_step","area":"vellmark","mw":5}])"));
    store.alarm(kRun, {{"id", 1}, {"kind", "frequency_band"}, {"raised_s", 10.0}, {"acked_by", nullptr}});
    store.alarm(kRun,
                {{"id", 1}, {"kind", "frequency_band"}, {"raised_s", 10.0}, {"acked_by", "north"}, {"acked_s", 14.0}});
    store.note(kRun, 20.0, "instructor", "good call on the schedule");
    store.scores(kRun, 60.0, seat_scores(50, 60));
    store.scores(kRun, 120.0, seat_scores(75, 80));
    store.run_ended(kRun, 120.0, true, "time limit");
    store.flush();
  }
  RecordsStore store(file.string());
  REQUIRE(store.ok());
  std::string error;
  auto run = store.run(kRun, error);
  REQUIRE(run);
  const auto& r = *run;
  CHECK(r["status"] == "complete");
  CHECK(r["ended_s"] == 120.0);
  CHECK(r["started"] == "2027-01-15T08:00:00Z");  // 1.8e9 s after 1970-01-01, worked out by
                                                  // `date -u -d @1800000000`
  REQUIRE(r["seats"].size() == 2);
  CHECK(r["seats"][0]["trainees"][0] == "Ilse Marrow");
  CHECK(r["seats"][0]["score"] == 75.0);  // the latest, not the first
  CHECK(r["seats"][0]["final"] == true);
  CHECK(r["seats"][1]["areas"].size() == 2);
  CHECK(r["actions"].size() == 1);
  REQUIRE(r["alarms"].size() == 1);  // the latest per alarm
  CHECK(r["alarms"][0]["acked_by"] == "north");
  CHECK(scalar(file, "SELECT acked_s FROM alarms") == "14.0");
  CHECK(r["notes"][0]["text"] == "good call on the schedule");

  RunFilter f;
  f.trainee = "Tomas Brenn";
  CHECK(store.runs(f, error)->size() == 1);
  f.trainee = "Nobody Here";
  CHECK(store.runs(f, error)->empty());
  f.trainee = "brenn";  // any part of the name, any case, as typed into the records page's box
  CHECK(store.runs(f, error)->size() == 1);
  // The CSV for one trainee: the seats that trainee sat at, not the run's others.
  auto mine = store.export_csv(f, error);
  REQUIRE(mine);
  CHECK(mine->find("Tomas Brenn") != std::string::npos);
  CHECK(mine->find("Ilse Marrow") == std::string::npos);
  CHECK(std::count(mine->begin(), mine->end(), '\n') == 2);  // the header and one seat
  f = {};
  f.exercise = "NOT THERE";
  CHECK(store.runs(f, error)->empty());
  f = {};
  f.from = "2027-01-16";
  CHECK(store.runs(f, error)->empty());
  f.from = "2027-01-15";
  f.to = "2027-01-15";
  CHECK(store.runs(f, error)->size() == 1);
  auto trainees = store.trainees(error);
  REQUIRE(trainees);
  REQUIRE(trainees->size() == 2);
  CHECK((*trainees)[0]["name"] == "Ilse Marrow");
  CHECK((*trainees)[0]["attempts"][0]["score"] == 75.0);

  // Removing a name: its trainee row and the note that quotes it.
  std::promise<std::pair<long long, std::string>> removed;
  store.add_note(kRun, "instructor", "Ilse Marrow did well", [](std::string) {});
  store.delete_trainee("Ilse Marrow", [&](long long n, std::string e) { removed.set_value({n, e}); });
  auto [changed, why] = removed.get_future().get();
  CHECK(why.empty());
  CHECK(changed == 2);
  CHECK(scalar(file, "SELECT count(*) FROM trainees WHERE name = 'Ilse Marrow'") == "0");
  CHECK(scalar(file, "SELECT count(*) FROM notes WHERE text LIKE '%Ilse%'") == "0");
}

TEST_CASE("a records file of a newer schema is refused with the reason") {
  const fs::path file = temp_dir("newer") / "records.sqlite3";
  exec(file, "CREATE TABLE later(x); PRAGMA user_version = 7;");
  RecordsStore store(file.string());
  CHECK_FALSE(store.ok());
  CHECK_THAT(store.status().error, Catch::Contains(file.string()) && Catch::Contains("schema version is 7") &&
                                       Catch::Contains("newer than this droopline knows (2)"));
  CHECK(scalar(file, "PRAGMA user_version") == "7");  // left as it was
  store.actions(kRun, 1.0, "north",
                nlohmann::json::array());  // dropped, never thrown
  store.flush();
}

TEST_CASE("a run left running is marked incomplete and completed from its journal") {
  const fs::path dir = temp_dir("recover");
  const fs::path file = dir / "records.sqlite3", journal = dir / "journal.jsonl";
  std::ifstream scenario_in(test::source_path("scenarios/demo_three_areas.json"));
  const std::string scenario = nlohmann::json::parse(scenario_in).dump();
  const std::string b1 = R"([{"kind":"load_step","area":"vellmark","mw":5}])";
  const std::string b2 = R"([{"kind":"load_step","area":"oskany","mw":-7.5}])";
  {
    std::ofstream out(journal);
    out << R"({"type":"scenario","step":0,"run":")" << kRun << R"(","scenario":)" << scenario << "}\n"
        << R"({"type":"commands","step":100,"commands":)" << b1 << R"(,"by":"north"})"
        << "\n"
        << R"({"type":"commands","step":250,"commands":)" << b2 << R"(,"by":"south"})"
        << "\n"
        << R"({"type":"commands","step":300,"commands":)" << b1 << R"(,"by":"north"})"
        << "\n"
        << R"({"type":"commands","step":4)";  // a torn last line: never
                                              // acknowledged
  }
  {
    RecordsStore store(file.string());
    REQUIRE(store.ok());
    store.run_started(start_of(kRun, journal.string()));
    store.actions(kRun, 1.0, "north",
                  nlohmann::json::parse(b1));  // the first batch made it, the rest did not
    store.flush();
  }  // no run_ended: the service "died"
  RecordsStore store(file.string());
  REQUIRE(store.ok());
  std::string error;
  auto run = store.run(kRun, error);
  REQUIRE(run);
  CHECK((*run)["status"] == "incomplete");
  CHECK((*run)["why"] == "the service stopped without ending it");
  const auto& actions = (*run)["actions"];
  REQUIRE(actions.size() == 3);  // the one it had and the two it lacked, never the first twice
  CHECK(actions[0]["t_s"] == 1.0);
  CHECK(actions[1]["t_s"] == Approx(2.5));  // step 250 at the scenario's step_s 0.01
  CHECK(actions[1]["by"] == "south");
  CHECK(actions[2]["t_s"] == Approx(3.0));
  CHECK(actions[2]["commands"][0]["area"] == "vellmark");
  CHECK((*run)["ended_s"] == Approx(3.0));
}

// Found in a CI rehearsal: a run journalled to /dev/full (the fault tests' always-full disk) was
// left running in the records beside it, and the next start read /dev/full as its journal, an
// endless line, until memory ran out. A journal that is not a regular file is not read.
TEST_CASE("a run left running with a device as its journal is marked incomplete without reading it") {
  const fs::path dir = temp_dir("recover-device");
  const fs::path file = dir / "records.sqlite3";
  const std::string other = "fedcba9876543210fedcba9876543210";
  {
    RecordsStore store(file.string());
    REQUIRE(store.ok());
    store.run_started(start_of(kRun, "/dev/zero"));
    store.run_started(start_of(other, dir.string()));  // a folder is not a journal either
    store.flush();
  }
  RecordsStore store(file.string());  // recovery at open: returns, does not read forever
  REQUIRE(store.ok());
  for (const std::string& id : {kRun, other}) {
    std::string error;
    auto run = store.run(id, error);
    REQUIRE(run);
    CHECK((*run)["status"] == "incomplete");
    CHECK((*run)["actions"].empty());
  }
  CHECK(droopline::read_journal("/dev/zero").issues.at(0).text() == "journal: \"/dev/zero\" is not a regular file");
}

TEST_CASE("CSV cells are quoted and never run as formulas") {
  using droopline::records::csv_cell;
  CHECK(csv_cell("plain") == "plain");
  CHECK(csv_cell("a,b") == "\"a,b\"");
  CHECK(csv_cell("say \"hi\"") == "\"say \"\"hi\"\"\"");
  CHECK(csv_cell("two\nlines") == "\"two\nlines\"");
  CHECK(csv_cell("=HYPERLINK(\"x\")") == "\"'=HYPERLINK(\"\"x\"\")\"");
  CHECK(csv_cell("+1") == "'+1");
  CHECK(csv_cell("-1") == "'-1");
  CHECK(csv_cell("@SUM(A1)") == "'@SUM(A1)");
  CHECK(csv_cell("a=b") == "a=b");

  const fs::path file = temp_dir("csv") / "records.sqlite3";
  RecordsStore store(file.string());
  store.run_started(start_of(kRun));
  store.trainee_joined(kRun, "north", "=cmd|' /C calc'!A0", 1.0);
  store.scores(kRun, 60.0, seat_scores(62.5, 90));
  store.flush();
  std::string error;
  auto csv = store.export_csv({}, error);
  REQUIRE(csv);
  CHECK(csv->substr(0, csv->find("\r\n")) == "date,exercise,run_id,status,seat,trainee,score,band");
  CHECK_THAT(*csv, Catch::Contains("2027-01-15,Morning pickup at Tarnwick," + kRun +
                                   ",running,north,'=cmd|' /C calc'!A0,62.5,62.5\r\n"));
  CHECK_THAT(*csv, Catch::Contains(",running,south,,90.0,90.0\r\n"));
  // Scores to one decimal, as the debrief shows them (the records keep every digit).
  store.scores(kRun, 70.0, seat_scores(200.0 / 3.0, 90));
  store.flush();
  csv = store.export_csv({}, error);
  REQUIRE(csv);
  CHECK_THAT(*csv, Catch::Contains(",66.7,66.7\r\n"));
  CHECK_THAT(*csv, !Catch::Contains("66.66"));
}

TEST_CASE(
    "a full records file gives one clear message and the store stops "
    "writing, without throwing") {
  const fs::path file = temp_dir("full") / "records.sqlite3";
  RecordsStore store(file.string(),
                     64 * 4096);  // at most 64 pages of 4 KiB (SQLite's default page size)
  REQUIRE(store.ok());
  store.run_started(start_of(kRun));
  const auto big = nlohmann::json::array({std::string(3000, 'x')});
  for (int i = 0; i < 200; ++i) store.actions(kRun, i, "north", big);
  store.flush();
  const auto status = store.status();
  CHECK_FALSE(status.ok);
  CHECK(status.error ==
        "records: cannot write " + file.string() + ": database or disk is full; the session goes on without records");
  const long long kept = std::stoll(scalar(file, "SELECT count(*) FROM actions"));
  CHECK(kept > 0);
  CHECK(kept < 200);
  store.actions(kRun, 300.0, "north", big);  // dropped quietly while failed
  store.flush();
  CHECK(std::stoll(scalar(file, "SELECT count(*) FROM actions")) == kept);
  CHECK(scalar(file, "PRAGMA integrity_check") == "ok");
}
