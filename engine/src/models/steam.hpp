#pragma once
// Non-reheat steam turbine: Tch dPm/dt = Pv - Pm.
#include "models/model_base.hpp"

namespace droopline::detail {

/// Steam turbine without reheat: the valve and one steam-chest lag.
struct Steam : ModelDefaults {
  static constexpr TurbineType kType = TurbineType::steam;
  /// States, in block order; the isochronous integrator is always last.
  enum State : std::size_t { valve, power, iso_integral, kStates };
  /// Names of the states in Engine::state_names().
  static constexpr const char* kStateNames[kStates] = {"valve", "power", "iso_integral"};
  /// The valve state (UnitState::valve_mw) and the state limited at the end of a step.
  static constexpr std::size_t kValve = valve, kClamped = valve;
  /// Parameters, one array each per block.
  enum Param : std::size_t { inv_steam_chest_per_s, kParams };

  /// Parameters from the definition (`droop_pu` is the governor's current droop).
  static void params(const UnitDef& u, double /*droop_pu*/, double /*f0_hz*/, double* p) {
    p[inv_steam_chest_per_s] = 1.0 / u.turbine.steam_chest_s;
  }
  /// Mechanical output (MW).
  static double output(const double* x, const double* /*p*/) { return x[power]; }
  /// Steady states at output `mw` (the integrator is set apart).
  static void initial(double mw, double /*df_hz*/, double* x) { x[valve] = x[power] = mw; }
  /// Rates of every state but the integrator, into `d`.
  static RateResult rates(const double* x, const double* p, const Drive& g, double* d) {
    d[valve] = limited_rate(g.ref_mw, x[valve], g.inv_lag_per_s, g.ramp_mw_per_s, g.pmin_mw, g.pmax_mw);
    d[power] = (x[valve] - x[power]) * p[inv_steam_chest_per_s];
    return {output(x, p), x[valve], g.pmin_mw, g.pmax_mw};
  }
};

}  // namespace droopline::detail
