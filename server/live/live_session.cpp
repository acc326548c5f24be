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
#include "live_internal.hpp"

namespace droopline {
namespace {

using json = nlohmann::ordered_json;
using clock = std::chrono::steady_clock;

using live_detail::wall_now_s;

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
  exercise_ = std::move(exercise);
  if (!pipeline_.journal().repaired().empty()) spdlog::warn("{}", pipeline_.journal().repaired());
  if (pipeline_.journal().ok() && !journal_new_run(system.def(), exercise_ ? &*exercise_ : nullptr, ""))
    journal_failed_ = true;
  start_engine(system);
  thread_ = std::thread([this] { run(); });
}

LiveSession::~LiveSession() { stop(); }

bool LiveSession::realtime() const {
  std::unique_lock lock(tasks_mutex_);
  tasks_cv_.wait(lock, [&] { return counters_.realtime.load() >= 0; });
  return counters_.realtime.load() == 1;
}

void LiveSession::stop() {
  if (stop_.exchange(true)) return;
  tasks_cv_.notify_all();
  if (thread_.joinable()) thread_.join();
  if (!engine_) return;
  settle_pending();
  const std::string why = "the service stopped";
  std::string lines = run_open_ ? end_record(false, why).dump() + "\n" : std::string();
  lines += json{{"type", "stop"}, {"step", engine_->step_index()}}.dump();
  if (!journal_failed_ && pipeline_.journal().ok() && !pipeline_.journal().append_now(lines))
    spdlog::error("{}", pipeline_.journal().error());  // replay then runs to the last command
  close_run(false, why, true);
}

void LiveSession::post(Task task) {
  {
    std::lock_guard lock(tasks_mutex_);
    tasks_.push_back(std::move(task));
  }
  tasks_cv_.notify_all();
}

// ------------------------------------------------------------------ loop thread

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
  saved_shown_.clear();
  saved_rows_bytes_ = 0;
  open_run();
  rebase();
}

std::int64_t LiveSession::lead_steps() const {
  if (paused_.load()) return 0;
  return static_cast<std::int64_t>(std::ceil(config_.journal_lead_s * speed_.load() / def().step_s));
}

std::int64_t LiveSession::command_step() const {
  const std::int64_t at = engine_->step_index();
  if (paused_.load()) return at;
  const double since_base_s = std::chrono::duration<double>(clock::now() - base_wall_).count();
  const auto due_now = base_step_ + static_cast<std::int64_t>(std::floor(since_base_s * speed_.load() / def().step_s));
  return std::max(at, due_now) + lead_steps();
}

study::SavedState LiveSession::saved_now() const {
  return {engine_->clone(), {announced_, reported_, frame_count_, 0}, script_, alarms_, objectives_};
}

