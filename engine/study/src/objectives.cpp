// The objective monitor: after each step it reads the engine (frequencies, ACE, shed load, reserve,
// tie flows) and keeps, for every objective and seat it applies to, the running figure its measure
// needs. Alarm response times are worked out when scores are asked for, from the alarm monitor and
// the seat's own action times. Definitions: README "Objectives".
#include "droopline/objectives.hpp"

#include <algorithm>
#include <cmath>

namespace droopline::study {

namespace {

struct MeasureInfo {
  Measure measure;
  const char* name;
  const char* unit;
  bool higher_better;
  double zero_scale;  // the zero point of a zero target (lower-is-better measures)
  const char* label;
};

// One table for names, units, direction and default zero points.
constexpr MeasureInfo kMeasures[] = {
    {Measure::time_outside_standard_s, "time_outside_standard_s", "s", false, 60.0, "time outside the standard band"},
    {Measure::time_outside_limit_s, "time_outside_limit_s", "s", false, 60.0, "time outside the limit band"},
    {Measure::largest_deviation_hz, "largest_deviation_hz", "Hz", false, 0.5, "largest frequency deviation"},
    {Measure::return_to_standard_s, "return_to_standard_s", "s", false, 60.0, "longest return to the standard band"},
    {Measure::ace_minutes_share, "ace_minutes_share", "%", true, 0.0, "minute ACE share"},
    {Measure::unserved_energy_mwh, "unserved_energy_mwh", "MWh", false, 1.0, "unserved energy"},
    {Measure::lowest_reserve_mw, "lowest_reserve_mw", "MW", true, 0.0, "lowest upward reserve"},
    {Measure::tie_loading_max_pct, "tie_loading_max_pct", "%", false, 100.0, "highest tie loading"},
    {Measure::alarm_to_action_s, "alarm_to_action_s", "s", false, 60.0, "mean time from alarm to action"},
    {Measure::alarm_to_ack_s, "alarm_to_ack_s", "s", false, 60.0, "mean time from alarm to acknowledgement"},
};

const MeasureInfo& info(Measure m) {
  for (const MeasureInfo& i : kMeasures)
    if (i.measure == m) return i;
  return kMeasures[0];
}

bool concerns(const Alarm& a, const std::vector<std::uint32_t>& areas) {
  return std::any_of(a.areas.begin(), a.areas.end(),
                     [&](std::uint32_t x) { return std::find(areas.begin(), areas.end(), x) != areas.end(); });
}

}  // namespace

const char* to_string(Measure m) { return info(m).name; }

std::optional<Measure> measure_from(std::string_view name) {
  for (const MeasureInfo& i : kMeasures)
    if (name == i.name) return i.measure;
  return std::nullopt;
}

bool higher_is_better(Measure m) { return info(m).higher_better; }
const char* unit_of(Measure m) { return info(m).unit; }
std::string default_label(Measure m) { return info(m).label; }

double default_zero_at(Measure m, double target) {
  if (higher_is_better(m)) return target / 2.0;
  return target > 0.0 ? 2.0 * target : info(m).zero_scale;
}

std::string measure_names() {
  std::string out;
  for (const MeasureInfo& i : kMeasures) out += (out.empty() ? "" : ", ") + std::string(i.name);
  return out;
}

ObjectiveMonitor::ObjectiveMonitor(const Exercise& exercise) : defs_(exercise.def.objectives) {
  const SystemDef& def = exercise.system.def();
  const SystemIndex& index = exercise.system.index();
  limits_ = exercise.def.alarms;
  f0_hz_ = def.nominal_hz;
  for (const UnitDef& u : def.units) unit_area_.push_back(static_cast<std::uint32_t>(index.areas.find(u.area)->second));
  for (const TieDef& t : def.ties) tie_pmax_mw_.push_back(t.pmax_mw);
  for (const SeatDef& sd : exercise.def.seats) {
    Seat s;
    s.id = sd.id;
    for (const std::string& a : sd.areas) s.areas.push_back(static_cast<std::uint32_t>(index.areas.find(a)->second));
    for (std::size_t t = 0; t < def.ties.size(); ++t) {
      const auto from = static_cast<std::uint32_t>(index.areas.find(def.ties[t].from)->second);
      const auto to = static_cast<std::uint32_t>(index.areas.find(def.ties[t].to)->second);
      if (std::count(s.areas.begin(), s.areas.end(), from) || std::count(s.areas.begin(), s.areas.end(), to))
        s.ties.push_back(static_cast<std::uint32_t>(t));
    }
    seats_.push_back(std::move(s));
  }
  // Seat by seat, each in the order of the objectives: the order scores() reports them in.
  for (std::size_t s = 0; s < seats_.size(); ++s)
    for (std::size_t d = 0; d < defs_.size(); ++d) {
      if (!defs_[d].seat.empty() && defs_[d].seat != seats_[s].id) continue;
      Track t;
      t.def = d;
      t.seat = s;
      if (defs_[d].measure == Measure::ace_minutes_share)
        for (std::uint32_t a : seats_[s].areas) {
          t.ace_limit_mw.push_back(defs_[d].ace_limit_mw > 0.0 ? defs_[d].ace_limit_mw
                                                               : area_ace_limit_mw(def, a, limits_));
          t.ace_sum_mw.push_back(0.0);
        }
      tracks_.push_back(std::move(t));
    }
}

void ObjectiveMonitor::update(const Engine& engine, const AlarmMonitor* /*alarms*/) {
  const double t = engine.time_s();
  const double dt = std::max(0.0, t - t_s_);  // the step just taken (rectangles at its end)
  t_s_ = t;
  // Every area's reserve once per step (a sum over the fleet), for all the reserve objectives.
  std::vector<double> reserve;
  for (Track& tr : tracks_) {
    if (defs_[tr.def].measure == Measure::lowest_reserve_mw && reserve.empty())
      reserve = upward_reserve_mw(engine, unit_area_);
    update_track(tr, engine, dt, reserve);
  }
}

void ObjectiveMonitor::update_track(Track& tr, const Engine& engine, double dt_s, const std::vector<double>& reserve) {
  const Seat& seat = seats_[tr.seat];
  const Measure m = defs_[tr.def].measure;
  const double t = engine.time_s();
  // The seat's worst frequency deviation; a collapsed area (no frequency left) counts as beyond
  // every band.
  double worst = 0.0;
  bool collapsed = false;
  for (std::uint32_t a : seat.areas) {
    const AreaState st = engine.area(AreaId{a});
    if (st.collapsed)
      collapsed = true;
    else
      worst = std::max(worst, std::fabs(st.f_hz - f0_hz_));
  }
  auto add = [&](double v) { tr.value = tr.value.value_or(0.0) + v; };
  switch (m) {
    case Measure::time_outside_standard_s:
    case Measure::time_outside_limit_s: {
      const double band = m == Measure::time_outside_standard_s ? limits_.standard_band_hz : limits_.limit_band_hz;
      add(collapsed || worst > band ? dt_s : 0.0);
      break;
    }
    case Measure::largest_deviation_hz:
      tr.value = std::max(tr.value.value_or(0.0), worst);
      break;
    case Measure::return_to_standard_s: {
      const std::vector<Disturbance>& ds = engine.disturbances();
      for (std::size_t i = tr.recoveries.size(); i < ds.size(); ++i) {
        // Only disturbances in the seat's island(s) concern it.
        const bool ours = std::any_of(ds[i].areas.begin(), ds[i].areas.end(), [&](std::uint32_t a) {
          return std::find(seat.areas.begin(), seat.areas.end(), a) != seat.areas.end();
        });
        Recovery r;
        r.at_s = ds[i].at_s;
        if (!ours) r.back_s = -1.0;  // placeholder kept so indices follow the engine's list
        tr.recoveries.push_back(r);
      }
      const bool within = !collapsed && worst <= limits_.standard_band_hz;
      for (Recovery& r : tr.recoveries) {
        if (r.back_s) continue;
        if (!within) {
          r.within_since_s.reset();
          continue;
        }
        if (!r.within_since_s) r.within_since_s = t;
        if (t - *r.within_since_s + 1e-9 >= kSettledHoldS) r.back_s = *r.within_since_s - r.at_s;
      }
      break;
    }
    case Measure::ace_minutes_share: {
      const auto k = static_cast<std::int64_t>(std::floor(t / kAceMinuteS + 1e-9));
      if (tr.minute >= 0 && k != tr.minute && tr.minute_steps > 0) {
        bool pass = true;
        for (std::size_t i = 0; i < tr.ace_sum_mw.size(); ++i)
          pass = pass && std::fabs(tr.ace_sum_mw[i] / static_cast<double>(tr.minute_steps)) <= tr.ace_limit_mw[i];
        ++tr.minutes;
        tr.passed += pass ? 1 : 0;
        std::fill(tr.ace_sum_mw.begin(), tr.ace_sum_mw.end(), 0.0);
        tr.minute_steps = 0;
      }
      tr.minute = k;
      for (std::size_t i = 0; i < seat.areas.size(); ++i) tr.ace_sum_mw[i] += engine.area(AreaId{seat.areas[i]}).ace_mw;
      ++tr.minute_steps;
      if (tr.minutes > 0) tr.value = 100.0 * static_cast<double>(tr.passed) / static_cast<double>(tr.minutes);
      break;
    }
    case Measure::unserved_energy_mwh: {
      double shed = 0.0;
      for (std::uint32_t a : seat.areas) shed += engine.area(AreaId{a}).shed_mw;
      add(shed * dt_s / 3600.0);
      break;
    }
    case Measure::lowest_reserve_mw: {
      for (std::uint32_t a : seat.areas) tr.value = std::min(tr.value.value_or(reserve[a]), reserve[a]);
      break;
    }
    case Measure::tie_loading_max_pct: {
      double most = 0.0;
      for (std::uint32_t ti : seat.ties) {
        const TieState ts = engine.tie(TieId{ti});
        if (ts.in_service) most = std::max(most, 100.0 * std::fabs(ts.flow_mw) / tie_pmax_mw_[ti]);
      }
      tr.value = std::max(tr.value.value_or(0.0), most);
      break;
    }
    case Measure::alarm_to_action_s:
    case Measure::alarm_to_ack_s:
      break;  // worked out from the alarms when scored
  }
}

void ObjectiveMonitor::actions_applied(const std::string& author, double t_s) {
  for (Seat& s : seats_)
    if (s.id == author) s.action_s.push_back(t_s);
}

ObjectiveResult ObjectiveMonitor::result(const Track& tr, const AlarmMonitor* alarms) const {
  const ObjectiveDef& d = defs_[tr.def];
  const Seat& seat = seats_[tr.seat];
  ObjectiveResult r;
  r.objective = d.id;
  r.seat = seat.id;
  r.measure = d.measure;
  r.label = d.label;
  r.unit = unit_of(d.measure);
  r.target = d.target;
  r.zero_at = d.zero_at.value_or(default_zero_at(d.measure, d.target));
  r.weight = d.weight;
  r.measured = tr.value;
  if (d.measure == Measure::return_to_standard_s) {
    for (const Recovery& rec : tr.recoveries)
      if (!rec.back_s || *rec.back_s >= 0.0) r.samples.push_back(rec.back_s.value_or(t_s_ - rec.at_s));
  } else if ((d.measure == Measure::alarm_to_action_s || d.measure == Measure::alarm_to_ack_s) && alarms) {
    for (const Alarm& a : alarms->alarms()) {
      if (!concerns(a, seat.areas)) continue;
      std::optional<double> done;
      if (d.measure == Measure::alarm_to_ack_s) {
        // Only the seat's own acknowledgements measure it: an alarm the instructor or another seat
        // acknowledged first is not the seat's to answer, and is left out.
        if (a.acked_by && *a.acked_by != seat.id) continue;
        // Acknowledged only after it had cleared: it went unanswered while it stood, and is left
        // out as one never acknowledged is (the late acknowledgement does not count against it).
        if (a.acked_s && a.cleared_s && *a.acked_s > *a.cleared_s + 1e-9) continue;
        done = a.acked_s;
      } else {
        auto it = std::lower_bound(seat.action_s.begin(), seat.action_s.end(), a.raised_s - 1e-9);
        if (it != seat.action_s.end()) done = *it;
      }
      if (done)
        r.samples.push_back(std::max(0.0, *done - a.raised_s));
      else if (!a.cleared_s)
        r.samples.push_back(std::max(0.0, t_s_ - a.raised_s));  // still waiting: its age so far
    }
  }
  if (d.measure == Measure::return_to_standard_s && !r.samples.empty())
    r.measured = *std::max_element(r.samples.begin(), r.samples.end());
  if ((d.measure == Measure::alarm_to_action_s || d.measure == Measure::alarm_to_ack_s) && !r.samples.empty()) {
    double sum = 0.0;
    for (double v : r.samples) sum += v;
    r.measured = sum / static_cast<double>(r.samples.size());
  }
  const Scored s = score_value(r.measured, r.target, r.zero_at, higher_is_better(d.measure));
  r.score = s.score;
  r.margin = s.margin;
  r.met = s.met;
  r.arithmetic = s.arithmetic;
  return r;
}

std::vector<AlarmChange> feed_monitors(const Engine& engine, std::optional<AlarmMonitor>& alarms,
                                       std::optional<ObjectiveMonitor>& objectives, std::vector<Notice>& notices) {
  std::vector<AlarmChange> changes;
  if (alarms) changes = alarms->update(engine, notices);
  notices.clear();
  if (objectives) objectives->update(engine, alarms ? &*alarms : nullptr);
  return changes;
}

}  // namespace droopline::study
