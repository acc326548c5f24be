#include "live_session.hpp"

#include <algorithm>
#include <cmath>

#include <pthread.h>
#include <sched.h>

#include <nlohmann/json.hpp>
#include <spdlog/spdlog.h>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {
namespace {

using json = nlohmann::ordered_json;
using clock = std::chrono::steady_clock;

double wall_now_s() {
  return std::chrono::duration<double>(std::chrono::system_clock::now().time_since_epoch()).count();
}

std::string error_body(const std::string& message, const std::vector<std::string>& issues = {}) {
  json j{{"error", message}};
  if (!issues.empty()) j["issues"] = issues;
  return j.dump(-1, ' ', false, json::error_handler_t::replace);
}

std::vector<std::string> split_errors(const std::string& joined) {
  std::vector<std::string> out;
  std::size_t start = 0;
  while (start <= joined.size()) {
    const std::size_t end = joined.find("; ", start);
    out.push_back(joined.substr(start, end == std::string::npos ? std::string::npos : end - start));
    if (end == std::string::npos) break;
    start = end + 2;
  }
  return out;
}

}  // namespace

LiveSession::LiveSession(const SystemDef& def, LiveConfig config, Sink sink)
    : config_(std::move(config)), sink_(std::move(sink)), journal_(config_.journal_path) {
  speed_ = std::clamp(config_.speed, 0.1, 100.0);
  start_engine(def, true);
  thread_ = std::thread([this] { run(); });
}

LiveSession::~LiveSession() { stop(); }

void LiveSession::stop() {
  if (stop_.exchange(true)) return;
  tasks_cv_.notify_all();
  if (thread_.joinable()) thread_.join();
  if (engine_) journal_.append(json{{"type", "stop"}, {"step", engine_->step_index()}}.dump());
}

void LiveSession::post(Task task) {
  {
    std::lock_guard lock(tasks_mutex_);
    tasks_.push_back(std::move(task));
  }
  tasks_cv_.notify_all();
}

// ------------------------------------------------------------------ loop thread

void LiveSession::start_engine(const SystemDef& def, bool journal_it) {
  def_ = def;
  auto created = Engine::create(def_);
  engine_ = std::move(created.engine);  // def was validated by the caller
  output_every_ = std::max<std::int64_t>(1, std::llround(def_.output_every_s / def_.step_s));
  reported_ = 0;
  announced_ = 0;
  {
    std::lock_guard lock(history_mutex_);
    columns_ = engine_->series_columns();
    history_.clear();
    history_cap_ = static_cast<std::size_t>(std::max(1.0, config_.history_s / def_.output_every_s)) + 1;
  }
  if (journal_it)
    journal_.append(json{{"type", "scenario"}, {"step", 0}, {"scenario", scenario_to_json(def_)}}.dump());
  record_history();
  rebase();
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

    const auto now = clock::now();
    const double step_wall = def_.step_s / speed_.load();
    if (paused_.load()) {
      if (now >= next_frame_) {
        emit_frame(wall_now_s());
        next_frame_ = now + std::chrono::milliseconds(500);  // a paused session sends 2 frames/s
      }
      std::unique_lock lock(tasks_mutex_);
      tasks_cv_.wait_until(lock, next_frame_, [&] { return stop_.load() || !tasks_.empty(); });
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
                           [&] { return stop_.load() || !tasks_.empty(); });
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
      engine_->step();
      ++ran;
      counters_.steps.fetch_add(1);
      if (engine_->step_index() % output_every_ == 0) record_history();
      drain_notices();
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
  // Disturbances still being measured: their metrics so far, twice a second (droppable, not logged).
  if (++frame_count_ % std::max<std::uint64_t>(1, static_cast<std::uint64_t>(config_.frame_hz / 2)) == 0) {
    const auto& d = engine_->disturbances();
    for (std::size_t i = reported_; i < d.size(); ++i) {
      if (!d[i].open) continue;
      json j = disturbance_to_json(*engine_, d[i]);
      j["type"] = "disturbance";
      j["index"] = i;
      sink_({std::make_shared<const std::string>(j.dump()), true});
    }
  }
}

