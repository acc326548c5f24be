// Reading an exercise file: the JSON shape with `path: message` errors (the scenario reader's
// field Reader), the scenario (inline, or a file beside the exercise), seats, the hidden script
// (each command through the one static checker, `resolve`), alarm thresholds and the time limit.
#include "droopline/exercise.hpp"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <map>
#include <set>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"
#include "json_fields.hpp"

namespace droopline::study {

using namespace droopline::detail;  // the JSON field Reader (json_fields.hpp)

namespace {

// Bounds of an exercise file: what a training session can use, generously. Everything a client
// sends over HTTP passes through them.
constexpr std::size_t kMaxSeats = 32;
constexpr std::size_t kMaxSeatAreas = 1000;
constexpr std::size_t kMaxNameChars = 200;
constexpr std::size_t kMaxBriefingChars = 20000;
constexpr std::size_t kMaxNoteChars = 1000;
constexpr double kMaxTimeS = 1e7;  // the scenario loader's bound on duration_s (about 115 days)
constexpr double kMaxHoldS = 1e4;  // the loader's bound on any delay
constexpr std::size_t kMaxObjectives = 100;

bool valid_short_id(const std::string& id) {
  if (id.empty() || id.size() > 32) return false;
  return std::all_of(id.begin(), id.end(), [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' || c == '-';
  });
}

std::string quote_id(const std::string& s) { return "\"" + clip_text(s, 64) + "\""; }

void text_field(Reader& r, const ijson& j, const std::string& key, const std::string& path, std::string& out,
                std::size_t max_chars, bool required) {
  r.string(j, key, path, out, required);
  if (out.size() > max_chars) {
    r.error(join(path, key),
            "must be at most " + std::to_string(max_chars) + " characters, got " + std::to_string(out.size()));
    out.clear();
  }
}

void read_condition(Reader& r, const ijson& j, const std::string& p, ScriptCondition& c) {
  if (!j.is_object()) {
    r.error(p, std::string("must be an object, got ") + type_name(j));
    return;
  }
  static const std::vector<std::pair<const char*, ScriptCondition::Kind>> kKinds = {
      {"frequency_below", ScriptCondition::Kind::frequency_below}, {"tie_above", ScriptCondition::Kind::tie_above}};
  if (!r.choice(j, "kind", p, kKinds, c.kind, true)) return;
  if (c.kind == ScriptCondition::Kind::frequency_below) {
    if (!r.object(j, p, {"kind", "area", "below_hz", "for_s"})) return;
    r.string(j, "area", p, c.area, true);
    r.number(j, "below_hz", p, c.below_hz, true);
    r.number(j, "for_s", p, c.for_s);
  } else {
    if (!r.object(j, p, {"kind", "tie", "above_pct"})) return;
    r.string(j, "tie", p, c.tie, true);
    r.number(j, "above_pct", p, c.above_pct, true);
  }
}

// One script event's fields (shape and types; references and bounds: check_script_event).
ScriptEventDef read_event(Reader& r, const ijson& j, const std::string& p, bool with_id) {
  ScriptEventDef ev;
  if (with_id ? !r.object(j, p, {"id", "at_s", "when", "command", "note"})
              : !r.object(j, p, {"at_s", "when", "command", "note"}))
    return ev;
  if (with_id) r.string(j, "id", p, ev.id);
  r.number(j, "at_s", p, ev.at_s);
  if (const ijson* w = r.field(j, "when", p, false)) {
    ScriptCondition c;
    read_condition(r, *w, join(p, "when"), c);
    ev.when = c;
  }
  if (j.contains("at_s") == j.contains("when"))
    r.error(p, "needs exactly one of \"at_s\" (a time) and \"when\" (a condition)");
  if (const ijson* c = r.field(j, "command", p, true))
    if (auto cmd = read_command(r, *c, join(p, "command"), false, nullptr)) ev.command = *cmd;
  text_field(r, j, "note", p, ev.note, kMaxNoteChars, false);
  return ev;
}

void read_alarms(Reader& r, const ijson& j, const std::string& p, AlarmLimits& a) {
  if (!r.object(j, p,
                {"standard_band_hz", "limit_band_hz", "rocof_hz_per_s", "tie_loading_pct", "reserve_mw", "ace_mw",
                 "ace_for_s", "battery_energy_pct"}))
    return;
  r.number(j, "standard_band_hz", p, a.standard_band_hz);
  r.number(j, "limit_band_hz", p, a.limit_band_hz);
  r.number(j, "rocof_hz_per_s", p, a.rocof_hz_per_s);
  r.number(j, "tie_loading_pct", p, a.tie_loading_pct);
  r.number(j, "reserve_mw", p, a.reserve_mw);
  r.number(j, "ace_mw", p, a.ace_mw);
  r.number(j, "ace_for_s", p, a.ace_for_s);
  r.number(j, "battery_energy_pct", p, a.battery_energy_pct);
}

// An optional array of at most `max` entries, each read by `read_one(entry, "key[i]")`.
template <class T, class F>
void read_list(Reader& r, const ijson& j, const char* key, std::size_t max, const char* what, std::vector<T>& out,
               F read_one) {
  const ijson* list = r.array(j, key, "", false);
  if (!list) return;
  if (list->size() > max) {
    r.error(key, "at most " + std::to_string(max) + " " + what + ", got " + std::to_string(list->size()));
    return;
  }
  for (std::size_t i = 0; i < list->size(); ++i)
    out.push_back(read_one((*list)[i], std::string(key) + "[" + std::to_string(i) + "]"));
}

// One objective's fields (shape and types; references and bounds: check_objectives).
ObjectiveDef read_objective(Reader& r, const ijson& j, const std::string& p) {
  ObjectiveDef o;
  if (!r.object(j, p, {"id", "seat", "measure", "target", "zero_at", "weight", "ace_limit_mw", "label"})) return o;
  r.string(j, "id", p, o.id);
  r.string(j, "seat", p, o.seat);
  std::string measure;
  r.string(j, "measure", p, measure, true);
  const std::optional<Measure> m = measure_from(measure);
  if (m)
    o.measure = *m;
  else if (j.contains("measure") && j.at("measure").is_string())
    r.error(p + ".measure", "unknown measure " + quote_id(measure) + " (one of: " + measure_names() + ")");
  r.number(j, "target", p, o.target, true);
  r.number(j, "zero_at", p, o.zero_at);
  r.number(j, "weight", p, o.weight);
  r.number(j, "ace_limit_mw", p, o.ace_limit_mw);
  if (j.contains("ace_limit_mw") && m && *m != Measure::ace_minutes_share)
    r.error(p + ".ace_limit_mw", "only for measure \"ace_minutes_share\"");
  text_field(r, j, "label", p, o.label, kMaxNameChars, false);
  return o;
}

void within(std::vector<Issue>& out, const std::string& path, double v, double lo, double hi, bool lo_open) {
  const bool ok = std::isfinite(v) && (lo_open ? v > lo : v >= lo) && v <= hi;
  if (!ok)
    out.push_back({path,
                   std::string("must lie within ") + (lo_open ? "(" : "[") + fmt_num(lo) + ", " + fmt_num(hi) +
                       "], got " + fmt_num(v),
                   false});
}

void check_alarms(const AlarmLimits& a, double f0, std::vector<Issue>& out) {
  within(out, "alarms.standard_band_hz", a.standard_band_hz, 0.0, 0.2 * f0, true);
  within(out, "alarms.limit_band_hz", a.limit_band_hz, 0.0, 0.2 * f0, true);
  if (std::isfinite(a.standard_band_hz) && std::isfinite(a.limit_band_hz) && a.limit_band_hz < a.standard_band_hz)
    out.push_back(
        {"alarms.limit_band_hz",
         "must be at least standard_band_hz (" + fmt_num(a.standard_band_hz) + "), got " + fmt_num(a.limit_band_hz),
         false});
  within(out, "alarms.rocof_hz_per_s", a.rocof_hz_per_s, 0.0, 100.0, true);
  within(out, "alarms.tie_loading_pct", a.tie_loading_pct, 0.0, 100.0, true);
  within(out, "alarms.reserve_mw", a.reserve_mw, 0.0, 2e6, false);
  within(out, "alarms.ace_mw", a.ace_mw, 0.0, 2e6, false);
  within(out, "alarms.ace_for_s", a.ace_for_s, 0.0, kMaxHoldS, false);
  within(out, "alarms.battery_energy_pct", a.battery_energy_pct, 0.0, 100.0, false);
}

void check_seats(const std::vector<SeatDef>& seats, const SystemIndex& index, std::vector<Issue>& out) {
  std::map<std::string, std::size_t> ids;
  std::map<std::string, std::size_t> owner;  // area -> seat
  for (std::size_t i = 0; i < seats.size(); ++i) {
    const std::string p = "seats[" + std::to_string(i) + "]";
    const SeatDef& s = seats[i];
    if (!valid_short_id(s.id))
      out.push_back({p + ".id", "must be 1-32 letters, digits, '_' or '-', got " + quote_id(s.id), false});
    else if (auto [it, fresh] = ids.emplace(s.id, i); !fresh)
      out.push_back(
          {p + ".id", "duplicate id " + quote_id(s.id) + " (also seats[" + std::to_string(it->second) + "])", false});
    if (s.areas.empty()) out.push_back({p + ".areas", "must name at least one area", false});
    for (std::size_t k = 0; k < s.areas.size(); ++k) {
      const std::string ap = p + ".areas[" + std::to_string(k) + "]";
      if (!index.area(s.areas[k])) {
        out.push_back({ap, "no area " + quote_id(s.areas[k]) + " in the scenario", false});
        continue;
      }
      auto [it, fresh] = owner.emplace(s.areas[k], i);
      if (!fresh)
        out.push_back({ap,
                       it->second == i ? "area " + quote_id(s.areas[k]) + " is listed twice"
                                       : "area " + quote_id(s.areas[k]) + " already belongs to seats[" +
                                             std::to_string(it->second) + "]",
                       false});
    }
  }
}

// Objectives against the seats: references, bounds, unique ids; then the defaults filled in (ids
// o1, o2, ...; zero points; labels), so that the exercise as written back says what is scored.
void check_objectives(std::vector<ObjectiveDef>& objs, const std::vector<SeatDef>& seats, std::vector<Issue>& out) {
  constexpr double kMaxValue = 1e9;  // beyond any measure's sensible range
  std::set<std::string> ids;
  std::string seat_list;
  for (const SeatDef& s : seats) seat_list += (seat_list.empty() ? "" : ", ") + s.id;
  for (std::size_t i = 0; i < objs.size(); ++i) {
    const std::string p = "objectives[" + std::to_string(i) + "]";
    ObjectiveDef& o = objs[i];
    if (!o.id.empty()) {
      if (!valid_short_id(o.id))
        out.push_back({p + ".id", "must be 1-32 letters, digits, '_' or '-', got " + quote_id(o.id), false});
      else if (!ids.insert(o.id).second)
        out.push_back({p + ".id", "duplicate id " + quote_id(o.id), false});
    }
    if (!o.seat.empty() && std::none_of(seats.begin(), seats.end(), [&](const SeatDef& s) { return s.id == o.seat; }))
      out.push_back({p + ".seat", "no seat " + quote_id(o.seat) + " (seats: " + seat_list + ")", false});
    // Shares are of 100; the rest are times, energies and powers that cannot be negative.
    const bool share = o.measure == Measure::ace_minutes_share || o.measure == Measure::tie_loading_max_pct;
    within(out, p + ".target", o.target, 0.0, share ? 100.0 : kMaxValue, false);
    within(out, p + ".weight", o.weight, 0.0, 1e6, true);
    within(out, p + ".ace_limit_mw", o.ace_limit_mw, 0.0, 2e6, false);
    if (o.zero_at) within(out, p + ".zero_at", *o.zero_at, 0.0, kMaxValue, false);
    if (!std::isfinite(o.target) || (o.zero_at && !std::isfinite(*o.zero_at))) continue;
    const double zero = o.zero_at.value_or(default_zero_at(o.measure, o.target));
    const bool higher = higher_is_better(o.measure);
    if (higher ? !(zero < o.target) : !(zero > o.target))
      out.push_back({p + (o.zero_at ? ".zero_at" : ".target"),
                     std::string(o.zero_at ? "" : "with no zero_at, the default zero point ") + fmt_num(zero) +
                         " must be " + (higher ? "below" : "above") + " the target " + fmt_num(o.target) + " (" +
                         to_string(o.measure) + ": " + (higher ? "higher" : "lower") + " is better)",
                     false});
  }
  for (std::size_t i = 0, n = 1; i < objs.size(); ++i) {
    ObjectiveDef& o = objs[i];
    if (o.id.empty()) {
      while (ids.count("o" + std::to_string(n))) ++n;
      o.id = "o" + std::to_string(n);
      ids.insert(o.id);
    }
    if (!o.zero_at) o.zero_at = default_zero_at(o.measure, o.target);
    if (o.label.empty()) o.label = default_label(o.measure);
  }
}

// The scenario: inline, or a path relative to `base_dir` that stays within it (no absolute path,
// no `..`): an exercise folder can be handed around whole, and a file cannot reach elsewhere.
std::optional<CheckedSystem> read_scenario(const ijson& j, const std::string& base_dir, ExerciseDef& def,
                                           std::vector<Issue>& out) {
  const ijson* s = nullptr;
  if (auto it = j.find("scenario"); it != j.end()) s = &*it;
  if (!s) {
    out.push_back({"scenario", "required", false});
    return std::nullopt;
  }
  LoadResult loaded;
  if (s->is_object()) {
    loaded = parse_scenario(s->dump());  // passed the gate already: depth and size are bounded
  } else if (s->is_string()) {
    def.scenario_path = s->get<std::string>();
    const std::filesystem::path rel(def.scenario_path);
    if (base_dir.empty()) {
      out.push_back({"scenario", "must be given inline (an object) here, not as a path", false});
      return std::nullopt;
    }
    const bool escapes = std::any_of(rel.begin(), rel.end(), [](const auto& part) { return part == ".."; });
    if (def.scenario_path.empty() || rel.is_absolute() || rel.has_root_name() || escapes) {
      out.push_back(
          {"scenario",
           "must be a path relative to the exercise file's folder, without \"..\", got " + quote_id(def.scenario_path),
           false});
      return std::nullopt;
    }
    loaded = load_scenario_file((std::filesystem::path(base_dir) / rel).string());
  } else {
    out.push_back({"scenario", std::string("must be an object or a path, got ") + type_name(*s), false});
    return std::nullopt;
  }
  for (Issue& i : loaded.issues) {
    i.path = i.path.empty() || i.path == "file" || i.path == "json" ? "scenario" : "scenario." + i.path;
    out.push_back(std::move(i));
  }
  return loaded.system;
}

}  // namespace

void check_script_event(const CheckedSystem& system, const ScriptEventDef& ev, const std::string& path,
                        std::vector<Issue>& issues) {
  const SystemDef& def = system.def();
  if (ev.at_s) within(issues, join(path, "at_s"), *ev.at_s, 0.0, kMaxTimeS, false);
  if (ev.when) {
    const ScriptCondition& c = *ev.when;
    const std::string wp = join(path, "when");
    if (c.kind == ScriptCondition::Kind::frequency_below) {
      if (!system.index().area(c.area)) issues.push_back({wp + ".area", "no area " + quote_id(c.area), false});
      // The same range as a shedding stage's pickup: below nominal, above zero.
      if (!(std::isfinite(c.below_hz) && c.below_hz > 0.0 && c.below_hz < def.nominal_hz))
        issues.push_back(
            {wp + ".below_hz",
             "must lie between 0 and nominal_hz (" + fmt_num(def.nominal_hz) + "), got " + fmt_num(c.below_hz), false});
      within(issues, wp + ".for_s", c.for_s, 0.0, kMaxHoldS, false);
    } else {
      if (!system.index().tie(c.tie)) issues.push_back({wp + ".tie", "no tie " + quote_id(c.tie), false});
      within(issues, wp + ".above_pct", c.above_pct, 0.0, 100.0, true);
    }
  }
  resolve(system, ev.command, join(path, "command"), issues);
}

std::optional<ScriptEventDef> parse_script_event(std::string_view json_text, std::vector<Issue>& issues) {
  auto j = parse_untrusted_json(json_text, issues, JsonLimits{16, 64u << 10});
  if (!j) return std::nullopt;
  const std::size_t before = issues.size();
  Reader r(issues);
  ScriptEventDef ev = read_event(r, *j, "", true);
  if (issues.size() != before) return std::nullopt;
  return ev;
}

ExerciseLoad parse_exercise(std::string_view json_text, const std::string& base_dir) {
  ExerciseLoad out;
  auto j = parse_untrusted_json(json_text, out.issues);
  if (!j) return out;
  Reader r(out.issues);
  ExerciseDef def;
  if (!r.object(
          *j, "",
          {"name", "briefing", "scenario", "seats", "script", "alarms", "time_limit_s", "description", "objectives"}))
    return out;
  text_field(r, *j, "name", "", def.name, kMaxNameChars, true);
  text_field(r, *j, "briefing", "", def.briefing, kMaxBriefingChars, true);
  std::string description;
  text_field(r, *j, "description", "", description, kMaxBriefingChars, false);
  r.number(*j, "time_limit_s", "", def.time_limit_s, true);
  if (const ijson* seats = r.array(*j, "seats", "", true)) {
    if (seats->size() > kMaxSeats)
      r.error("seats", "at most " + std::to_string(kMaxSeats) + " seats, got " + std::to_string(seats->size()));
    else
      for (std::size_t i = 0; i < seats->size(); ++i) {
        const std::string p = "seats[" + std::to_string(i) + "]";
        const ijson& s = (*seats)[i];
        SeatDef seat;
        if (r.object(s, p, {"id", "name", "areas"})) {
          r.string(s, "id", p, seat.id, true);
          text_field(r, s, "name", p, seat.name, kMaxNameChars, true);
          if (const ijson* areas = r.array(s, "areas", p, true)) {
            if (areas->size() > kMaxSeatAreas)
              r.error(p + ".areas",
                      "at most " + std::to_string(kMaxSeatAreas) + " areas, got " + std::to_string(areas->size()));
            for (std::size_t k = 0; k < areas->size() && k < kMaxSeatAreas; ++k) {
              if ((*areas)[k].is_string())
                seat.areas.push_back((*areas)[k].get<std::string>());
              else
                r.error(p + ".areas[" + std::to_string(k) + "]",
                        std::string("must be a string, got ") + type_name((*areas)[k]));
            }
          }
        }
        def.seats.push_back(std::move(seat));
      }
  }
  read_list(r, *j, "script", kMaxScriptEvents, "events", def.script,
            [&](const ijson& e, const std::string& p) { return read_event(r, e, p, true); });
  read_list(r, *j, "objectives", kMaxObjectives, "objectives", def.objectives,
            [&](const ijson& e, const std::string& p) { return read_objective(r, e, p); });
  AlarmLimits file_alarms;  // zero: left out
  bool has_alarms = false;
  if (const ijson* a = r.field(*j, "alarms", "", false)) {
    read_alarms(r, *a, "alarms", file_alarms);
    has_alarms = a->is_object();
  }
  std::optional<CheckedSystem> system = read_scenario(*j, base_dir, def, out.issues);
  if (has_errors(out.issues)) return out;  // shape errors first: the checks below would only echo them

  std::vector<Issue>& issues = out.issues;
  within(issues, "time_limit_s", def.time_limit_s, 0.0, kMaxTimeS, true);
  check_seats(def.seats, system->index(), issues);
  def.alarms = alarm_limits_for(system->def().nominal_hz);
  if (has_alarms) {
    const ijson& a = (*j)["alarms"];
    auto over = [&](const char* key, double from, double& into) {
      if (a.contains(key)) into = from;
    };
    over("standard_band_hz", file_alarms.standard_band_hz, def.alarms.standard_band_hz);
    over("limit_band_hz", file_alarms.limit_band_hz, def.alarms.limit_band_hz);
    over("rocof_hz_per_s", file_alarms.rocof_hz_per_s, def.alarms.rocof_hz_per_s);
    over("tie_loading_pct", file_alarms.tie_loading_pct, def.alarms.tie_loading_pct);
    over("reserve_mw", file_alarms.reserve_mw, def.alarms.reserve_mw);
    over("ace_mw", file_alarms.ace_mw, def.alarms.ace_mw);
    over("ace_for_s", file_alarms.ace_for_s, def.alarms.ace_for_s);
    over("battery_energy_pct", file_alarms.battery_energy_pct, def.alarms.battery_energy_pct);
  }
  check_alarms(def.alarms, system->def().nominal_hz, issues);
  std::set<std::string> script_ids;
  for (std::size_t i = 0; i < def.script.size(); ++i) {
    const std::string p = "script[" + std::to_string(i) + "]";
    ScriptEventDef& ev = def.script[i];
    if (!ev.id.empty()) {
      if (!valid_short_id(ev.id))
        issues.push_back({p + ".id", "must be 1-32 letters, digits, '_' or '-', got " + quote_id(ev.id), false});
      else if (!script_ids.insert(ev.id).second)
        issues.push_back({p + ".id", "duplicate id " + quote_id(ev.id), false});
    }
    check_script_event(*system, ev, p, issues);
  }
  for (std::size_t i = 0, n = 1; i < def.script.size(); ++i) {  // ids for those without: s1, s2, ... unused ones
    if (!def.script[i].id.empty()) continue;
    while (script_ids.count("s" + std::to_string(n))) ++n;
    def.script[i].id = "s" + std::to_string(n);
    script_ids.insert(def.script[i].id);
  }
  check_objectives(def.objectives, def.seats, issues);
  std::stable_partition(issues.begin(), issues.end(), [](const Issue& i) { return !i.warning; });
  if (has_errors(issues)) return out;
  out.exercise = Exercise{std::move(def), std::move(*system)};
  return out;
}

ExerciseLoad load_exercise_file(const std::string& path) {
  ExerciseLoad out;
  const std::optional<std::string> text = read_text_file(path, out.issues);
  if (!text) return out;
  std::string base = std::filesystem::path(path).parent_path().string();
  if (base.empty()) base = ".";
  return parse_exercise(*text, base);
}

bool looks_like_exercise(std::string_view json_text) {
  // A text that holds neither key name, nor any \u escape that could spell one, is no exercise:
  // a fleet's scenario is not parsed twice (here, then to be read) only to find that out.
  const auto has = [&](std::string_view s) { return detail::find_text(json_text, s) != std::string_view::npos; };
  if (!has("\"seats\"") && !has("\"script\"") && !has("\\u")) return false;
  // Only the root's keys matter: a fleet's units are dropped as they are parsed, not kept.
  std::vector<Issue> ignored;
  const StreamedArray drop_units{"units", [](nlohmann::ordered_json&&, std::size_t) {}, {}};
  auto j = parse_untrusted_json(json_text, ignored, JsonLimits{}, drop_units);
  return j && j->is_object() && (j->contains("seats") || j->contains("script"));
}

}  // namespace droopline::study
