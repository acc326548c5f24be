#pragma once
// Reheat steam turbine: Tch dx/dt = Pv - x; Trh dy/dt = x - y; Pm = Fhp x + (1 - Fhp) y.
#include "models/model_base.hpp"

namespace droopline::detail {

/// Steam turbine with a reheater between the high- and low-pressure stages.
struct Reheat : ModelDefaults {
  static constexpr TurbineType kType = TurbineType::reheat;
  /// States, in block order; the isochronous integrator is always last.
  enum State : std::size_t { valve, hp_power, reheat_power, iso_integral, kStates };
  /// Names of the states in Engine::state_names().
  static constexpr const char* kStateNames[kStates] = {"valve", "hp_power", "reheat_power", "iso_integral"};
  /// The valve state (UnitState::valve_mw) and the state limited at the end of a step.
  static constexpr std::size_t kValve = valve, kClamped = valve;
  /// Parameters, one array each per block.
  enum Param : std::size_t { inv_steam_chest_per_s, inv_reheat_per_s, hp_fraction, kParams };

  /// Parameters from the definition (`droop_pu` is the governor's current droop).
  static void params(const UnitDef& u, double /*droop_pu*/, double /*f0_hz*/, double* p) {
    p[inv_steam_chest_per_s] = 1.0 / u.turbine.steam_chest_s;
    p[inv_reheat_per_s] = 1.0 / u.turbine.reheat_s;
    p[hp_fraction] = u.turbine.hp_fraction;
  }
  /// Mechanical output (MW).
  static double output(const double* x, const double* p) {
    return p[hp_fraction] * x[hp_power] + (1.0 - p[hp_fraction]) * x[reheat_power];
  }
  /// Steady states at output `mw` (the integrator is set apart).
  static void initial(double mw, double /*df_hz*/, double* x) { x[valve] = x[hp_power] = x[reheat_power] = mw; }
  /// Rates of every state but the integrator, into `d`.
  static RateResult rates(const double* x, const double* p, const Drive& g, double* d) {
    d[valve] = limited_rate(g.ref_mw, x[valve], g.inv_lag_per_s, g.ramp_mw_per_s, g.pmin_mw, g.pmax_mw);
    d[hp_power] = (x[valve] - x[hp_power]) * p[inv_steam_chest_per_s];
    d[reheat_power] = (x[hp_power] - x[reheat_power]) * p[inv_reheat_per_s];
    return {output(x, p), x[valve], g.pmin_mw, g.pmax_mw};
  }
};

}  // namespace droopline::detail
