#include "live_session.hpp"

#include <algorithm>
#include <cmath>
#include <map>

#include <pthread.h>
#include <sched.h>

#include <nlohmann/json.hpp>
#include <spdlog/spdlog.h>

#include "droopline/batch.hpp"
#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {
namespace {

using json = nlohmann::ordered_json;
using clock = std::chrono::steady_clock;

double wall_now_s() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

// `text` cut to at most `max` bytes, never inside a UTF-8 character.
std::string cut_utf8(std::string text, std::size_t max) {
  if (text.size() <= max) return text;
  std::size_t end = max;
  while (end > 0 && (static_cast<unsigned char>(text[end]) & 0xC0) == 0x80) --end;
  text.resize(end);
  return text;
}

}  // namespace

LiveSession::LiveSession(const CheckedSystem& system, LiveConfig config, Sink sink,
                         std::optional<study::Exercise> exercise)
    : config_(std::move(config)),
      sink_(std::move(sink)),
      pipeline_(
          config_.journal_path,
          [this] {
            { std::lock_guard lock(tasks_mutex_); }  // no wake-up lost between a check and a wait
            tasks_cv_.notify_all();
          },
          counters_.commands, counters_.commands_refused) {
  speed_ = std::clamp(config_.speed, 0.1, 100.0);
  if (pipeline_.journal().ok() && !journal_scenario(system.def())) journal_failed_ = true;
  exercise_ = std::move(exercise);
  start_engine(system);
  thread_ = std::thread([this] { run(); });
}

LiveSession::~LiveSession() { stop(); }

void LiveSession::stop() {
  if (stop_.exchange(true)) return;
  tasks_cv_.notify_all();
  if (thread_.joinable()) thread_.join();
  if (!engine_) return;
  settle_pending();
  if (!journal_failed_ && !pipeline_.journal().append_now(json{{"type", "stop"}, {"step", engine_->step_index()}}.dump()))
    spdlog::error("{}", pipeline_.journal().error());  // replay then runs to the last command
}

void LiveSession::post(Task task) {
  {
    std::lock_guard lock(tasks_mutex_);
    tasks_.push_back(std::move(task));
  }
  tasks_cv_.notify_all();
}

// ------------------------------------------------------------------ loop thread

bool LiveSession::journal_scenario(const SystemDef& def) {
  if (pipeline_.journal().append_now(json{{"type", "scenario"}, {"step", 0}, {"scenario", scenario_to_json(def)}}.dump())) return true;
  spdlog::error("{}", pipeline_.journal().error());
  return false;
}

void LiveSession::start_engine(const CheckedSystem& system) {
  system_ = system;
  engine_ = Engine::create(system);
  output_every_ = study::output_every(def());
  reported_ = 0;
  announced_ = 0;
  checkpoint_ = engine_->clone();
  checkpoint_every_ = std::max<std::int64_t>(1, std::llround(1.0 / def().step_s));
  halted_.clear();
  if (exercise_) {  // what everyone sees of the scenario: not the exercise's own events to come
    SystemDef shown = def();
    shown.events.clear();
    store_.start(*engine_, shown, config_.history_s);
  } else {
    store_.start(*engine_, def(), config_.history_s);
  }
  record_history();
  pipeline_.reset_taken();
  start_exercise();  // before the first checkpoint, which keeps the script and the alarms
  timeline_.start(saved_now(), {kRewindS, 10.0});
  rebase();
}

void LiveSession::start_exercise() {
  alarm_notices_.clear();
  if (!exercise_) {
    script_.reset();
    alarms_.reset();
    return;
  }
  script_.emplace(exercise_->system, exercise_->def.script);
  alarms_.emplace(exercise_->system, exercise_->def.alarms);
}

std::int64_t LiveSession::lead_steps() const {
  if (paused_.load()) return 0;
  return static_cast<std::int64_t>(std::ceil(config_.journal_lead_s * speed_.load() / def().step_s));
}

