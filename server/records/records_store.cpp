#include "records_store.hpp"

#include <spdlog/spdlog.h>

#include <chrono>
#include <utility>

#include "schema.hpp"

namespace droopline::records {
namespace {

// Events queued beyond this (a disk far slower than the session) are dropped,
// and said so.
constexpr std::size_t kMaxQueued = 100000;

double wall_now() { return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count(); }

std::string areas_text(const std::vector<std::string>& areas) {
  std::string out;
  for (const std::string& a : areas) out += (out.empty() ? "" : ",") + a;
  return out;
}

// One statement with its parameters bound by `bind`, run; false with SQLite's
// reason.
template <typename Bind>
bool write_one(Db& db, std::string& error, std::string_view sql, Bind&& bind) {
  Stmt s(db.get(), sql);
  bind(s);
  if (s.run()) return true;
  error = s.error();
  return false;
}

// A write of one statement, its parameters bound by `bind` (a copy kept for when it runs).
template <typename Bind>
std::function<bool(Db&, std::string&)> statement(const char* sql, Bind bind) {
  return [sql, bind = std::move(bind)](Db& db, std::string& e) { return write_one(db, e, sql, bind); };
}

}  // namespace

RecordsStore::RecordsStore(std::string path, long long max_bytes) : path_(std::move(path)), max_bytes_(max_bytes) {
  open_writer("the service stopped without ending it");
  writer_ = std::thread([this] { writer_loop(); });
}

RecordsStore::~RecordsStore() {
  {
    std::lock_guard lock(mutex_);
    stop_ = true;
  }
  wake_.notify_all();
  writer_.join();
}

Status RecordsStore::status() const {
  std::lock_guard lock(mutex_);
  return {path_, ok_, error_};
}

void RecordsStore::flush() {
  std::unique_lock lock(mutex_);
  drained_.wait(lock, [this] { return queue_.empty() && !busy_; });
}

bool RecordsStore::open_writer(const std::string& why_incomplete) {
  std::string error;
  const bool opened =
      db_.open(path_, true, false, error) &&
      db_.exec(
          "PRAGMA journal_mode=WAL; PRAGMA synchronous=NORMAL; PRAGMA "
          "foreign_keys=ON",
          error) &&
      prepare_schema(db_, error) &&
      (max_bytes_ <= 0 || db_.exec("PRAGMA max_page_count = " + std::to_string(max_bytes_ / 4096), error));
  if (!opened) {
    db_.close();
    fail(error);
    return false;
  }
  {
    std::lock_guard lock(mutex_);
    ok_ = true;
    error_.clear();
  }
  return recover(why_incomplete);
}

void RecordsStore::fail(const std::string& reason) {
  const std::string message =
      "records: cannot write " + path_ + ": " + reason + "; the session goes on without records";
  bool first = false;
  {
    std::lock_guard lock(mutex_);
    first = ok_ || error_.empty();
    ok_ = false;
    error_ = message;
  }
  if (first) spdlog::error("{}",
                           message);  // once per episode, not once per dropped event
  db_.close();
}

void RecordsStore::push(Job job) {
  {
    std::lock_guard lock(mutex_);
    if (queue_.size() >= kMaxQueued && !job.retry) {
      overflowed_ = true;  // the writer says so, and stops until the next run
      return;
    }
    queue_.push_back(std::move(job));
  }
  wake_.notify_one();
}

void RecordsStore::queue(Write write) { push({std::move(write), false, {}}); }

void RecordsStore::writer_loop() {
  for (;;) {
    Job job;
    {
      std::unique_lock lock(mutex_);
      wake_.wait(lock, [this] { return stop_ || !queue_.empty(); });
      if (queue_.empty()) break;
      job = std::move(queue_.front());
      queue_.pop_front();
      busy_ = true;
    }
    std::string error;
    if (!db_.is_open() && job.retry) open_writer("records could not be written while it ran");
    if (!db_.is_open()) {
      std::lock_guard lock(mutex_);
      error = error_.empty() ? "the records file is not open" : error_;
    } else if (!transaction(db_, error, [&](std::string& e) { return job.write(db_, e); })) {
      if (error != "unknown run") fail(error);
    }
    if (job.done) job.done(error);
    bool overflowed = false;
    {
      std::lock_guard lock(mutex_);
      busy_ = false;
      overflowed = std::exchange(overflowed_, false);
    }
    if (overflowed && db_.is_open()) fail("the disk is too slow for the session (the write queue is full)");
    drained_.notify_all();
  }
  std::lock_guard lock(mutex_);
  busy_ = false;
  drained_.notify_all();
}

void RecordsStore::run_started(const RunStart& start) {
  Job job;
  job.retry = true;
  job.write = [start, now = wall_now()](Db& db, std::string& e) {
    // A run already open under this id (a reload that kept it) keeps its rows;
    // the start is new.
    if (!write_one(db, e,
                   "INSERT INTO runs(run_id, exercise, scenario, journal_path, "
                   "started_at, status) "
                   "VALUES(?1, ?2, ?3, ?4, ?5, 'running') ON CONFLICT(run_id) "
                   "DO UPDATE SET status = 'running'",
                   [&](Stmt& s) {
                     s.bind(1, start.run_id).bind(2, start.exercise).bind(3, start.scenario);
                     s.bind(4, start.journal_path).bind(5, start.started_unix_s > 0 ? start.started_unix_s : now);
                   }))
      return false;
    for (const RunSeat& seat : start.seats)
      if (!write_one(db, e,
                     "INSERT INTO seats(run_id, seat, name, areas) VALUES(?1, ?2, ?3, "
                     "?4) "
                     "ON CONFLICT(run_id, seat) DO UPDATE SET name = ?3, areas = ?4",
                     [&](Stmt& s) {
                       s.bind(1, start.run_id).bind(2, seat.id).bind(3, seat.name).bind(4, areas_text(seat.areas));
                     }))
        return false;
    return true;
  };
  push(std::move(job));
}

void RecordsStore::trainee_joined(const std::string& run_id, const std::string& seat, const std::string& name,
                                  double t_s) {
  queue(statement(
      "INSERT INTO trainees(run_id, seat, name, joined_at, joined_s) VALUES(?1, ?2, ?3, ?4, ?5)",
      [=, now = wall_now()](Stmt& s) { s.bind(1, run_id).bind(2, seat).bind(3, name).bind(4, now).bind(5, t_s); }));
}

void RecordsStore::trainee_withdrawn(const std::string& run_id, const std::string& seat, const std::string& name) {
  queue(statement("DELETE FROM trainees WHERE run_id = ?1 AND seat = ?2 AND name = ?3",
                  [=](Stmt& s) { s.bind(1, run_id).bind(2, seat).bind(3, name); }));
}

void RecordsStore::actions(const std::string& run_id, double t_s, const std::string& by,
                           const nlohmann::json& commands) {
  queue(statement("INSERT INTO actions(run_id, t_s, by, commands) VALUES(?1, ?2, ?3, ?4)",
                  [=, text = commands.dump()](Stmt& s) { s.bind(1, run_id).bind(2, t_s).bind(3, by).bind(4, text); }));
}

void RecordsStore::alarm(const std::string& run_id, const nlohmann::ordered_json& alarm) {
  queue([=](Db& db, std::string& e) {
    auto num = [&](const char* key) -> std::optional<double> {
      return alarm.contains(key) && alarm[key].is_number() ? std::optional(alarm[key].get<double>()) : std::nullopt;
    };
    const std::string id = alarm.contains("id") ? alarm["id"].dump() : "?";
    const std::string acked_by =
        alarm.contains("acked_by") && alarm["acked_by"].is_string() ? alarm["acked_by"].get<std::string>() : "";
    return write_one(db, e,
                     "INSERT INTO alarms(run_id, alarm, latest, "
                     "raised_s, acked_by, acked_s, cleared_s) "
                     "VALUES(?1, ?2, ?3, ?4, NULLIF(?5, ''), ?6, ?7) ON "
                     "CONFLICT(run_id, alarm) DO UPDATE SET "
                     "latest = ?3, raised_s = ?4, acked_by = NULLIF(?5, "
                     "''), acked_s = ?6, cleared_s = ?7",
                     [&](Stmt& s) {
                       s.bind(1, run_id).bind(2, id).bind(3,
                                                          alarm.dump(-1, ' ', false, json::error_handler_t::replace));
                       s.bind(4, num("raised_s")).bind(5, acked_by).bind(6, num("acked_s")).bind(7, num("cleared_s"));
                     });
  });
}

void RecordsStore::note(const std::string& run_id, double t_s, const std::string& by, const std::string& text) {
  queue(statement(
      "INSERT INTO notes(run_id, t_s, by, text, written_at) VALUES(?1, ?2, ?3, ?4, ?5)",
      [=, now = wall_now()](Stmt& s) { s.bind(1, run_id).bind(2, t_s).bind(3, by).bind(4, text).bind(5, now); }));
}

void RecordsStore::scores(const std::string& run_id, double t_s, const nlohmann::ordered_json& seats) {
  queue([=](Db& db, std::string& e) {
    if (!seats.is_array()) return true;
    for (const auto& seat : seats) {
      if (!seat.is_object() || !seat.contains("seat") || !seat["seat"].is_string()) continue;
      const double score = seat.contains("score") && seat["score"].is_number() ? seat["score"].get<double>() : 0.0;
      const json objectives = seat.contains("objectives") ? seat["objectives"] : json::array();
      if (!write_one(db, e,
                     "INSERT INTO scores(run_id, seat, t_s, score, "
                     "objectives) VALUES(?1, ?2, ?3, ?4, ?5) "
                     "ON CONFLICT(run_id, seat) DO UPDATE SET t_s = ?3, "
                     "score = ?4, objectives = ?5",
                     [&](Stmt& s) {
                       s.bind(1, run_id).bind(2, seat["seat"].get<std::string>()).bind(3, t_s).bind(4, score);
                       s.bind(5, objectives.dump(-1, ' ', false, json::error_handler_t::replace));
                     }))
        return false;
    }
    return true;
  });
}

void RecordsStore::run_ended(const std::string& run_id, double t_s, bool complete, const std::string& why) {
  queue([=, now = wall_now()](Db& db, std::string& e) {
    // The scores sent last are the run's final ones.
    return write_one(db, e,
                     "UPDATE runs SET status = ?2, why = ?3, ended_s = "
                     "?4, ended_at = ?5 WHERE run_id = ?1",
                     [&](Stmt& s) {
                       s.bind(1, run_id).bind(2, complete ? "complete" : "incomplete").bind(3, why);
                       s.bind(4, t_s).bind(5, now);
                     }) &&
           write_one(db, e, "UPDATE scores SET final = 1 WHERE run_id = ?1", [&](Stmt& s) { s.bind(1, run_id); });
  });
}

void RecordsStore::add_note(const std::string& run_id, const std::string& by, const std::string& text,
                            std::function<void(std::string)> done) {
  push({[=, now = wall_now()](Db& db, std::string& e) {
          Stmt exists(db.get(), "SELECT 1 FROM runs WHERE run_id = ?1");
          exists.bind(1, run_id);
          if (!exists.row()) {
            e = exists.failed() ? exists.error() : "unknown run";
            return false;
          }
          return write_one(db, e,
                           "INSERT INTO notes(run_id, t_s, by, text, "
                           "written_at) VALUES(?1, NULL, ?2, ?3, ?4)",
                           [&](Stmt& s) { s.bind(1, run_id).bind(2, by).bind(3, text).bind(4, now); });
        },
        true, std::move(done)});
}

void RecordsStore::delete_trainee(const std::string& name, std::function<void(long long, std::string)> done) {
  auto changed = std::make_shared<long long>(0);
  push({[=](Db& db, std::string& e) {
          *changed = 0;
          // The name as a trainee, and wherever a note quotes it.
          for (const char* sql : {"UPDATE trainees SET name = '(removed)' WHERE name = ?1",
                                  "UPDATE notes SET text = replace(text, ?1, '(removed)') WHERE "
                                  "instr(text, ?1) > 0"}) {
            if (!write_one(db, e, sql, [&](Stmt& s) { s.bind(1, name); })) return false;
            *changed += db.changes();
          }
          return true;
        },
        true, [changed, done = std::move(done)](std::string error) { done(error.empty() ? *changed : 0, error); }});
}

}  // namespace droopline::records
