#pragma once
// Gas turbine: fuel demand min(Pv, load limit); Tf dx/dt = demand - x; Tc dPm/dt = x - Pm.
#include "models/model_base.hpp"

namespace droopline::detail {

/// Gas turbine with a load limit, fuel system and combustion lags.
struct Gas : ModelDefaults {
  static constexpr TurbineType kType = TurbineType::gas;
  /// States, in block order; the isochronous integrator is always last.
  enum State : std::size_t { valve, fuel, power, iso_integral, kStates };
  /// Names of the states in Engine::state_names().
  static constexpr const char* kStateNames[kStates] = {"valve", "fuel", "power", "iso_integral"};
  /// The valve state (UnitState::valve_mw) and the state limited at the end of a step.
  static constexpr std::size_t kValve = valve, kClamped = valve;
  /// Parameters, one array each per block.
  enum Param : std::size_t { inv_fuel_per_s, inv_combustion_per_s, load_limit_mw, kParams };

  /// Parameters from the definition (`droop_pu` is the governor's current droop).
  static void params(const UnitDef& u, double /*droop_pu*/, double /*f0_hz*/, double* p) {
    p[inv_fuel_per_s] = 1.0 / u.turbine.fuel_s;
    p[inv_combustion_per_s] = 1.0 / u.turbine.combustion_s;
    p[load_limit_mw] = u.turbine.load_limit_mw ? *u.turbine.load_limit_mw : u.rating_mw;
  }
  /// Mechanical output (MW).
  static double output(const double* x, const double* /*p*/) { return x[power]; }
  /// Steady states at output `mw` (the integrator is set apart).
  static void initial(double mw, double /*df_hz*/, double* x) { x[valve] = x[fuel] = x[power] = mw; }
  /// Rates of every state but the integrator, into `d`.
  static RateResult rates(const double* x, const double* p, const Drive& g, double* d) {
    d[valve] = limited_rate(g.ref_mw, x[valve], g.inv_lag_per_s, g.ramp_mw_per_s, g.pmin_mw, g.pmax_mw);
    d[fuel] = (std::min(x[valve], p[load_limit_mw]) - x[fuel]) * p[inv_fuel_per_s];
    d[power] = (x[fuel] - x[power]) * p[inv_combustion_per_s];
    return {output(x, p), x[valve], g.pmin_mw, std::min(g.pmax_mw, p[load_limit_mw])};
  }
  /// The load limit caps the output below the valve limit.
  static double upper_limit_mw(const double* p, double pmax_mw) { return std::min(pmax_mw, p[load_limit_mw]); }
};

}  // namespace droopline::detail
