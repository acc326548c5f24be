// The live session's running exercise: its script, alarms and objectives after each step, the
// instructor's script edits, alarm acknowledgements (journalled before they take effect).
#include <spdlog/spdlog.h>

#include <map>
#include <nlohmann/json.hpp>

#include "droopline/scenario_io.hpp"
#include "live_internal.hpp"
#include "live_session.hpp"

namespace droopline {
namespace {
using json = nlohmann::ordered_json;
}  // namespace

namespace live_detail {

ExerciseStep feed_exercise(const Engine& engine, std::optional<study::AlarmMonitor>& alarms,
                           std::optional<study::ScriptRunner>& script,
                           std::optional<study::ObjectiveMonitor>& objectives, std::vector<Notice>& notices,
                           std::int64_t lead_steps, bool run_script) {
  ExerciseStep out;
  out.changes = study::feed_monitors(engine, alarms, objectives, notices);
  if (script && run_script) out.firings = script->due(engine, lead_steps);
  return out;
}

}  // namespace live_detail

void LiveSession::start_exercise() {
  alarm_notices_.clear();
  if (!exercise_) {
    script_.reset();
    alarms_.reset();
    objectives_.reset();
    return;
  }
  script_.emplace(exercise_->system, exercise_->def.script);
  alarms_.emplace(exercise_->system, exercise_->def.alarms);
  objectives_.emplace(*exercise_);
}

void LiveSession::exercise_after_step() {
  const live_detail::ExerciseStep step = live_detail::feed_exercise(*engine_, alarms_, script_, objectives_,
                                                                    alarm_notices_, lead_steps(), halted_.empty());
  if (alarms_) push_alarm_changes(step.changes);
  for (const study::ScriptFiring& f : step.firings) submit_firing(f);
}

void LiveSession::submit_firing(const study::ScriptFiring& f) {
  // The same way as anyone's command: checked, journaled (by "script"), applied at its step.
  pipeline_.submit(*engine_, {f.command}, "script", std::max(f.at_step, engine_->step_index()),
                   [id = f.id](LiveResult r) {
                     if (r.status != 200)
                       spdlog::warn("script event {} refused: {} {}", id, r.error,
                                    r.issues.empty() ? std::string() : r.issues.front().text());
                   });
}

void LiveSession::push_alarm_changes(const std::vector<study::AlarmChange>& changes) {
  for (const study::AlarmChange& c : changes) {
    const study::Alarm* a = alarms_->find(c.id);
    if (!a) continue;
    const char* what = c.what == study::AlarmChange::What::raised    ? "raised"
                       : c.what == study::AlarmChange::What::cleared ? "cleared"
                                                                     : "acknowledged";
    json alarm = study::alarm_to_json(def(), *a);
    if (config_.run_log) config_.run_log->alarm(run_id_, alarm);
    // t_s: when the change happened, so a step back drops the changes after it from the log.
    push_event(json{{"type", "alarm"}, {"t_s", engine_->time_s()}, {"change", what}, {"alarm", std::move(alarm)}});
  }
}

void LiveSession::record_script_edit(const std::string& edit, const std::string& id, const std::string& author,
                                     json detail) {
  // For the record only: replay runs the script's firings from their command records.
  json rec{{"type", "script"}, {"step", engine_->step_index()}, {"edit", edit}, {"id", id}, {"by", author}};
  for (auto it = detail.begin(); it != detail.end(); ++it) rec[it.key()] = it.value();
  journal_record(rec);
  // Everyone's log says that the script changed, never what it holds.
  static const std::map<std::string, std::string> kWords = {{"add", "added an event to the script"},
                                                            {"fire", "fired a script event now"},
                                                            {"skip", "skipped a script event"},
                                                            {"shift", "moved a script event"}};
  push_event(json{{"type", "event"},
                  {"t_s", engine_->time_s()},
                  {"kind", "script"},
                  {"by", author},
                  {"text", author + " " + kWords.at(edit)}});
  // A checkpoint now (between steps, before the actions of this step: as a save point is taken),
  // so that a rewind past this moment re-simulates from a script that has the edit.
  timeline_.checkpoint(saved_now());
}

// ------------------------------------------------------------------ exercise

namespace {
// A refusal of the script runner in words: 404 for an unknown id, 409 for one already done.
LiveResult script_refusal(const std::string& why) {
  if (why.rfind("no script event", 0) == 0) return refused(404, why);
  if (why.find("has already") != std::string::npos) return refused(409, why);
  return refused(400, why);
}
}  // namespace

void LiveSession::load_exercise(study::Exercise exercise, Done done) {
  post([this, exercise = std::move(exercise), done = std::move(done)](Engine&) mutable {
    settle_pending();
    const std::string name = exercise.def.name;
    if (!journal_new_run(exercise.system.def(), &exercise, "another exercise was loaded")) {
      done(refused(pipeline_.journal().http_status(),
                   "exercise refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    exercise_ = std::move(exercise);
    trainees_.clear();  // new seats, new trainees
    start_engine(exercise_->system);
    push_event(
        json{{"type", "event"}, {"t_s", 0.0}, {"kind", "exercise"}, {"text", "exercise \"" + name + "\" loaded"}});
    done(accepted(json{{"ok", true}, {"exercise", name}, {"paused", paused_.load()}}));
  });
}

void LiveSession::exercise(Done done) {
  post([this, done = std::move(done)](Engine&) {
    if (!exercise_) return done(refused(404, live_detail::kNoExercise));
    const study::ExerciseDef& d = exercise_->def;
    json seats = json::array();
    for (const study::SeatDef& seat : d.seats)
      seats.push_back(json{{"id", seat.id}, {"name", seat.name}, {"areas", seat.areas}});
    done(accepted(json{{"name", d.name},
                       {"briefing", d.briefing},
                       {"time_limit_s", d.time_limit_s},
                       {"seats", seats},
                       {"ended", ended_}}));
  });
}

void LiveSession::script(Done done) {
  post([this, done = std::move(done)](Engine&) {
    if (!script_) return done(refused(404, live_detail::kNoExercise));
    done(accepted(study::script_to_json(script_->entries())));
  });
}

void LiveSession::script_add(study::ScriptEventDef event, std::string author, Done done) {
  post([this, event = std::move(event), author = std::move(author), done = std::move(done)](Engine& e) mutable {
    if (!script_) return done(refused(404, live_detail::kNoExercise));
    std::string why;
    if (!script_->add(std::move(event), author, e.time_s(), why))
      return done(refused(400, "script event refused: " + why));
    const study::ScriptEntry& added = script_->entries().back();
    json detail = study::script_to_json({added})["events"][0];
    detail.erase("id");
    record_script_edit("add", added.def.id, author, json{{"event", detail}});
    done(accepted(json{{"ok", true}, {"id", added.def.id}}));
  });
}

void LiveSession::script_fire(std::string id, std::string author, Done done) {
  post([this, id = std::move(id), author = std::move(author), done = std::move(done)](Engine& e) {
    if (!script_) return done(refused(404, live_detail::kNoExercise));
    if (const std::string why = refusal(); !why.empty()) return done(refused(409, why));
    std::string why;
    auto firing = script_->fire_now(id, e, why);
    if (!firing) return done(script_refusal(why));
    firing->at_step = e.step_index() + lead_steps();
    record_script_edit("fire", id, author, json::object());
    pipeline_.submit(e, {firing->command}, "script", firing->at_step, [id, done](LiveResult r) {
      if (r.status == 200) r.data["id"] = id;
      done(std::move(r));
    });
  });
}

void LiveSession::script_skip(std::string id, std::string author, Done done) {
  post([this, id = std::move(id), author = std::move(author), done = std::move(done)](Engine&) {
    if (!script_) return done(refused(404, live_detail::kNoExercise));
    std::string why;
    if (!script_->skip(id, why)) return done(script_refusal(why));
    record_script_edit("skip", id, author, json::object());
    done(accepted(json{{"ok", true}, {"id", id}, {"state", "skipped"}}));
  });
}

void LiveSession::script_shift(std::string id, double at_s, std::string author, Done done) {
  post([this, id = std::move(id), at_s, author = std::move(author), done = std::move(done)](Engine& e) {
    if (!script_) return done(refused(404, live_detail::kNoExercise));
    std::string why;
    if (!script_->shift(id, at_s, e.time_s(), why)) return done(script_refusal(why));
    record_script_edit("shift", id, author, json{{"at_s", at_s}});
    done(accepted(json{{"ok", true}, {"id", id}, {"at_s", at_s}}));
  });
}

void LiveSession::alarms(bool active_only, Done done) {
  post([this, active_only, done = std::move(done)](Engine&) {
    json list = json::array();
    if (alarms_)
      for (const study::Alarm& a : alarms_->alarms())
        if (!active_only || !a.cleared_s) list.push_back(study::alarm_to_json(def(), a));
    done(accepted(json{{"alarms", list}}));
  });
}

void LiveSession::ack_alarm(std::uint64_t id, std::string author, std::optional<SeatScope> scope, Done done) {
  post([this, id, author = std::move(author), scope = std::move(scope), done = std::move(done)](Engine&) {
    if (!alarms_) return done(refused(404, live_detail::kNoExercise));
    if (ended_) return done(refused(409, refusal()));
    const study::Alarm* a = alarms_->find(id);
    if (!a) return done(refused(404, "no alarm " + std::to_string(id)));
    if (scope) {
      bool own = false;
      for (std::uint32_t area : a->areas) own = own || answers_for(*scope, def().areas[area].id);
      if (!own)
        return done(refused(403, "alarm " + std::to_string(id) + " (" + a->message + ") is not about an area seat \"" +
                                     scope->seat + "\" answers for"));
    }
    auto already = [id](const study::Alarm& al) {
      return refused(409, "alarm " + std::to_string(id) + " was already acknowledged by " + al.acked_by.value_or("?"));
    };
    if (a->acked_by) return done(already(*a));
    // Journal before it takes effect, as a command: the debrief and the records read it from there.
    pipeline_.submit_effect(
        json{{"type", "ack"}, {"step", 0}, {"alarm", id}, {"by", author}}, command_step(),
        [this, id, author, already](Engine& now) {
          if (!alarms_ || !alarms_->find(id)) return refused(404, "no alarm " + std::to_string(id));
          if (!alarms_->acknowledge(id, author, now.time_s())) return already(*alarms_->find(id));
          push_alarm_changes({{study::AlarmChange::What::acknowledged, id}});
          timeline_.checkpoint(saved_now());  // a rewind past this moment keeps the acknowledgement
          return accepted(json{{"ok", true}, {"alarm", study::alarm_to_json(def(), *alarms_->find(id))}});
        },
        done);
  });
}

}  // namespace droopline
