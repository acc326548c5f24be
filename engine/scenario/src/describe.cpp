// The readable lines of the engine's notices and disturbance causes: written here, at the
// boundary, once for summary.json, the live event log and stream, and the command line.
#include <string>
#include <variant>

#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {
namespace {

// The secondary-control mode as the log says it to an operator.
const char* agc_mode_words(AgcMode m) {
  switch (m) {
    case AgcMode::tie_line_bias:
      return "tie-line bias control";
    case AgcMode::constant_frequency:
      return "constant frequency control";
    case AgcMode::constant_interchange:
      return "constant interchange control";
  }
  return "?";
}

std::string describe_command(const SystemDef& def, const Action& action, double value, std::uint32_t stage) {
  auto area = [&](AreaId a) -> const std::string& { return def.areas[a.index].id; };
  auto unit = [&](UnitId u) -> const std::string& { return def.units[u.index].id; };
  auto tie = [&](TieId t) -> const std::string& { return def.ties[t.index].id; };
  switch (kind_of(action)) {
    case CommandKind::load_step: {
      const auto& c = std::get<LoadStep>(action);
      return "load step " + fmt_num(c.mw) + " MW in area " + area(c.area);
    }
    case CommandKind::load_ramp: {
      const auto& c = std::get<LoadRamp>(action);
      return "load ramp " + fmt_num(c.mw) + " MW over " + fmt_num(c.over_s) + " s in area " + area(c.area);
    }
    case CommandKind::unit_trip:
      return "unit " + unit(std::get<UnitTrip>(action).unit) + " tripped from " + fmt_fixed(value, 1) + " MW";
    case CommandKind::unit_start: {
      const auto& c = std::get<UnitStart>(action);
      if (const double s = def.units[c.unit.index].start_up_s; s > 0.0)
        return "unit " + unit(c.unit) + " starting: synchronises in " + fmt_num(s) + " s, then loads to " +
               fmt_num(c.mw) + " MW";
      return "unit " + unit(c.unit) + " started, loading to " + fmt_num(c.mw) + " MW";
    }
    case CommandKind::setpoint: {
      const auto& c = std::get<Setpoint>(action);
      return "setpoint of " + unit(c.unit) + " to " + fmt_num(c.mw) + " MW" +
             (c.ramp_mw_per_s ? " at " + fmt_num(*c.ramp_mw_per_s) + " MW/s" : "");
    }
    case CommandKind::governor: {  // the engine reports every setting as it now stands
      const auto& c = std::get<GovernorChange>(action);
      return "governor of " + unit(c.unit) + ": droop " + fmt_num(c.droop.value_or(0.0)) + ", deadband " +
             fmt_num(c.deadband_hz.value_or(0.0)) + " Hz " + to_string(c.deadband.value_or(DeadbandKind::offset)) +
             ", " + to_string(c.mode.value_or(GovernorMode::droop));
    }
    case CommandKind::tie_trip:
      return "tie " + tie(std::get<TieTrip>(action).tie) + " tripped carrying " + fmt_fixed(value, 1) + " MW";
    case CommandKind::tie_close:
      return "tie " + tie(std::get<TieClose>(action).tie) + " closed at " + fmt_fixed(value, 1) + " deg";
    case CommandKind::agc: {
      const auto& c = std::get<AgcSwitch>(action);
      return std::string("secondary control ") + (c.enabled ? "on" : "off") + " in area " + area(c.area) +
             (c.mode ? std::string(", ") + agc_mode_words(*c.mode) : "");
    }
    case CommandKind::fluctuation: {
      const auto& c = std::get<Fluctuation>(action);
      return c.sigma_mw > 0.0 ? "load fluctuation " + fmt_num(c.sigma_mw) + " MW (tau " + fmt_num(c.tau_s) +
                                    " s) in area " + area(c.area)
                              : "load fluctuation off in area " + area(c.area);
    }
    case CommandKind::unit_stop:
      return "unit " + unit(std::get<UnitStop>(action).unit) + " stopping: unloading at " + fmt_num(value) +
             " MW/s, then offline";
    case CommandKind::schedule: {
      const auto& c = std::get<Schedule>(action);
      return "scheduled export of area " + area(c.area) + " from " + fmt_fixed(value, 1) + " to " + fmt_num(c.mw) +
             " MW" + (c.over_s > 0.0 ? " over " + fmt_num(c.over_s) + " s" : "");
    }
    case CommandKind::shed: {
      const auto& c = std::get<Shed>(action);
      return "load shed by hand: " + fmt_num(c.mw) + " MW in area " + area(c.area);
    }
    case CommandKind::restore: {
      const auto& c = std::get<Restore>(action);
      return "shed load restored: " + fmt_fixed(value, 1) + " MW in area " + area(c.area) +
             (stage > 0 ? " (" + std::to_string(stage) + (stage == 1 ? " stage" : " stages") + " re-armed)" : "");
    }
  }
  return {};
}

}  // namespace

std::string describe(const SystemDef& def, const Notice& n) {
  switch (n.kind) {
    case NoticeKind::command:
      return n.action ? describe_command(def, *n.action, n.value, n.stage) : std::string();
    case NoticeKind::command_refused: {
      std::string out;
      for (const Issue& i : n.issues) out += (out.empty() ? "" : "; ") + i.text();
      return out;
    }
    case NoticeKind::out_of_step:
      return "tie " + def.ties[n.tie].id + " tripped out of step at " + fmt_fixed(n.value, 1) + " deg";
    case NoticeKind::shedding:
      return "area " + def.areas[n.area].id + " shed stage " + std::to_string(n.stage + 1) + ": " +
             fmt_fixed(n.value, 1) + " MW below " + fmt_num(def.areas[n.area].shedding[n.stage].below_hz) + " Hz";
    case NoticeKind::collapse:
      return "area " + def.areas[n.area].id + " lost all synchronous inertia and collapsed; its ties are opened";
    case NoticeKind::unit_synchronised:
      return n.action ? "unit " + def.units[std::get<UnitStart>(*n.action).unit.index].id +
                            " synchronised, loading to " + fmt_num(std::get<UnitStart>(*n.action).mw) + " MW"
                      : std::string();
    case NoticeKind::unit_stopped:
      return n.action ? "unit " + def.units[std::get<UnitStop>(*n.action).unit.index].id + " offline after a stop (" +
                            fmt_fixed(n.value, 1) + " MW when its breaker opened)"
                      : std::string();
    case NoticeKind::islanded:
      return (n.action ? "trip of tie " : "out-of-step trip of tie ") + def.ties[n.tie].id + " (island of " +
             def.areas[n.area].id + ")";
  }
  return {};
}

std::string describe_cause(const SystemDef& def, const Disturbance& d) {
  std::string out;
  for (const Notice& n : d.causes) out += (out.empty() ? "" : "; ") + describe(def, n);
  return out;
}

}  // namespace droopline
