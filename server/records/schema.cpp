#include "schema.hpp"

namespace droopline::records {
namespace {

// Version 1, as first shipped. Never edit it: files of this version exist and
// migrate from it.
constexpr const char* kVersion1 = R"sql(
CREATE TABLE runs(
  run_id TEXT PRIMARY KEY,
  exercise TEXT NOT NULL,
  scenario TEXT NOT NULL,
  journal_path TEXT NOT NULL,
  started_at REAL NOT NULL,
  ended_at REAL,
  ended_s REAL,
  status TEXT NOT NULL CHECK (status IN ('running', 'complete', 'incomplete')),
  why TEXT NOT NULL DEFAULT '');
CREATE TABLE seats(
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  seat TEXT NOT NULL,
  name TEXT NOT NULL,
  areas TEXT NOT NULL,
  PRIMARY KEY (run_id, seat));
CREATE TABLE actions(
  id INTEGER PRIMARY KEY,
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  t_s REAL NOT NULL,
  by TEXT NOT NULL,
  commands TEXT NOT NULL);
CREATE TABLE alarms(
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  alarm TEXT NOT NULL,
  latest TEXT NOT NULL,
  raised_s REAL,
  acked_by TEXT,
  acked_s REAL,
  cleared_s REAL,
  PRIMARY KEY (run_id, alarm));
CREATE TABLE notes(
  id INTEGER PRIMARY KEY,
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  t_s REAL,
  by TEXT NOT NULL,
  text TEXT NOT NULL,
  written_at REAL NOT NULL);
PRAGMA user_version = 1;
)sql";

// Version 1 -> 2: the trainees at each seat and the scores (the latest per
// seat, and whether it is the run's final one); indexes for the records page's
// filters.
constexpr const char* kTo2 = R"sql(
CREATE TABLE trainees(
  id INTEGER PRIMARY KEY,
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  seat TEXT NOT NULL,
  name TEXT NOT NULL,
  joined_at REAL NOT NULL,
  joined_s REAL);
CREATE TABLE scores(
  run_id TEXT NOT NULL REFERENCES runs(run_id) ON DELETE CASCADE,
  seat TEXT NOT NULL,
  t_s REAL NOT NULL,
  score REAL NOT NULL,
  objectives TEXT NOT NULL,
  final INTEGER NOT NULL DEFAULT 0,
  PRIMARY KEY (run_id, seat));
CREATE INDEX actions_run ON actions(run_id, t_s);
CREATE INDEX trainees_name ON trainees(name);
CREATE INDEX runs_started ON runs(started_at);
PRAGMA user_version = 2;
)sql";

constexpr const char* kSteps[] = {kVersion1, kTo2};  // step i brings version i to i + 1

}  // namespace

bool prepare_schema(Db& db, std::string& error) {
  int version = db.user_version(error);
  if (version < 0) return false;
  if (version > kSchemaVersion) {
    error = "its schema version is " + std::to_string(version) + ", newer than this droopline knows (" +
            std::to_string(kSchemaVersion) + "): use a newer droopline, or another --records file";
    return false;
  }
  for (; version < kSchemaVersion; ++version) {
    std::string why;
    if (!transaction(db, why, [&](std::string& e) { return db.exec(kSteps[version], e); })) {
      error = "cannot bring the schema from version " + std::to_string(version) + " to " + std::to_string(version + 1) +
              ": " + why;
      return false;
    }
  }
  return true;
}

}  // namespace droopline::records
