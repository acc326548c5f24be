// The live session's save points, restores and rewinds (study::Timeline), journalled before they happen.
#include <spdlog/spdlog.h>

#include <cmath>
#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "live_internal.hpp"
#include "live_session.hpp"
#include "typed_text.hpp"

namespace droopline {
namespace {
using json = nlohmann::ordered_json;
}  // namespace

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
    auto rows = store_.copy_rows(kSavedRowsBytes - saved_rows_bytes_);
    if (rows) saved_rows_bytes_ += rows->size() * sizeof(double);
    saved_shown_[id].rows = std::move(rows);
    const json which{{"id", id}, {"name", name}};
    // In an exercise the trainees must not learn that the instructor expects something: a save
    // point goes to the instructor's list (GET /api/v1/savepoints), not to everyone's log.
    if (!exercise_)
      push_event(json{{"type", "event"},
                      {"t_s", sp.t_s},
                      {"kind", "savepoint"},
                      {"text", "save point \"" + name + "\" kept at t = " + fmt_fixed(sp.t_s, 2) + " s"},
                      {"by", author},
                      {"savepoint", which}});
    saved_shown_[id].events = store_.events().entries();  // its own entry included
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
    hooks.applied = [pending](study::SavedState& s, const study::LoggedActions& logged) {
      for (Notice& n : s.engine->take_notices()) pending->push_back(std::move(n));
      live_detail::feed_actions(s.objectives, logged.author, s.engine->time_s());
    };
    hooks.stepped = [this, pending](study::SavedState& s) {
      for (Notice& n : s.engine->take_notices()) pending->push_back(std::move(n));
      live_detail::feed_exercise(*s.engine, s.alarms, s.script, s.objectives, *pending, lead_steps(), true);
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
  objectives_ = std::move(state.objectives);
  if (script_) script_->rewound(engine_->step_index());  // its firings refused above are due again
  checkpoint_ = engine_->clone();
  halted_.clear();  // the state gone back to is a good one
  if (savepoint) {  // its own course's rows (none kept: from here on) and events
    SavedShown& kept = saved_shown_[savepoint->id];
    store_.put_rows(kept.rows);
    store_.events().put_entries(kept.events);
  } else {
    store_.drop_after(t_s);
    store_.events().drop_after(t_s);
  }
  rebase();
  // In an exercise everyone sees that time went back, not the name the instructor gave the point.
  const bool named = savepoint && !exercise_;
  const json full = savepoint ? json{{"id", savepoint->id}, {"name", savepoint->name}} : json(nullptr);
  const json which = savepoint && !named ? json{{"id", savepoint->id}} : full;
  const std::string text =
      named ? "save point \"" + savepoint->name + "\" restored: back from t = " + fmt_fixed(from_t_s, 2) +
                  " s to t = " + fmt_fixed(t_s, 2) + " s"
            : "rewound from t = " + fmt_fixed(from_t_s, 2) + " s to t = " + fmt_fixed(t_s, 2) + " s";
  push_event(json{{"type", "restored"},
                  {"t_s", t_s},
                  {"from_t_s", from_t_s},
                  {"by", author},
                  {"savepoint", which},
                  {"text", text}});
  done(accepted(
      json{{"ok", true}, {"t_s", t_s}, {"from_t_s", from_t_s}, {"savepoint", full}, {"refused_commands", waiting}}));
}

}  // namespace droopline