namespace {

// What an exercise does after a step, with its state passed in: the alarm monitor is fed the
// notices since its last update (then cleared) and the script hands out the events now due. One
// rule for the live loop (which sends the changes and submits the firings) and for the way back
// of a rewind (which rebuilds the state and drops both: they were sent when the lineage first ran).
struct ExerciseStep {
  std::vector<study::AlarmChange> changes;
  std::vector<study::ScriptFiring> firings;
};
ExerciseStep feed_exercise(const Engine& engine, std::optional<study::AlarmMonitor>& alarms,
                           std::optional<study::ScriptRunner>& script, std::vector<Notice>& notices,
                           std::int64_t lead_steps, bool run_script) {
  ExerciseStep out;
  if (alarms) out.changes = alarms->update(engine, notices);
  notices.clear();
  if (script && run_script) out.firings = script->due(engine, lead_steps);
  return out;
}

}  // namespace

void LiveSession::exercise_after_step() {
  const ExerciseStep step =
      feed_exercise(*engine_, alarms_, script_, alarm_notices_, lead_steps(), halted_.empty());
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
    push_event(json{{"type", "alarm"}, {"change", what}, {"alarm", study::alarm_to_json(def(), *a)}});
  }
}

void LiveSession::record_script_edit(const std::string& edit, const std::string& id, const std::string& author,
                                     json detail) {
  // For the record only: replay runs the script's firings from their command records.
  json rec{{"type", "script"}, {"step", engine_->step_index()}, {"edit", edit}, {"id", id}, {"by", author}};
  for (auto it = detail.begin(); it != detail.end(); ++it) rec[it.key()] = it.value();
  if (pipeline_.journal().ok() && !journal_failed_) pipeline_.journal().submit(rec.dump());
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

study::SavedState LiveSession::saved_now() const {
  return {engine_->clone(), {announced_, reported_, frame_count_, 0}, script_, alarms_};
}

bool LiveSession::after_step() {
  counters_.steps.fetch_add(1);
  if (!guard_step()) return false;
  if (engine_->step_index() % output_every_ == 0) record_history();
  drain_notices();
  exercise_after_step();  // the alarm monitor and the script, before the checkpoint that keeps them
  if (timeline_.due(engine_->step_index())) timeline_.checkpoint(saved_now());
  return true;
}

void LiveSession::rebase() {
  base_wall_ = clock::now();
  base_step_ = engine_->step_index();
  next_frame_ = base_wall_;
  rate_wall_ = base_wall_;
  rate_sim_ = engine_->time_s();
}

void LiveSession::run() {
  // A real-time priority keeps the loop on its deadlines while network threads are busy; it
  // needs the privilege (root or CAP_SYS_NICE), so without it the loop runs at normal priority.
  sched_param sp{};
  sp.sched_priority = 10;
  if (pthread_setschedparam(pthread_self(), SCHED_FIFO, &sp) == 0)
    spdlog::info("real-time loop running at SCHED_FIFO priority {}", sp.sched_priority);
  else
    spdlog::info("real-time loop at normal priority (no privilege for SCHED_FIFO)");
  while (!stop_.load()) {
    // Tasks first: they run between steps, at the current simulation time.
    std::vector<Task> tasks;
    {
      std::lock_guard lock(tasks_mutex_);
      tasks.swap(tasks_);
    }
    for (Task& t : tasks) t(*engine_);
    apply_due();
    if (due_unwritten()) {  // the disk is slower than the lead: hold this step until it is done
      std::unique_lock lock(tasks_mutex_);
      tasks_cv_.wait_for(lock, std::chrono::milliseconds(5),
                         [&] { return stop_.load() || !tasks_.empty() || pending_ready(); });
      continue;
    }

    const auto now = clock::now();
    const double step_wall = def().step_s / speed_.load();
    if (paused_.load()) {
      if (now >= next_frame_) {
        emit_frame(wall_now_s());
        next_frame_ = now + std::chrono::milliseconds(500);  // a paused session sends 2 frames/s
      }
      std::unique_lock lock(tasks_mutex_);
      tasks_cv_.wait_until(lock, next_frame_, [&] { return stop_.load() || !tasks_.empty() || pending_ready(); });
      continue;
    }
    auto deadline = [&](std::int64_t step) {
      return base_wall_ + std::chrono::duration_cast<clock::duration>(std::chrono::duration<double>(
                              static_cast<double>(step - base_step_) * step_wall));
    };
    std::int64_t next = engine_->step_index() + 1;
    if (now < deadline(next)) {
      std::unique_lock lock(tasks_mutex_);
      tasks_cv_.wait_until(lock, std::min(deadline(next), next_frame_),
                           [&] { return stop_.load() || !tasks_.empty() || pending_ready(); });
      if (clock::now() < deadline(next)) {
        if (clock::now() >= next_frame_) {
          lock.unlock();
          emit_frame(wall_now_s());
        }
        continue;
      }
    }
    // Due: run the steps whose deadlines have passed, at most max_catchup_steps of them.
    const auto woke = clock::now();
    const double late_s = std::chrono::duration<double>(woke - deadline(next)).count();
    counters_.lag_s = late_s;
    counters_.record_lag(std::max(0.0, late_s));
    if (late_s > counters_.jitter_max_s.load()) counters_.jitter_max_s = late_s;
    if (late_s > step_wall) {
      const auto n_over = counters_.overruns.fetch_add(1) + 1;
      if (woke - last_overrun_log_ > std::chrono::seconds(10)) {  // at most one line per 10 s
        spdlog::warn("real-time loop overrun at t = {:.2f} s: {:.2f} ms late ({} overruns so far)",
                     engine_->time_s(), late_s * 1e3, n_over);
        last_overrun_log_ = woke;
      }
    }
    int ran = 0;
    while (ran < config_.max_catchup_steps && clock::now() >= deadline(engine_->step_index() + 1)) {
      apply_due();
      if (due_unwritten()) break;
      engine_->step();
      ++ran;
      if (!after_step()) {
        rebase();  // the schedule starts again from the state kept: not a slip
        break;
      }
    }
    if (clock::now() >= deadline(engine_->step_index() + 1) + std::chrono::duration_cast<clock::duration>(
                                                             std::chrono::duration<double>(step_wall))) {
      // Still behind after the bounded catch-up: give up the lost time rather than burst.
      counters_.slips.fetch_add(1);
      spdlog::warn("real-time loop slipped at t = {:.2f} s: {:.1f} ms behind, schedule rebased",
                   engine_->time_s(),
                   1e3 * std::chrono::duration<double>(clock::now() - deadline(engine_->step_index() + 1)).count());
      const auto keep_frame = next_frame_;
      rebase();
      next_frame_ = keep_frame;
    }
    if (clock::now() >= next_frame_) emit_frame(wall_now_s());
  }
}

void LiveSession::emit_frame(double wall_s) {
  const auto now = clock::now();
  const double frame_dt = 1.0 / config_.frame_hz;
  next_frame_ += std::chrono::duration_cast<clock::duration>(std::chrono::duration<double>(frame_dt));
  if (next_frame_ < now) next_frame_ = now + std::chrono::duration_cast<clock::duration>(std::chrono::duration<double>(frame_dt));
  const double span = std::chrono::duration<double>(now - rate_wall_).count();
  if (span >= 1.0) {
    counters_.realtime_factor = (engine_->time_s() - rate_sim_) / span;
    rate_wall_ = now;
    rate_sim_ = engine_->time_s();
  }
  auto text = std::make_shared<const std::string>(state_json(wall_s));
  counters_.frames.fetch_add(1);
  sink_({text, true});
  // Disturbances still being measured: their metrics so far, twice a second (droppable; the log
  // keeps the latest for clients that join later).
  if (++frame_count_ % std::max<std::uint64_t>(1, static_cast<std::uint64_t>(config_.frame_hz / 2)) == 0) {
    const auto& d = engine_->disturbances();
    for (std::size_t i = reported_; i < d.size(); ++i)
      if (d[i].open) push_disturbance(i, true);
  }
}

std::string LiveSession::state_json(double wall_s) const {
  return frame_json(*engine_, wall_s, paused_.load(), speed_.load());
}

void LiveSession::record_history() {
  sample_row_.resize(engine_->series_width());
  engine_->sample(sample_row_);
  store_.push(sample_row_);
}

void LiveSession::push_event(json event) { sink_({store_.events().add(std::move(event)), false}); }

void LiveSession::push_disturbance(std::size_t index, bool droppable) {
  json j = disturbance_to_json(*engine_, engine_->disturbances()[index]);
  j["type"] = "disturbance";
  j["index"] = index;
  sink_({store_.events().add(std::move(j), static_cast<std::int64_t>(index)), droppable});
}

bool LiveSession::guard_step() {
  if (engine_->finite()) {
    if (engine_->step_index() % checkpoint_every_ == 0) checkpoint_ = engine_->clone();
    return true;
  }
  const double bad_t = engine_->time_s();
  engine_ = checkpoint_->clone();
  timeline_.truncate(engine_->step_index());  // what came after the state kept never happened
  paused_ = true;
  halted_ = "at t = " + fmt_fixed(bad_t, 2) + " s a value of the simulation stopped being a finite number; the last good state (t = " +
            fmt_fixed(engine_->time_s(), 2) + " s) is kept and the session is paused: the instructor can reset it (then resume) or load a scenario";
  spdlog::error("{}", halted_);
  pipeline_.refuse_all(409, "command refused: " + halted_);
  if (script_) script_->rewound(engine_->step_index());  // its refused firings are to come again
  push_event(json{{"type", "event"}, {"t_s", engine_->time_s()}, {"kind", "halted"}, {"text", halted_}});
  return false;
}

void LiveSession::drain_notices(const std::string& by) {
  std::vector<Notice> notices = engine_->take_notices();
  for (const Notice& n : notices) {
    const std::string text = describe(engine_->def(), n);
    if (n.kind != NoticeKind::command) spdlog::info("t = {:.2f} s: {}", n.t_s, text);
    json event{{"type", "event"}, {"t_s", n.t_s}, {"kind", to_string(n.kind)}, {"text", text}};
    if (!by.empty() && n.kind == NoticeKind::command) event["by"] = by;
    push_event(std::move(event));
  }
  if (alarms_) alarm_notices_.insert(alarm_notices_.end(), notices.begin(), notices.end());
  // Each disturbance is announced when it begins (metrics still filling in, "open": true) and
  // again, complete, when its window ends.
  const auto& d = engine_->disturbances();
  for (; announced_ < d.size(); ++announced_) push_disturbance(announced_, false);
  for (; reported_ < d.size() && !d[reported_].open; ++reported_) push_disturbance(reported_, false);
}

// ------------------------------------------------------------------ requests

void LiveSession::apply(std::vector<Command> commands, std::string author, std::optional<SeatScope> scope,
                        Done done) {
  post([this, commands = std::move(commands), author = std::move(author), scope = std::move(scope),
        done = std::move(done)](Engine& e) mutable {
    // Check, journal, apply: a command is applied and acknowledged only once its record is on
    // disk, at the step the record names; one refused by either changes nothing. The journal is
    // written on its own thread, so the command is scheduled a little ahead (journal_lead_s of
    // wall time) for the record to get there first.
    if (!halted_.empty()) return pipeline_.refuse(commands, done, 409, "command refused: " + halted_);
    if (scope) {  // checked against the system running now (a load may have changed it since the request)
      std::vector<Issue> outside = outside_scope(*system_, commands, *scope);
      if (!outside.empty())
        return pipeline_.refuse(commands, done, 403,
                                "command refused, nothing applied: outside what seat \"" + scope->seat + "\" may do",
                                std::move(outside));
    }
    pipeline_.submit(e, std::move(commands), std::move(author), e.step_index() + lead_steps(), std::move(done));
  });
}

bool LiveSession::due_unwritten() const { return pipeline_.due_unwritten(engine_->step_index()); }

bool LiveSession::pending_ready() const { return pipeline_.ready(engine_->step_index()); }

void LiveSession::apply_due() {
  // The notices the engine holds right after apply_all are the batch's own: the loop takes them
  // after every step, so none from a step can be waiting here.
  pipeline_.apply_due(*engine_, [this](const CommandPipeline::Applied& a) {
    drain_notices(a.author);
    timeline_.applied(a.step, a.actions);  // a rewind applies them again on the way
  });
}

void LiveSession::settle_pending() {
  // Before a new scenario, a reset or the stop record: every durable command is applied at its
  // step, exactly as replay will (the few steps run here are catch-up, like a late wake).
  pipeline_.journal().wait_idle();
  apply_due();
  while (pipeline_.next_step() >= 0) {
    while (engine_->step_index() < pipeline_.next_step()) {
      engine_->step();
      if (!after_step()) return;  // the pending commands were refused
    }
    apply_due();
  }
}

void LiveSession::load(CheckedSystem system, Done done) {
  post([this, system = std::move(system), done = std::move(done)](Engine&) {
    settle_pending();
    const SystemDef& def = system.def();
    if (!journal_scenario(def)) {
      done(refused(pipeline_.journal().http_status(), "scenario refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    exercise_.reset();  // a plain scenario ends the exercise
    start_engine(system);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "scenario"}, {"text", "scenario \"" + def.name + "\" loaded"}});
    done(accepted(json{{"ok", true}, {"scenario", def.name}}));
  });
}

void LiveSession::reset(Done done) {
  post([this, done = std::move(done)](Engine&) {
    settle_pending();
    const CheckedSystem system = *system_;
    if (!journal_scenario(system.def())) {
      done(refused(pipeline_.journal().http_status(), "reset refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    start_engine(system);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "reset"}, {"text", "session reset to t = 0"}});
    done(accepted(json{{"ok", true}, {"t_s", 0.0}}));
  });
}

void LiveSession::pause(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    paused_ = true;
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "pause"}, {"text", "paused"}});
    done(accepted(json{{"ok", true}, {"paused", true}, {"t_s", e.time_s()}}));
  });
}

