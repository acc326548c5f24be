// Resolved defaults that depend on other fields, shared rules and names: what the checks, the
// engine and the loader all read the same way.
#include <algorithm>
#include <string>

#include "checker.hpp"

namespace droopline {

bool has_errors(const std::vector<Issue>& issues) {
  return std::any_of(issues.begin(), issues.end(), [](const Issue& i) { return !i.warning; });
}

std::string droop_step_problem(double droop, const std::string& area, double m, double beta, double step_s) {
  if (!(m > 0.0 && beta > 0.0)) return {};
  const double tc = m / beta;
  if (!(step_s > tc / detail::kStepFraction)) return {};
  return fmt_num(droop) + " would make area \"" + area +
         "\" respond faster (inertia over natural response, M/beta = " + fmt_num(tc) +
         " s) than the fixed step can follow: step_s (" + fmt_num(step_s) + " s) must be at most a fifth of it";
}

// Our choice for exercises (about 100 s from full output): real units unload slower, a few % of
// rating per minute (common practice, from memory).
double unit_stop_rate_mw_per_s(const UnitDef& u) { return u.ramp_mw_per_s ? *u.ramp_mw_per_s : 0.01 * u.rating_mw; }

bool is_synchronous(const UnitDef& unit) { return unit.turbine.type != TurbineType::battery; }

double unit_min_mw(const UnitDef& u) {
  if (u.min_mw) return *u.min_mw;
  return u.turbine.type == TurbineType::battery ? -u.rating_mw : 0.0;
}

double unit_max_mw(const UnitDef& u) { return u.max_mw ? *u.max_mw : u.rating_mw; }

// Design rule for the transient droop compensation of a hydro governor (model notes, sec. 5).
double hydro_temporary_droop(const UnitDef& u) {
  if (u.turbine.temporary_droop) return *u.turbine.temporary_droop;
  const double tw = u.turbine.water_s;
  const double tm = 2.0 * u.inertia_s;
  if (!(tm > 0.0)) return 0.0;
  return (2.3 - (tw - 1.0) * 0.15) * tw / tm;
}

double hydro_reset_s(const UnitDef& u) {
  if (u.turbine.reset_s) return *u.turbine.reset_s;
  const double tw = u.turbine.water_s;
  return (5.0 - (tw - 1.0) * 0.5) * tw;
}

double natural_response_mw_per_hz(const SystemDef& def, std::size_t area_index) {
  const AreaDef& area = def.areas[area_index];
  double beta = area.load_damping * area.demand_mw / def.nominal_hz;
  for (const UnitDef& u : def.units)
    if (u.online && u.area == area.id && u.governor.droop > 0.0)
      beta += u.rating_mw / (u.governor.droop * def.nominal_hz);
  return beta;
}

const char* to_string(TurbineType t) {
  switch (t) {
    case TurbineType::steam:
      return "steam";
    case TurbineType::reheat:
      return "reheat";
    case TurbineType::hydro:
      return "hydro";
    case TurbineType::gas:
      return "gas";
    case TurbineType::battery:
      return "battery";
  }
  return "?";
}

const char* to_string(GovernorMode m) { return m == GovernorMode::droop ? "droop" : "isochronous"; }

const char* to_string(DeadbandKind k) { return k == DeadbandKind::offset ? "offset" : "step"; }

const char* to_string(CommandKind k) {
  switch (k) {
    case CommandKind::load_step:
      return "load_step";
    case CommandKind::load_ramp:
      return "load_ramp";
    case CommandKind::unit_trip:
      return "unit_trip";
    case CommandKind::unit_start:
      return "unit_start";
    case CommandKind::setpoint:
      return "setpoint";
    case CommandKind::governor:
      return "governor";
    case CommandKind::tie_trip:
      return "tie_trip";
    case CommandKind::tie_close:
      return "tie_close";
    case CommandKind::agc:
      return "agc";
    case CommandKind::fluctuation:
      return "fluctuation";
    case CommandKind::unit_stop:
      return "unit_stop";
    case CommandKind::schedule:
      return "schedule";
    case CommandKind::shed:
      return "shed";
    case CommandKind::restore:
      return "restore";
  }
  return "?";
}

const char* to_string(AgcMode m) {
  switch (m) {
    case AgcMode::tie_line_bias:
      return "tie_line_bias";
    case AgcMode::constant_frequency:
      return "constant_frequency";
    case AgcMode::constant_interchange:
      return "constant_interchange";
  }
  return "?";
}

}  // namespace droopline