std::string LiveSession::state_json(double wall_s) const {
  const Engine& e = *engine_;
  json j;
  j["type"] = "frame";
  j["t_s"] = e.time_s();
  j["wall_s"] = wall_s;
  j["step"] = e.step_index();
  j["paused"] = paused_.load();
  j["speed"] = speed_.load();
  json areas = json::object(), units = json::object(), ties = json::object();
  for (std::size_t a = 0; a < def_.areas.size(); ++a) {
    const AreaState s = e.area(AreaId{static_cast<std::uint32_t>(a)});
    areas[def_.areas[a].id] = {{"f_hz", s.f_hz},           {"rocof_hz_per_s", s.rocof_hz_per_s},
                               {"demand_mw", s.demand_mw}, {"generation_mw", s.generation_mw},
                               {"export_mw", s.export_mw}, {"scheduled_export_mw", s.scheduled_export_mw},
                               {"ace_mw", s.ace_mw},       {"agc_mw", s.agc_mw},
                               {"agc_enabled", s.agc_enabled}, {"shed_mw", s.shed_mw},
                               {"collapsed", s.collapsed}, {"island", s.island}};
  }
  for (std::size_t u = 0; u < def_.units.size(); ++u) {
    const UnitState s = e.unit(UnitId{static_cast<std::uint32_t>(u)});
    json ju{{"p_mw", s.p_mw},
            {"setpoint_mw", s.setpoint_mw},
            {"agc_mw", s.agc_mw},
            {"headroom_up_mw", s.headroom_up_mw},
            {"headroom_down_mw", s.headroom_down_mw},
            {"droop", s.droop},
            {"deadband_hz", s.deadband_hz},
            {"mode", to_string(s.mode)},
            {"status", to_string(s.status)}};
    if (def_.units[u].turbine.type == TurbineType::battery) ju["energy_mwh"] = s.energy_mwh;
    units[def_.units[u].id] = std::move(ju);
  }
  for (std::size_t t = 0; t < def_.ties.size(); ++t) {
    const TieState s = e.tie(TieId{static_cast<std::uint32_t>(t)});
    ties[def_.ties[t].id] = {{"flow_mw", s.flow_mw},
                             {"angle_deg", s.angle_deg},
                             {"scheduled_mw", s.scheduled_mw},
                             {"in_service", s.in_service}};
  }
  j["areas"] = std::move(areas);
  j["units"] = std::move(units);
  j["ties"] = std::move(ties);
  return j.dump();
}

void LiveSession::record_history() {
  std::vector<double> row(engine_->series_width());
  engine_->sample(row);
  std::lock_guard lock(history_mutex_);
  history_.push_back(std::move(row));
  while (history_.size() > history_cap_) history_.pop_front();
}

void LiveSession::push_event(const std::string& text) {
  std::shared_ptr<const std::string> msg;
  {
    std::lock_guard lock(history_mutex_);
    const std::uint64_t seq = ++event_seq_;
    json j = json::parse(text);
    j["seq"] = seq;
    msg = std::make_shared<const std::string>(j.dump());
    events_.emplace_back(seq, *msg);
    while (events_.size() > 1000) events_.pop_front();
  }
  sink_({msg, false});
}

void LiveSession::drain_notices() {
  for (const Notice& n : engine_->take_notices()) {
    if (n.kind != "command") spdlog::info("t = {:.2f} s: {}", n.t_s, n.text);
    push_event(json{{"type", "event"}, {"t_s", n.t_s}, {"kind", n.kind}, {"text", n.text}}.dump());
  }
  // Each disturbance is announced when it begins (metrics still filling in, "open": true) and
  // again, complete, when its window ends.
  const auto& d = engine_->disturbances();
  while (announced_ < d.size()) {
    json j = disturbance_to_json(*engine_, d[announced_]);
    j["type"] = "disturbance";
    j["index"] = announced_;
    push_event(j.dump());
    ++announced_;
  }
  while (reported_ < d.size() && !d[reported_].open) {
    json j = disturbance_to_json(*engine_, d[reported_]);
    j["type"] = "disturbance";
    j["index"] = reported_;
    push_event(j.dump());
    ++reported_;
  }
}

// ------------------------------------------------------------------ requests

void LiveSession::apply(std::vector<Command> commands, Done done) {
  post([this, commands = std::move(commands), done = std::move(done)](Engine& e) {
    // Check, journal, apply: a command is applied and acknowledged only once it is on disk, and
    // one that fails either step changes nothing.
    const ApplyResult check = e.check_all(commands);
    if (!check.ok) {
      counters_.commands_refused.fetch_add(commands.size());
      done({400, error_body("command refused", split_errors(check.error))});
      return;
    }
    json cmds = json::array();
    for (const Command& c : commands) cmds.push_back(command_to_json(c));
    if (!journal_.append(json{{"type", "commands"}, {"step", e.step_index()}, {"commands", cmds}}.dump())) {
      spdlog::error("{}", journal_.error());
      counters_.commands_refused.fetch_add(commands.size());
      done({507, error_body("command refused: " + journal_.error())});
      return;
    }
    const ApplyResult r = e.apply_all(commands);
    counters_.commands.fetch_add(commands.size());
    drain_notices();
    done({200, json{{"ok", true}, {"applied", commands.size()}, {"t_s", r.at_s}, {"step", e.step_index()}}.dump()});
  });
}