void LiveSession::resume(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    if (!halted_.empty()) return done(refused(409, "cannot resume: " + halted_));
    if (paused_.exchange(false)) rebase();
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "resume"}, {"text", "resumed"}});
    done(accepted(json{{"ok", true}, {"paused", false}, {"t_s", e.time_s()}}));
  });
}

void LiveSession::set_speed(double speed, Done done) {
  post([this, speed, done = std::move(done)](Engine& e) {
    speed_ = speed;
    rebase();
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "speed"}, {"text", "speed " + fmt_num(speed) + "x"}});
    done(accepted(json{{"ok", true}, {"speed", speed}}));
  });
}

// ------------------------------------------------------------------ save points and rewind

double LiveSession::time_of(std::int64_t step) const {
  // As Engine::time_s does: exact decimals when the steps per second are a whole number.
  const double per_s = 1.0 / def().step_s;
  return std::abs(per_s - std::round(per_s)) < 1e-9 ? static_cast<double>(step) / std::round(per_s)
                                                    : static_cast<double>(step) * def().step_s;
}

bool LiveSession::journal_mark(json record, const char* what, const Done& done) {
  if (pipeline_.journal().append_now(record.dump())) return true;
  spdlog::error("{}", pipeline_.journal().error());
  done(refused(pipeline_.journal().http_status(),
               std::string(what) + " refused, the session goes on unchanged: " + pipeline_.journal().error()));
  return false;
}

