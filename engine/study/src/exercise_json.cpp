// The exercise as a self-contained exercise file: the scenario inline (the scenario writer), script
// events with their ids (the command writer), alarm limits and objectives as filled in. The journal
// keeps it, so a debrief needs nothing but the journal.
#include <nlohmann/json.hpp>

#include "droopline/exercise.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {

namespace {

using json = nlohmann::ordered_json;

json condition_to_json(const ScriptCondition& c) {
  if (c.kind == ScriptCondition::Kind::frequency_below)
    return json{{"kind", "frequency_below"}, {"area", c.area}, {"below_hz", c.below_hz}, {"for_s", c.for_s}};
  return json{{"kind", "tie_above"}, {"tie", c.tie}, {"above_pct", c.above_pct}};
}

json alarms_to_json(const AlarmLimits& a) {
  return json{{"standard_band_hz", a.standard_band_hz},
              {"limit_band_hz", a.limit_band_hz},
              {"rocof_hz_per_s", a.rocof_hz_per_s},
              {"tie_loading_pct", a.tie_loading_pct},
              {"reserve_mw", a.reserve_mw},
              {"ace_mw", a.ace_mw},
              {"ace_for_s", a.ace_for_s},
              {"battery_energy_pct", a.battery_energy_pct}};
}

json objective_to_json(const ObjectiveDef& o) {
  json j{{"id", o.id}};
  if (!o.seat.empty()) j["seat"] = o.seat;
  j["measure"] = to_string(o.measure);
  j["target"] = o.target;
  if (o.zero_at) j["zero_at"] = *o.zero_at;
  j["weight"] = o.weight;
  if (o.measure == Measure::ace_minutes_share) j["ace_limit_mw"] = o.ace_limit_mw;
  j["label"] = o.label;
  return j;
}

}  // namespace

nlohmann::ordered_json exercise_to_json(const Exercise& exercise) {
  const ExerciseDef& d = exercise.def;
  json seats = json::array();
  for (const SeatDef& s : d.seats) seats.push_back(json{{"id", s.id}, {"name", s.name}, {"areas", s.areas}});
  json script = json::array();
  for (const ScriptEventDef& ev : d.script) {
    json je{{"id", ev.id}};
    if (ev.at_s) je["at_s"] = *ev.at_s;
    if (ev.when) je["when"] = condition_to_json(*ev.when);
    je["command"] = command_to_json(ev.command);
    if (!ev.note.empty()) je["note"] = ev.note;
    script.push_back(std::move(je));
  }
  json objectives = json::array();
  for (const ObjectiveDef& o : d.objectives) objectives.push_back(objective_to_json(o));
  return json{{"name", d.name},
              {"briefing", d.briefing},
              {"time_limit_s", d.time_limit_s},
              {"scenario", scenario_to_json(exercise.system.def())},
              {"seats", seats},
              {"script", script},
              {"alarms", alarms_to_json(d.alarms)},
              {"objectives", objectives}};
}

}  // namespace droopline::study
