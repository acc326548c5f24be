// The alarm monitor of a live exercise: level alarms (frequency, RoCoF, tie loading, unit at a
// limit, reserve, ACE, battery energy) raised after their condition has held for a dwell and
// cleared once the value has stayed back inside the threshold by a margin for another dwell, so
// that noise around a threshold does not make them chatter; event alarms (a unit tripped,
// started or stopped, a shedding stage) raised from the engine's notices and cleared when
// acknowledged.
#include "droopline/alarms.hpp"

#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>
#include <variant>

#include "droopline/format.hpp"

namespace droopline::study {

namespace {

enum Level { kBand, kLimit, kRocof, kTie, kUnitLimit, kReserve, kAce, kBattery };
const char* const kLevelNames[] = {"frequency_band", "frequency_limit", "rocof", "tie_loading",
                                   "unit_limit",     "reserve_low",     "ace",   "battery_low"};

}  // namespace

AlarmLimits alarm_limits_for(double f0_hz) {
  AlarmLimits a;
  if (std::fabs(f0_hz - 60.0) < 1e-9) {
    // 60 Hz: the +/-36 mHz governor deadband allowed after FERC Order 842 as the operator's normal
    // band; 0.1 Hz as the limit band is from memory (common practice for operator alarms in 60 Hz
    // interconnections), to be confirmed against the local grid code.
    a.standard_band_hz = 0.036;
    a.limit_band_hz = 0.1;
  } else {
    // 50 Hz: EU System Operation Guideline (Regulation 2017/1485), Annex III, Continental Europe:
    // standard frequency range +/-50 mHz, maximum steady-state frequency deviation 200 mHz. Other
    // nominal frequencies take the same figures scaled by f0 / 50.
    a.standard_band_hz = 0.05 * f0_hz / 50.0;
    a.limit_band_hz = 0.2 * f0_hz / 50.0;
  }
  // RoCoF: 0.5 Hz/s, half the 1 Hz/s loss-of-mains setting used in GB (with a 500 ms delay, which
  // the raise dwell below matches); common practice, from memory.
  a.rocof_hz_per_s = 0.5 * f0_hz / 50.0;
  // Tie loading: 80 % of the pull-out power keeps a margin to the stability limit of the
  // power-angle curve (sin 53 deg = 0.8); common practice, from memory.
  a.tie_loading_pct = 80.0;
  // 0 = per area, the output of its largest online unit: reserve enough to cover the loss of the
  // largest single infeed (the N-1 rule; common practice).
  a.reserve_mw = 0.0;
  // 0 = per area, B x standard_band_hz: an ACE as large as the area's own frequency response to a
  // deviation of the standard band (droopline's rule, not a published figure). Held for 60 s, the
  // one-minute averaging period of NERC BAL-001 (from memory).
  a.ace_mw = 0.0;
  a.ace_for_s = 60.0;
  // Battery energy low below 10 % of its capacity: common practice, from memory.
  a.battery_energy_pct = 10.0;
  return a;
}

const char* to_string(AlarmSeverity s) { return s == AlarmSeverity::alarm ? "alarm" : "warning"; }

AlarmMonitor::AlarmMonitor(const CheckedSystem& system, AlarmLimits limits) : limits_(limits) {
  const SystemDef& def = system.def();
  f0_hz_ = def.nominal_hz;
  auto watch = [&](int kind, std::size_t subject) {
    Watch w;
    w.kind = kind;
    w.subject = static_cast<std::uint32_t>(subject);
    watches_.push_back(w);
  };
  for (std::size_t a = 0; a < def.areas.size(); ++a) {
    area_ids_.push_back(def.areas[a].id);
    ace_limit_mw_.push_back(area_ace_limit_mw(def, a, limits_));
    for (int k : {kBand, kLimit, kRocof, kReserve, kAce}) watch(k, a);
  }
  for (std::size_t t = 0; t < def.ties.size(); ++t) {
    tie_ids_.push_back(def.ties[t].id);
    tie_from_.push_back(static_cast<std::uint32_t>(system.index().areas.find(def.ties[t].from)->second));
    tie_to_.push_back(static_cast<std::uint32_t>(system.index().areas.find(def.ties[t].to)->second));
    tie_pmax_mw_.push_back(def.ties[t].pmax_mw);
    watch(kTie, t);
  }
  for (std::size_t u = 0; u < def.units.size(); ++u) {
    const UnitDef& ud = def.units[u];
    unit_ids_.push_back(ud.id);
    unit_area_.push_back(static_cast<std::uint32_t>(system.index().areas.find(ud.area)->second));
    const bool battery = ud.turbine.type == TurbineType::battery;
    battery_mwh_.push_back(battery ? ud.turbine.energy_mwh.value_or(0.0) : 0.0);
    watch(kUnitLimit, u);
    if (battery && battery_mwh_.back() > 0.0) watch(kBattery, u);
  }
}

std::uint64_t AlarmMonitor::raise(std::string kind, std::uint32_t subject, const std::string& message, double t_s) {
  Alarm a;
  a.id = alarms_.size() + 1;
  a.severity = (kind == "frequency_limit" || kind == "rocof" || kind == "tie_loading" || kind == "unit_tripped" ||
                kind == "shedding")
                   ? AlarmSeverity::alarm
                   : AlarmSeverity::warning;
  if (kind == "tie_loading") {
    a.area = tie_from_[subject];
    a.areas = {tie_from_[subject], tie_to_[subject]};
    a.subject = tie_ids_[subject];
  } else if (kind == "unit_limit" || kind == "unit_tripped" || kind == "unit_started" || kind == "unit_stopped" ||
             kind == "battery_low") {
    a.area = unit_area_[subject];
    a.areas = {unit_area_[subject]};
    a.subject = unit_ids_[subject];
  } else {
    a.area = subject;
    a.areas = {subject};
    a.subject = area_ids_[subject];
  }
  a.kind = std::move(kind);
  a.message = message;
  a.raised_s = t_s;
  alarms_.push_back(std::move(a));
  return alarms_.back().id;
}

void AlarmMonitor::level(Watch& w, bool beyond, bool calm, double t_s, double raise_dwell_s,
                         std::vector<AlarmChange>& changes, const std::string& message) {
  if (!w.active) {
    w.calm_since_s.reset();
    if (!beyond) {
      w.beyond_since_s.reset();
      return;
    }
    if (!w.beyond_since_s) w.beyond_since_s = t_s;
    if (t_s - *w.beyond_since_s + 1e-9 < raise_dwell_s) return;
    const std::uint64_t id = raise(kLevelNames[w.kind], w.subject, message, t_s);
    w.active = alarms_.size() - 1;
    changes.push_back({AlarmChange::What::raised, id});
    return;
  }
  w.beyond_since_s.reset();
  if (!calm) {
    w.calm_since_s.reset();
    return;
  }
  if (!w.calm_since_s) w.calm_since_s = t_s;
  if (t_s - *w.calm_since_s + 1e-9 < kClearDwellS) return;
  Alarm& a = alarms_[*w.active];
  a.cleared_s = t_s;
  changes.push_back({AlarmChange::What::cleared, a.id});
  w.active.reset();
  w.calm_since_s.reset();
}

std::vector<AlarmChange> AlarmMonitor::update(const Engine& engine, const std::vector<Notice>& notices) {
  std::vector<AlarmChange> changes;
  const double t = engine.time_s();
  const double in = 1.0 - kClearMargin, out = 1.0 + kClearMargin;

  // Event alarms from the notices: trips, starts and stops by command, shedding stages.
  for (const Notice& n : notices) {
    if (n.kind == NoticeKind::shedding) {
      const std::uint64_t id = raise("shedding", n.area,
                                     "area " + area_ids_[n.area] + ": shedding stage " + std::to_string(n.stage + 1) +
                                         " shed " + fmt_fixed(n.value, 1) + " MW",
                                     n.t_s);
      changes.push_back({AlarmChange::What::raised, id});
      continue;
    }
    if (n.kind != NoticeKind::command || !n.action) continue;
    // By the command's name, so that kinds added to the vocabulary later (a controlled stop) are
    // recognised without this file naming their structs.
    const std::string kind = to_string(kind_of(*n.action));
    const char* alarm = kind == "unit_trip"    ? "unit_tripped"
                        : kind == "unit_start" ? "unit_started"
                        : kind == "unit_stop"  ? "unit_stopped"
                                               : nullptr;
    if (!alarm) continue;
    std::optional<std::uint32_t> unit;
    std::visit(
        [&](const auto& a) {
          if constexpr (requires { a.unit.index; }) unit = a.unit.index;
        },
        *n.action);
    if (!unit || *unit >= unit_ids_.size()) continue;
    const std::string what =
        kind == "unit_trip"    ? "tripped" + (n.value > 0.0 ? ", " + fmt_fixed(n.value, 1) + " MW lost" : std::string())
        : kind == "unit_start" ? "started"
                               : "stopping (controlled)";
    const std::uint64_t id =
        raise(alarm, *unit, "unit " + unit_ids_[*unit] + " (" + area_ids_[unit_area_[*unit]] + ") " + what, n.t_s);
    changes.push_back({AlarmChange::What::raised, id});
  }

  // Level alarms.
  std::vector<AreaState> areas(area_ids_.size());
  for (std::size_t a = 0; a < areas.size(); ++a) areas[a] = engine.area(AreaId{static_cast<std::uint32_t>(a)});
  std::vector<UnitState> units(unit_ids_.size());
  for (std::size_t u = 0; u < units.size(); ++u) units[u] = engine.unit(UnitId{static_cast<std::uint32_t>(u)});
  const std::vector<double> reserve = upward_reserve_mw(engine, unit_area_);
  std::vector<double> largest(areas.size(), 0.0);
  for (std::size_t u = 0; u < units.size(); ++u) {
    if (units[u].status != UnitStatus::tripped)
      largest[unit_area_[u]] = std::max(largest[unit_area_[u]], units[u].p_mw);
  }
  for (Watch& w : watches_) {
    const std::uint32_t s = w.subject;
    switch (w.kind) {
      case kBand:
      case kLimit: {
        const double band = w.kind == kBand ? limits_.standard_band_hz : limits_.limit_band_hz;
        const double df = areas[s].collapsed ? 0.0 : areas[s].f_hz - f0_hz_;
        level(w, std::fabs(df) > band, std::fabs(df) < in * band, t, kRaiseDwellS, changes,
              "area " + area_ids_[s] + ": frequency " + fmt_fixed(areas[s].f_hz, 3) + " Hz, outside " +
                  (w.kind == kBand ? "the standard band" : "the limit band") + " of +/-" + fmt_num(band * 1000.0) +
                  " mHz");
        break;
      }
      case kRocof: {
        const double r = areas[s].collapsed ? 0.0 : areas[s].rocof_hz_per_s;
        level(w, std::fabs(r) > limits_.rocof_hz_per_s, std::fabs(r) < in * limits_.rocof_hz_per_s, t, kRaiseDwellS,
              changes,
              "area " + area_ids_[s] + ": RoCoF " + fmt_fixed(r, 2) + " Hz/s beyond " +
                  fmt_num(limits_.rocof_hz_per_s) + " Hz/s");
        break;
      }
      case kTie: {
        const TieState ts = engine.tie(TieId{s});
        const double pct = ts.in_service ? 100.0 * std::fabs(ts.flow_mw) / tie_pmax_mw_[s] : 0.0;
        level(w, pct > limits_.tie_loading_pct, pct < in * limits_.tie_loading_pct, t, kRaiseDwellS, changes,
              "tie " + tie_ids_[s] + ": " + fmt_fixed(ts.flow_mw, 1) + " MW, " + fmt_fixed(pct, 0) +
                  " % of its pull-out power (alarm above " + fmt_num(limits_.tie_loading_pct) + " %)");
        break;
      }
      case kUnitLimit: {
        const UnitStatus st = units[s].status;
        const bool at = st == UnitStatus::at_max || st == UnitStatus::at_min;
        // The valve is at its limit: the governor can do no more, while the output may still be
        // moving toward it behind the turbine's lag.
        level(w, at, !at, t, kRaiseDwellS, changes,
              "unit " + unit_ids_[s] + " (" + area_ids_[unit_area_[s]] + "): valve at its " +
                  (st == UnitStatus::at_max ? "upper" : "lower") + " limit, output " + fmt_fixed(units[s].p_mw, 1) +
                  " MW");
        break;
      }
      case kReserve: {
        const double need = limits_.reserve_mw > 0.0 ? limits_.reserve_mw : largest[s];
        level(w, !areas[s].collapsed && reserve[s]<need, reserve[s]> out * need || areas[s].collapsed, t, kRaiseDwellS,
              changes,
              "area " + area_ids_[s] + ": upward reserve " + fmt_fixed(reserve[s], 1) + " MW, below " +
                  fmt_fixed(need, 1) + " MW" + (limits_.reserve_mw > 0.0 ? "" : " (its largest unit's output)"));
        break;
      }
      case kAce: {
        const double ace = areas[s].ace_mw, lim = ace_limit_mw_[s];
        level(w, std::fabs(ace) > lim, std::fabs(ace) < in * lim, t, limits_.ace_for_s, changes,
              "area " + area_ids_[s] + ": ACE " + fmt_fixed(ace, 1) + " MW beyond " + fmt_fixed(lim, 1) + " MW for " +
                  fmt_num(limits_.ace_for_s) + " s");
        break;
      }
      case kBattery: {
        const double pct = 100.0 * units[s].energy_mwh / battery_mwh_[s];
        level(w, pct<limits_.battery_energy_pct, pct> out * limits_.battery_energy_pct, t, kRaiseDwellS, changes,
              "battery " + unit_ids_[s] + " (" + area_ids_[unit_area_[s]] + "): stored energy " + fmt_fixed(pct, 1) +
                  " % of its capacity, below " + fmt_num(limits_.battery_energy_pct) + " %");
        break;
      }
    }
  }
  return changes;
}

bool AlarmMonitor::acknowledge(std::uint64_t id, const std::string& by, double t_s) {
  if (id == 0 || id > alarms_.size()) return false;
  Alarm& a = alarms_[id - 1];
  if (a.acked_by) return false;
  a.acked_by = by;
  a.acked_s = t_s;
  const bool event =
      a.kind == "unit_tripped" || a.kind == "unit_started" || a.kind == "unit_stopped" || a.kind == "shedding";
  if (event && !a.cleared_s) a.cleared_s = t_s;  // an event has nothing to wait for once seen
  return true;
}

std::vector<double> upward_reserve_mw(const Engine& engine, const std::vector<std::uint32_t>& unit_area) {
  std::vector<double> reserve(engine.def().areas.size(), 0.0);
  for (std::size_t u = 0; u < unit_area.size(); ++u)
    reserve[unit_area[u]] += engine.unit(UnitId{static_cast<std::uint32_t>(u)}).headroom_up_mw;
  return reserve;
}

double area_ace_limit_mw(const SystemDef& def, std::size_t area, const AlarmLimits& limits) {
  if (limits.ace_mw > 0.0) return limits.ace_mw;
  return def.areas[area].agc.bias_mw_per_hz.value_or(natural_response_mw_per_hz(def, area)) * limits.standard_band_hz;
}

const Alarm* AlarmMonitor::find(std::uint64_t id) const {
  return id == 0 || id > alarms_.size() ? nullptr : &alarms_[id - 1];
}

nlohmann::ordered_json alarm_to_json(const SystemDef& def, const Alarm& a) {
  using json = nlohmann::ordered_json;
  json areas = json::array();
  for (std::uint32_t i : a.areas) areas.push_back(i < def.areas.size() ? json(def.areas[i].id) : json(nullptr));
  auto opt = [](const auto& v) { return v ? json(*v) : json(nullptr); };
  return json{{"id", a.id},
              {"kind", a.kind},
              {"severity", to_string(a.severity)},
              {"area", a.area && *a.area < def.areas.size() ? json(def.areas[*a.area].id) : json(nullptr)},
              {"areas", areas},
              {"subject", a.subject},
              {"message", a.message},
              {"raised_s", a.raised_s},
              {"cleared_s", opt(a.cleared_s)},
              {"active", !a.cleared_s.has_value()},
              {"acked_by", opt(a.acked_by)},
              {"acked_s", opt(a.acked_s)}};
}

}  // namespace droopline::study