void LiveSession::save(std::string name, std::string author, Done done) {
  post([this, name = std::move(name), author = std::move(author), done = std::move(done)](Engine& e) mutable {
    if (!timeline_.can_save())
      return done(refused(409, "save point refused: this run holds " + std::to_string(study::Timeline::kMaxSavePoints) +
                                   " save points, the most it keeps (a reset or a new scenario starts a new run)"));
    const std::uint64_t id = timeline_.next_id();
    name = cut_utf8(std::move(name), kMaxNameBytes);
    if (name.empty()) name = "save point " + std::to_string(id);
    if (!journal_mark(json{{"type", "savepoint"},
                           {"step", e.step_index()},
                           {"taken", pipeline_.taken()},
                           {"id", id},
                           {"name", name},
                           {"by", author}},
                      "save point", done))
      return;
    const study::SavePoint& sp = timeline_.save(name, saved_now());
    const json which{{"id", id}, {"name", name}};
    push_event(json{{"type", "event"},
                    {"t_s", sp.t_s},
                    {"kind", "savepoint"},
                    {"text", "save point \"" + name + "\" kept at t = " + fmt_fixed(sp.t_s, 2) + " s"},
                    {"by", author},
                    {"savepoint", which}});
    done(accepted(json{{"id", id}, {"name", name}, {"t_s", sp.t_s}, {"step", sp.step}}));
  });
}