bool LiveSession::after_step() {
  counters_.steps.fetch_add(1);
  if (!guard_step()) return false;
  if (engine_->step_index() % output_every_ == 0) record_history();
  drain_notices();
  exercise_after_step();  // the alarm monitor and the script, before the checkpoint that keeps them
  if (timeline_.due(engine_->step_index())) timeline_.checkpoint(saved_now());
  return run_after_step();
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
  const bool realtime = pthread_setschedparam(pthread_self(), SCHED_FIFO, &sp) == 0;
  if (realtime)
    spdlog::info("real-time loop running at SCHED_FIFO priority {}", sp.sched_priority);
  else
    spdlog::info("real-time loop at normal priority (no privilege for SCHED_FIFO)");
  {
    std::lock_guard lock(tasks_mutex_);
    counters_.realtime = realtime ? 1 : 0;
  }
  tasks_cv_.notify_all();
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
    // When to wake: at the next step's deadline, or (wake_per_frame) at the next frame if steps
    // fall due before it, or sooner at a waiting command's step; a frame due before the next step
    // is sent on its own.
    auto wake_at = deadline(next);
    if (config_.wake_per_frame && wake_at < next_frame_) {
      wake_at = next_frame_;
      // A command waiting is applied at its step's time, not up to a frame later.
      if (const std::int64_t waiting = pipeline_.next_step(); waiting >= next) wake_at = std::min(wake_at, deadline(waiting));
    }
    if (now < wake_at) {
      std::unique_lock lock(tasks_mutex_);
      tasks_cv_.wait_until(lock, std::min(wake_at, next_frame_),
                           [&] { return stop_.load() || !tasks_.empty() || pending_ready(); });
      if (clock::now() < wake_at) {
        if (clock::now() >= next_frame_) {
          lock.unlock();
          emit_frame(wall_now_s());
        }
        continue;
      }
    }
    // Due: run the steps whose deadlines have passed, at most max_catchup_steps more than one
    // wake's share of them.
    const auto woke = clock::now();
    const double late_s = std::chrono::duration<double>(woke - wake_at).count();
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
    const int per_wake = config_.wake_per_frame ? static_cast<int>(std::ceil(1.0 / (config_.frame_hz * step_wall))) : 1;
    const int limit = config_.max_catchup_steps + per_wake;
    int ran = 0;
    while (ran < limit && clock::now() >= deadline(engine_->step_index() + 1)) {
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
    if (const std::string why = refusal(); !why.empty()) return pipeline_.refuse(commands, done, 409, why);
    if (scope) {  // checked against the system running now (a load may have changed it since the request)
      std::vector<Issue> outside = outside_scope(*system_, commands, *scope);
      if (!outside.empty())
        return pipeline_.refuse(commands, done, 403,
                                "command refused, nothing applied: outside what seat \"" + scope->seat + "\" may do",
                                std::move(outside));
    }
    pipeline_.submit(e, std::move(commands), std::move(author), command_step(), std::move(done));
  });
}

bool LiveSession::due_unwritten() const { return pipeline_.due_unwritten(engine_->step_index()); }

bool LiveSession::pending_ready() const { return pipeline_.ready(engine_->step_index()); }

void LiveSession::apply_due() {
  // The notices the engine holds right after apply_all are the batch's own: the loop takes them
  // after every step, so none from a step can be waiting here.
  pipeline_.apply_due(*engine_, [this](const CommandPipeline::Applied& a) {
    drain_notices(a.author);
    carried_.erase(a.author);  // a seat that acts is sat at by whoever was there
    timeline_.applied(a.step, a.actions, a.author);  // a rewind applies them again on the way
    live_detail::feed_actions(objectives_, a.author, engine_->time_s());
    if (config_.run_log) config_.run_log->actions(run_id_, engine_->time_s(), a.author, nlohmann::json::parse(a.commands));
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
    if (!journal_new_run(def, nullptr, "another scenario was loaded")) {
      done(refused(pipeline_.journal().http_status(), "scenario refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    exercise_.reset();  // a plain scenario ends the exercise
    start_engine(system);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "scenario"}, {"text", "scenario \"" + def.name + "\" loaded"}});
    // A pause carries over to the new scenario: the answer says whether it is running.
    done(accepted(json{{"ok", true}, {"scenario", def.name}, {"paused", paused_.load()}}));
  });
}

void LiveSession::reset(Done done) {
  post([this, done = std::move(done)](Engine&) {
    settle_pending();
    const CheckedSystem system = *system_;
    if (!journal_new_run(system.def(), exercise_ ? &*exercise_ : nullptr, "the session was reset")) {
      done(refused(pipeline_.journal().http_status(), "reset refused, the session goes on unchanged: " + pipeline_.journal().error()));
      return;
    }
    start_engine(system);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "reset"}, {"text", "session reset to t = 0"}});
    done(accepted(json{{"ok", true}, {"t_s", 0.0}, {"paused", paused_.load()}}));
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
    if (ended_) return done(refused(409, "cannot resume: the exercise has ended (a reset starts it again)"));
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

std::optional<std::string> LiveSession::history(double from_s, double to_s, double every_s, bool csv,
                                                std::string& error) const {
  return store_.history(from_s, to_s, every_s, csv, error);
}

study::ComtradeRecord LiveSession::record(double from_s, double to_s) const { return store_.record(from_s, to_s); }

std::string LiveSession::events(std::uint64_t since) const { return store_.events().since(since); }

}  // namespace droopline
