// The live session's runs: their ids, journal records and what the training records hear of them;
// trainees' names, the instructor's notes, objectives read live and the exercise's end.
#include <spdlog/spdlog.h>

#include <filesystem>
#include <nlohmann/json.hpp>
#include <random>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"
#include "live_internal.hpp"
#include "live_session.hpp"

namespace droopline {
namespace {

using json = nlohmann::ordered_json;

// 128 random bits as 32 hex digits, from the system's source: ids of runs on different days and
// machines never meet in one records file.
std::string new_run_id() {
  std::random_device device;
  static constexpr char kHex[] = "0123456789abcdef";
  std::string id;
  for (int word = 0; word < 4; ++word) {
    std::uint32_t bits = device();
    for (int i = 0; i < 8; ++i, bits >>= 4) id += kHex[bits & 0xF];
  }
  return id;
}

constexpr double kScoresEveryS = 60.0;  // the records get every seat's scores this often (simulated s)

}  // namespace

std::string LiveSession::run_id() const {
  std::lock_guard lock(run_mutex_);
  return run_id_;
}

void LiveSession::journal_record(const json& record) {
  if (pipeline_.journal().ok() && !journal_failed_) pipeline_.journal().submit(record.dump());
}

json LiveSession::end_record(bool complete, const std::string& why) const {
  return json{{"type", "end"}, {"step", engine_ ? engine_->step_index() : 0}, {"complete", complete}, {"why", why}};
}

bool LiveSession::journal_new_run(const SystemDef& def, const study::Exercise* exercise, const std::string& why) {
  next_run_id_ = new_run_id();
  // One write: the end of the run going on, the new scenario and its exercise all land or none does.
  std::string lines;
  if (run_open_) lines = end_record(false, why).dump() + "\n";
  lines += json{{"type", "scenario"}, {"step", 0}, {"run", next_run_id_}, {"scenario", scenario_to_json(def)}}.dump();
  if (exercise)
    lines +=
        "\n" +
        json{{"type", "exercise"}, {"step", 0}, {"run", next_run_id_}, {"exercise", study::exercise_to_json(*exercise)}}
            .dump();
  if (!pipeline_.journal().append_now(lines)) {
    spdlog::error("{}", pipeline_.journal().error());
    return false;
  }
  close_run(false, why, true);
  return true;
}

void LiveSession::open_run() {
  if (next_run_id_.empty()) next_run_id_ = new_run_id();  // no journal to write it in
  {
    std::lock_guard lock(run_mutex_);
    run_id_ = std::move(next_run_id_);
  }
  next_run_id_.clear();
  run_open_ = true;
  ended_ = false;
  next_scores_s_ = kScoresEveryS;
  notes_.clear();
  names_in_run_.clear();
  for (const auto& [seat, name] : trainees_) names_in_run_[seat].insert(name);
  if (!exercise_) trainees_.clear();
  carried_ = trainees_;  // credited with the run unless somebody else joins before they act
  // The trainees still at their seats after a reset belong to the new run as well.
  for (const auto& [seat, name] : trainees_)
    journal_record(json{{"type", "trainee"}, {"step", 0}, {"seat", seat}, {"name", name}});
  if (!config_.run_log) return;
  RunStart start;
  start.run_id = run_id_;
  start.exercise = exercise_ ? exercise_->def.name : "";
  start.scenario = def().name;
  if (!config_.journal_path.empty()) {
    std::error_code ec;
    const auto path = std::filesystem::absolute(config_.journal_path, ec);
    start.journal_path = ec ? config_.journal_path : path.string();
  }
  start.started_unix_s = live_detail::wall_now_s();
  if (exercise_)
    for (const study::SeatDef& s : exercise_->def.seats) start.seats.push_back({s.id, s.name, s.areas});
  config_.run_log->run_started(start);
  for (const auto& [seat, name] : trainees_) config_.run_log->trainee_joined(run_id_, seat, name, 0.0);
}

void LiveSession::close_run(bool complete, const std::string& why, bool journaled) {
  if (!run_open_) return;
  run_open_ = false;
  const double t_s = engine_->time_s();
  if (!journaled) journal_record(end_record(complete, why));
  if (config_.run_log) {
    if (objectives_) config_.run_log->scores(run_id_, t_s, scores_json(std::nullopt));
    config_.run_log->run_ended(run_id_, t_s, complete, why);
  }
  if (!complete) return;
  ended_ = true;
  paused_ = true;
  pipeline_.refuse_all(409, refusal());
  push_event(json{{"type", "exercise_end"},
                  {"t_s", t_s},
                  {"complete", true},
                  {"why", why},
                  {"text", "exercise ended at t = " + fmt_fixed(t_s, 2) + " s: " + why}});
}

std::string LiveSession::refusal() const {
  if (!halted_.empty()) return "command refused: " + halted_;
  if (ended_) return "command refused: the exercise has ended (the instructor can reset it or load another)";
  return "";
}

json LiveSession::scores_json(const std::optional<std::string>& seat) const {
  json out = json::array();
  if (!objectives_) return out;
  for (const study::SeatScore& s : objectives_->scores(alarms_ ? &*alarms_ : nullptr))
    if (!seat || s.seat == *seat) out.push_back(study::seat_score_to_json(s));
  return out;
}

bool LiveSession::run_after_step() {
  if (!exercise_ || !run_open_) return true;
  const double t_s = engine_->time_s();
  if (config_.run_log && objectives_ && t_s >= next_scores_s_ - 1e-9) {
    config_.run_log->scores(run_id_, t_s, scores_json(std::nullopt));
    while (next_scores_s_ <= t_s + 1e-9) next_scores_s_ += kScoresEveryS;
  }
  const double limit = exercise_->def.time_limit_s;
  if (limit > 0 && t_s >= limit - 1e-9) {
    close_run(true, "time limit reached", false);
    return false;
  }
  return true;
}

void LiveSession::trainee(std::string seat, std::string name, Done done) {
  post([this, seat = std::move(seat), name = std::move(name), done = std::move(done)](Engine& e) {
    if (!exercise_) return done(refused(404, live_detail::kNoExercise));
    bool known = false;
    for (const study::SeatDef& s : exercise_->def.seats) known = known || s.id == seat;
    if (!known) return done(refused(403, "seat \"" + seat + "\" is not part of the running exercise"));
    // A desk is sat at by a few trainees in a run, not hundreds: each name goes into the records.
    std::set<std::string>& names = names_in_run_[seat];
    if (!names.count(name) && names.size() >= kMaxNamesPerSeat)
      return done(refused(409, "seat \"" + seat + "\" has had " + std::to_string(kMaxNamesPerSeat) +
                                   " trainees in this run, the most it records (a reset or a new exercise starts a new run)"));
    // The name carried over a reset was not at the seat this run after all: a new trainee sat
    // down before it acted, so the run is not theirs.
    if (auto c = carried_.find(seat); c != carried_.end()) {
      if (c->second != name) {
        names.erase(c->second);
        if (config_.run_log && run_open_) config_.run_log->trainee_withdrawn(run_id_, seat, c->second);
      }
      carried_.erase(c);
    }
    names.insert(name);
    trainees_[seat] = name;
    journal_record(json{{"type", "trainee"}, {"step", e.step_index()}, {"seat", seat}, {"name", name}});
    if (config_.run_log && run_open_) config_.run_log->trainee_joined(run_id_, seat, name, e.time_s());
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "trainee"}, {"text", "seat " + seat + " joined"}});
    done(accepted(json{{"ok", true}, {"seat", seat}, {"name", name}}));
  });
}