void LiveSession::save_points(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    json list = json::array();
    for (const study::SavePoint& sp : timeline_.save_points())
      list.push_back(json{{"id", sp.id}, {"name", sp.name}, {"t_s", sp.t_s}, {"step", sp.step}});
    done(accepted(json{{"t_s", e.time_s()},
                       {"rewind_from_s", time_of(timeline_.earliest_step(e.step_index()))},
                       {"max_savepoints", study::Timeline::kMaxSavePoints},
                       {"savepoints", std::move(list)}}));
  });
}

void LiveSession::restore(std::uint64_t id, std::string author, Done done) {
  post([this, id, author = std::move(author), done = std::move(done)](Engine& e) {
    const study::SavePoint* sp = timeline_.find(id);
    if (!sp)
      return done(
          refused(404, "no save point " + std::to_string(id) +
                           " in this run (GET /api/v1/savepoints lists them; a reset or a new scenario drops them)"));
    if (!journal_mark(json{{"type", "restore"},
                           {"step", e.step_index()},
                           {"taken", pipeline_.taken()},
                           {"savepoint", id},
                           {"to_step", sp->step},
                           {"by", author}},
                      "restore", done))
      return;
    const double from_t_s = e.time_s();
    std::optional<study::SavedState> state = timeline_.restore(id);
    go_back(std::move(*state), from_t_s, timeline_.find(id), author, done);
  });
}