void LiveSession::load(SystemDef def, Done done) {
  post([this, def = std::move(def), done = std::move(done)](Engine&) {
    start_engine(def, true);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "scenario"}, {"text", "scenario \"" + def.name + "\" loaded"}}.dump());
    done({200, json{{"ok", true}, {"scenario", def.name}}.dump()});
  });
}

void LiveSession::reset(Done done) {
  post([this, done = std::move(done)](Engine&) {
    const SystemDef def = def_;
    start_engine(def, true);
    push_event(json{{"type", "event"}, {"t_s", 0.0}, {"kind", "reset"}, {"text", "session reset to t = 0"}}.dump());
    done({200, json{{"ok", true}, {"t_s", 0.0}}.dump()});
  });
}

void LiveSession::pause(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    paused_ = true;
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "pause"}, {"text", "paused"}}.dump());
    done({200, json{{"ok", true}, {"paused", true}, {"t_s", e.time_s()}}.dump()});
  });
}

void LiveSession::resume(Done done) {
  post([this, done = std::move(done)](Engine& e) {
    if (paused_.exchange(false)) rebase();
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "resume"}, {"text", "resumed"}}.dump());
    done({200, json{{"ok", true}, {"paused", false}, {"t_s", e.time_s()}}.dump()});
  });
}

void LiveSession::set_speed(double speed, Done done) {
  post([this, speed, done = std::move(done)](Engine& e) {
    speed_ = speed;
    rebase();
    push_event(json{{"type", "event"}, {"t_s", e.time_s()}, {"kind", "speed"}, {"text", "speed " + fmt_num(speed) + "x"}}.dump());
    done({200, json{{"ok", true}, {"speed", speed}}.dump()});
  });
}

void LiveSession::hello(std::function<void(std::shared_ptr<const std::string>)> done) {
  post([this, done = std::move(done)](Engine&) {
    json j;
    j["type"] = "hello";
    j["scenario"] = scenario_to_json(def_);
    j["speed"] = speed_.load();
    j["paused"] = paused_.load();
    {
      std::lock_guard lock(history_mutex_);
      j["columns"] = columns_;
      j["history_every_s"] = def_.output_every_s;
      json rows = json::array();
      for (const auto& r : history_) rows.push_back(r);
      j["history"] = std::move(rows);
      json ev = json::array();
      for (const auto& [seq, text] : events_) ev.push_back(json::parse(text));
      j["events"] = std::move(ev);
    }
    done(std::make_shared<const std::string>(j.dump()));
  });
}

void LiveSession::state(std::function<void(std::string)> done) {
  post([this, done = std::move(done)](Engine&) {
    std::string s = state_json(wall_now_s());
    done(std::move(s));
  });
}

void LiveSession::scenario(std::function<void(std::string)> done) {
  post([this, done = std::move(done)](Engine&) { done(scenario_to_json(def_).dump()); });
}

std::string LiveSession::history(double from_s, double to_s, double every_s, bool csv) const {
  std::lock_guard lock(history_mutex_);
  const double out_dt = def_.output_every_s;
  const std::int64_t stride =
      every_s > 0.0 ? std::max<std::int64_t>(1, std::llround(every_s / out_dt)) : 1;
  std::string out;
  json rows = json::array();
  if (csv) {
    for (std::size_t i = 0; i < columns_.size(); ++i) out += (i ? "," : "") + columns_[i];
    out += '\n';
  }
  for (const auto& r : history_) {
    const double t = r[0];
    if (t < from_s - 1e-9 || t > to_s + 1e-9) continue;
    if (std::llround(t / out_dt) % stride != 0) continue;
    if (csv) {
      for (std::size_t i = 0; i < r.size(); ++i) {
        if (i) out += ',';
        append_exact(out, r[i]);
      }
      out += '\n';
    } else {
      rows.push_back(r);
    }
  }
  if (csv) return out;
  return json{{"columns", columns_}, {"rows", rows}}.dump();
}

std::string LiveSession::events(std::uint64_t since) const {
  std::lock_guard lock(history_mutex_);
  json arr = json::array();
  for (const auto& [seq, text] : events_)
    if (seq > since) arr.push_back(json::parse(text));
  return json{{"events", arr}}.dump();
}

}  // namespace droopline
