// The hidden script of a live exercise: timed events handed out a few steps ahead with their own
// step (so that their journal record is durable before they apply), conditional ones once their
// condition has held, and the instructor's edits.
#include "droopline/script.hpp"

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {

const char* to_string(ScriptState s) {
  switch (s) {
    case ScriptState::pending:
      return "pending";
    case ScriptState::fired:
      return "fired";
    case ScriptState::skipped:
      return "skipped";
  }
  return "?";
}

namespace {
std::int64_t step_of(double t_s, double step_s) { return std::llround(t_s / step_s); }
}  // namespace

ScriptRunner::ScriptRunner(const CheckedSystem& system, std::vector<ScriptEventDef> script) : system_(system) {
  entries_.reserve(script.size());
  for (ScriptEventDef& ev : script) {
    ScriptEntry e;
    e.def = std::move(ev);
    entries_.push_back(std::move(e));
  }
}

std::vector<ScriptFiring> ScriptRunner::due(const Engine& engine, std::int64_t lead_steps) {
  const std::int64_t now = engine.step_index();
  const double t = engine.time_s(), step_s = engine.def().step_s;
  const double dt = last_t_s_ && t > *last_t_s_ ? t - *last_t_s_ : 0.0;
  last_t_s_ = t;
  std::vector<ScriptFiring> out;
  for (ScriptEntry& e : entries_) {
    if (e.state != ScriptState::pending) continue;
    std::optional<std::int64_t> at;
    if (e.def.at_s) {
      const std::int64_t k = step_of(*e.def.at_s, step_s);
      if (k <= now + lead_steps) at = std::max(k, now);
    } else if (e.def.when) {
      const ScriptCondition& c = *e.def.when;
      if (c.kind == ScriptCondition::Kind::frequency_below) {
        const auto area = engine.find_area(c.area);
        const AreaState a = engine.area(*area);
        if (!a.collapsed && a.f_hz < c.below_hz) {
          e.held_s = e.holding ? e.held_s + dt : 0.0;  // timed from the first update that finds it below
          e.holding = true;
          if (e.held_s + 1e-9 >= c.for_s) at = now + lead_steps;
        } else {
          e.held_s = 0.0;
          e.holding = false;
        }
      } else {
        const auto tie = engine.find_tie(c.tie);
        const TieState ts = engine.tie(*tie);
        const double pmax = engine.def().ties[tie->index].pmax_mw;
        if (ts.in_service && std::fabs(ts.flow_mw) > c.above_pct / 100.0 * pmax) at = now + lead_steps;
      }
    }
    if (!at) continue;
    e.state = ScriptState::fired;
    e.fired_at_s = static_cast<double>(*at) * step_s;
    out.push_back({e.def.id, e.def.command, *at});
  }
  std::stable_sort(out.begin(), out.end(),
                   [](const ScriptFiring& a, const ScriptFiring& b) { return a.at_step < b.at_step; });
  return out;
}

ScriptEntry* ScriptRunner::find(const std::string& id, std::string& why) {
  for (ScriptEntry& e : entries_)
    if (e.def.id == id) {
      if (e.state == ScriptState::pending) return &e;
      why = "script event \"" + clip_text(id, 64) + "\" has already " +
            (e.state == ScriptState::fired ? "fired" : "been skipped");
      return nullptr;
    }
  why = "no script event \"" + clip_text(id, 64) + "\"";
  return nullptr;
}

std::optional<ScriptFiring> ScriptRunner::fire_now(const std::string& id, const Engine& engine, std::string& why) {
  ScriptEntry* e = find(id, why);
  if (!e) return std::nullopt;
  e->state = ScriptState::fired;
  e->fired_at_s = engine.time_s();
  return ScriptFiring{e->def.id, e->def.command, engine.step_index()};
}

bool ScriptRunner::skip(const std::string& id, std::string& why) {
  ScriptEntry* e = find(id, why);
  if (!e) return false;
  e->state = ScriptState::skipped;
  return true;
}

bool ScriptRunner::shift(const std::string& id, double at_s, double now_s, std::string& why) {
  ScriptEntry* e = find(id, why);
  if (!e) return false;
  if (!e->def.at_s) {
    why = "script event \"" + clip_text(id, 64) + "\" waits for a condition: only a timed event can be shifted";
    return false;
  }
  std::vector<Issue> issues;
  ScriptEventDef moved = e->def;
  moved.at_s = at_s;
  check_script_event(system_, moved, "", issues);
  if (issues.empty() && at_s < now_s)
    issues.push_back({"at_s", "must not be in the past (now " + fmt_num(now_s) + " s), got " + fmt_num(at_s)});
  if (!issues.empty()) {
    why = issues.front().text();
    return false;
  }
  e->def.at_s = at_s;
  return true;
}

bool ScriptRunner::add(ScriptEventDef event, const std::string& by, double now_s, std::string& why) {
  if (entries_.size() >= kMaxScriptEvents) {
    why = "the script holds " + std::to_string(kMaxScriptEvents) + " events already";
    return false;
  }
  std::vector<Issue> issues;
  if (event.at_s.has_value() == event.when.has_value())
    issues.push_back({"", "needs exactly one of \"at_s\" (a time) and \"when\" (a condition)"});
  check_script_event(system_, event, "", issues);
  if (event.at_s && issues.empty() && *event.at_s < now_s)
    issues.push_back({"at_s", "must not be in the past (now " + fmt_num(now_s) + " s), got " + fmt_num(*event.at_s)});
  const bool id_ok = event.id.size() <= 32 && std::all_of(event.id.begin(), event.id.end(), [](char c) {
                       return std::isalnum(static_cast<unsigned char>(c)) || c == '_' || c == '-';
                     });
  if (!id_ok)
    issues.push_back({"id", "must be 1-32 letters, digits, '_' or '-', got \"" + clip_text(event.id, 64) + "\""});
  auto taken = [&](const std::string& id) {
    return std::any_of(entries_.begin(), entries_.end(), [&](const ScriptEntry& e) { return e.def.id == id; });
  };
  if (id_ok && !event.id.empty() && taken(event.id)) issues.push_back({"id", "duplicate id \"" + event.id + "\""});
  if (!issues.empty()) {
    why.clear();
    for (const Issue& i : issues) why += (why.empty() ? "" : "; ") + i.text();
    return false;
  }
  for (std::size_t n = 1; event.id.empty(); ++n)
    if (!taken("s" + std::to_string(n))) event.id = "s" + std::to_string(n);
  ScriptEntry e;
  e.def = std::move(event);
  e.added_by = by;
  entries_.push_back(std::move(e));
  return true;
}

void ScriptRunner::rewound(std::int64_t step) {
  const double step_s = system_.def().step_s;
  for (ScriptEntry& e : entries_) {
    e.held_s = 0.0;
    e.holding = false;
    if (e.state == ScriptState::fired && e.fired_at_s && step_of(*e.fired_at_s, step_s) > step) {
      e.state = ScriptState::pending;
      e.fired_at_s.reset();
    }
  }
  last_t_s_.reset();
}

nlohmann::ordered_json script_to_json(const std::vector<ScriptEntry>& entries) {
  using json = nlohmann::ordered_json;
  json events = json::array();
  for (const ScriptEntry& e : entries) {
    json j = {{"id", e.def.id}};
    if (e.def.at_s) j["at_s"] = *e.def.at_s;
    if (e.def.when) {
      const ScriptCondition& c = *e.def.when;
      j["when"] =
          c.kind == ScriptCondition::Kind::frequency_below
              ? json{{"kind", "frequency_below"}, {"area", c.area}, {"below_hz", c.below_hz}, {"for_s", c.for_s}}
              : json{{"kind", "tie_above"}, {"tie", c.tie}, {"above_pct", c.above_pct}};
    }
    j["command"] = command_to_json(e.def.command);
    j["note"] = e.def.note;
    j["state"] = to_string(e.state);
    j["fired_at_s"] = e.fired_at_s ? json(*e.fired_at_s) : json(nullptr);
    j["added_by"] = e.added_by.empty() ? json(nullptr) : json(e.added_by);
    events.push_back(std::move(j));
  }
  return json{{"events", events}};
}

}  // namespace droopline::study