void LiveSession::rewind(double to_s, std::string author, Done done) {
  post([this, to_s, author = std::move(author), done = std::move(done)](Engine& e) {
    const std::int64_t now = e.step_index();
    const std::int64_t earliest = timeline_.earliest_step(now);
    const double to_steps = std::round(to_s / def().step_s);
    if (!(to_steps >= static_cast<double>(earliest) && to_steps <= static_cast<double>(now)))
      return done(refused(400, "to_s: must lie within the last " + fmt_num(kRewindS) +
                                   " s of this lineage and not ahead of now, from " + fmt_fixed(time_of(earliest), 2) +
                                   " s to " + fmt_fixed(e.time_s(), 2) + " s; got " + fmt_num(to_s) + " s"));
    const auto to = static_cast<std::int64_t>(to_steps);
    if (!journal_mark(
            json{{"type", "rewind"}, {"step", now}, {"taken", pipeline_.taken()}, {"to_step", to}, {"by", author}},
            "rewind", done))
      return;
    const double from_t_s = e.time_s();
    study::Resimulation hooks;
    // The notices on the way were sent when the lineage first went there. An exercise's alarm
    // monitor and script, in the state being rebuilt, are fed as after a live step (the script's
    // firings on the way are in the logged actions already; those handed out for a step after the
    // target go back to pending in go_back).
    auto pending = std::make_shared<std::vector<Notice>>();
    hooks.applied = [pending](study::SavedState& s, const study::LoggedActions&) {
      for (Notice& n : s.engine->take_notices()) pending->push_back(std::move(n));
    };
    hooks.stepped = [this, pending](study::SavedState& s) {
      for (Notice& n : s.engine->take_notices()) pending->push_back(std::move(n));
      feed_exercise(*s.engine, s.alarms, s.script, *pending, lead_steps(), true);
    };
    study::SavedState state = timeline_.rewind(to, hooks);
    const auto& d = state.engine->disturbances();
    state.counters.announced = d.size();  // every one was announced on the way
    state.counters.reported = 0;
    while (state.counters.reported < d.size() && !d[state.counters.reported].open) ++state.counters.reported;
    go_back(std::move(state), from_t_s, nullptr, author, done);
  });
}