void LiveSession::add_note(std::string text, std::string author, Done done) {
  post([this, text = std::move(text), author = std::move(author), done = std::move(done)](Engine& e) {
    const std::uint64_t id = notes_.size() + 1;
    notes_.push_back({id, e.time_s(), author, text});
    journal_record(json{{"type", "note"}, {"step", e.step_index()}, {"by", author}, {"text", text}});
    if (config_.run_log) config_.run_log->note(run_id_, e.time_s(), author, text);
    done(accepted(json{{"ok", true}, {"id", id}, {"t_s", e.time_s()}}));
  });
}

void LiveSession::notes(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    json list = json::array();
    for (const Note& n : notes_) list.push_back(json{{"id", n.id}, {"t_s", n.t_s}, {"by", n.by}, {"text", n.text}});
    done(accepted(json{{"t_s", e.time_s()}, {"notes", std::move(list)}}));
  });
}

void LiveSession::end_exercise(std::string author, Done done) {
  post([this, author = std::move(author), done = std::move(done)](Engine& e) {
    if (!exercise_) return done(refused(404, live_detail::kNoExercise));
    if (ended_ || !run_open_) return done(refused(409, "the exercise has ended already (a reset starts it again)"));
    settle_pending();  // commands already journalled take effect first, as replay will apply them
    close_run(true, "ended by the instructor", false);
    spdlog::info("exercise ended by {} at t = {:.2f} s", author, e.time_s());
    done(accepted(
        json{{"ok", true}, {"t_s", engine_->time_s()}, {"complete", true}, {"why", "ended by the instructor"}}));
  });
}

void LiveSession::objectives(std::optional<std::string> seat, Done done) {
  post([this, seat = std::move(seat), done = std::move(done)](Engine& e) {
    if (!exercise_) return done(refused(404, live_detail::kNoExercise));
    done(accepted(json{{"t_s", e.time_s()}, {"ended", ended_}, {"seats", scores_json(seat)}}));
  });
}

}  // namespace droopline