void LiveSession::go_back(study::SavedState state, double from_t_s, const study::SavePoint* savepoint,
                          const std::string& author, const Done& done) {
  const double t_s = state.engine->time_s();
  const std::size_t waiting = pipeline_.waiting_commands();
  pipeline_.refuse_all(409, "command refused, nothing applied: the instructor went back to t = " + fmt_fixed(t_s, 2) +
                                " s before its step came");
  engine_ = std::move(state.engine);
  announced_ = state.counters.announced;
  reported_ = state.counters.reported;
  frame_count_ = state.counters.frames;
  script_ = std::move(state.script);
  alarms_ = std::move(state.alarms);
  if (script_) script_->rewound(engine_->step_index());  // its firings refused above are due again
  checkpoint_ = engine_->clone();
  halted_.clear();  // the state gone back to is a good one
  store_.drop_after(t_s);
  rebase();
  const json which = savepoint ? json{{"id", savepoint->id}, {"name", savepoint->name}} : json(nullptr);
  const std::string text =
      savepoint ? "save point \"" + savepoint->name + "\" restored: back from t = " + fmt_fixed(from_t_s, 2) +
                      " s to t = " + fmt_fixed(t_s, 2) + " s"
                : "rewound from t = " + fmt_fixed(from_t_s, 2) + " s to t = " + fmt_fixed(t_s, 2) + " s";
  push_event(json{{"type", "restored"},
                  {"t_s", t_s},
                  {"from_t_s", from_t_s},
                  {"by", author},
                  {"savepoint", which},
                  {"text", text}});
  done(accepted(
      json{{"ok", true}, {"t_s", t_s}, {"from_t_s", from_t_s}, {"savepoint", which}, {"refused_commands", waiting}}));
}

void LiveSession::hello(std::function<void(std::shared_ptr<const HelloSnapshot>)> done) {
  post([this, done = std::move(done)](Engine&) {
    auto snap = std::make_shared<HelloSnapshot>();
    snap->speed = speed_.load();
    snap->paused = paused_.load();
    store_.fill(*snap);
    if (alarms_) {
      json active = json::array();
      for (const study::Alarm& a : alarms_->alarms())
        if (!a.cleared_s) active.push_back(study::alarm_to_json(def(), a));
      snap->alarms_json = active.dump();
    }
    done(std::move(snap));
  });
}

void LiveSession::state(std::function<void(std::string)> done) {
  post([this, done = std::move(done)](Engine&) {
    std::string s = state_json(wall_now_s());
    done(std::move(s));
  });
}

void LiveSession::scenario(std::function<void(std::string)> done, bool with_hidden) {
  post([this, done = std::move(done), with_hidden](Engine&) {
    json j = scenario_to_json(def());
    if (exercise_ && !with_hidden) j["events"] = json::array();
    done(j.dump());
  });
}

// ------------------------------------------------------------------ exercise

namespace {
const char* const kNoExercise = "no exercise is running";
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
    if (!journal_scenario(exercise.system.def())) {
      done(refused(pipeline_.journal().http_status(),
                   "exercise refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    exercise_ = std::move(exercise);
    start_engine(exercise_->system);
    push_event(
        json{{"type", "event"}, {"t_s", 0.0}, {"kind", "exercise"}, {"text", "exercise \"" + name + "\" loaded"}});
    done(accepted(json{{"ok", true}, {"exercise", name}}));
  });
}

void LiveSession::exercise(Done done) {
  post([this, done = std::move(done)](Engine&) {
    if (!exercise_) return done(refused(404, kNoExercise));
    const study::ExerciseDef& d = exercise_->def;
    json seats = json::array();
    for (const study::SeatDef& seat : d.seats)
      seats.push_back(json{{"id", seat.id}, {"name", seat.name}, {"areas", seat.areas}});
    done(accepted(
        json{{"name", d.name}, {"briefing", d.briefing}, {"time_limit_s", d.time_limit_s}, {"seats", seats}}));
  });
}

void LiveSession::script(Done done) {
  post([this, done = std::move(done)](Engine&) {
    if (!script_) return done(refused(404, kNoExercise));
    done(accepted(study::script_to_json(script_->entries())));
  });
}

void LiveSession::script_add(study::ScriptEventDef event, std::string author, Done done) {
  post([this, event = std::move(event), author = std::move(author), done = std::move(done)](Engine& e) mutable {
    if (!script_) return done(refused(404, kNoExercise));
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
    if (!script_) return done(refused(404, kNoExercise));
    if (!halted_.empty()) return done(refused(409, "command refused: " + halted_));
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
    if (!script_) return done(refused(404, kNoExercise));
    std::string why;
    if (!script_->skip(id, why)) return done(script_refusal(why));
    record_script_edit("skip", id, author, json::object());
    done(accepted(json{{"ok", true}, {"id", id}, {"state", "skipped"}}));
  });
}

void LiveSession::script_shift(std::string id, double at_s, std::string author, Done done) {
  post([this, id = std::move(id), at_s, author = std::move(author), done = std::move(done)](Engine& e) {
    if (!script_) return done(refused(404, kNoExercise));
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
  post([this, id, author = std::move(author), scope = std::move(scope), done = std::move(done)](Engine& e) {
    if (!alarms_) return done(refused(404, kNoExercise));
    const study::Alarm* a = alarms_->find(id);
    if (!a) return done(refused(404, "no alarm " + std::to_string(id)));
    if (scope) {
      bool own = false;
      for (std::uint32_t area : a->areas) own = own || answers_for(*scope, def().areas[area].id);
      if (!own)
        return done(refused(403, "alarm " + std::to_string(id) + " (" + a->message + ") is not about an area seat \"" +
                                     scope->seat + "\" answers for"));
    }
    if (!alarms_->acknowledge(id, author, e.time_s()))
      return done(refused(
          409, "alarm " + std::to_string(id) + " was already acknowledged by " + a->acked_by.value_or("?")));
    push_alarm_changes({{study::AlarmChange::What::acknowledged, id}});
    timeline_.checkpoint(saved_now());  // a rewind past this moment keeps the acknowledgement
    done(accepted(json{{"ok", true}, {"alarm", study::alarm_to_json(def(), *alarms_->find(id))}}));
  });
}

std::string LiveSession::history(double from_s, double to_s, double every_s, bool csv) const {
  return store_.history(from_s, to_s, every_s, csv);
}

study::ComtradeRecord LiveSession::record(double from_s, double to_s) const { return store_.record(from_s, to_s); }

std::string LiveSession::events(std::uint64_t since) const { return store_.events().since(since); }

}  // namespace droopline
