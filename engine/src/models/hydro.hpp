#pragma once
// Hydro turbine (1 - s Tw)/(1 + s Tw/2) behind a governor with transient-droop compensation
// (1 + s TR)/(1 + s TR RT/R): (Tw/2) dz/dt = Pv - z; Pm = 3 z - 2 Pv.
#include "droopline/validate.hpp"
#include "models/model_base.hpp"

namespace droopline::detail {

/// Hydro unit: transient droop, gate servo, water column.
struct Hydro : ModelDefaults {
  static constexpr TurbineType kType = TurbineType::hydro;
  /// States, in block order; the isochronous integrator is always last.
  enum State : std::size_t { droop_lag, gate, water, iso_integral, kStates };
  /// Names of the states in Engine::state_names().
  static constexpr const char* kStateNames[kStates] = {"transient_droop", "gate", "water_power", "iso_integral"};
  /// The gate (UnitState::valve_mw) and the state limited at the end of a step.
  static constexpr std::size_t kValve = gate, kClamped = gate;
  /// Parameters, one array each per block.
  enum Param : std::size_t { inv_reset_lag_per_s, fast_gain, inv_half_water_per_s, kParams };

  /// Parameters from the definition; the compensation depends on the current droop.
  static void params(const UnitDef& u, double droop_pu, double /*f0_hz*/, double* p) {
    const double rt = hydro_temporary_droop(u), tr = hydro_reset_s(u);
    p[inv_reset_lag_per_s] = droop_pu / (tr * rt);  // 1 / (TR RT / R)
    p[fast_gain] = droop_pu / rt;                   // high-frequency gain R/RT
    p[inv_half_water_per_s] = 2.0 / u.turbine.water_s;
  }
  /// Mechanical output (MW): the water column's initial inverse response.
  static double output(const double* x, const double* /*p*/) { return 3.0 * x[water] - 2.0 * x[gate]; }
  /// Steady states at output `mw` (the integrator is set apart).
  static void initial(double mw, double /*df_hz*/, double* x) { x[droop_lag] = x[gate] = x[water] = mw; }
  /// Rates of every state but the integrator, into `d`.
  static RateResult rates(const double* x, const double* p, const Drive& g, double* d) {
    // Transient droop as a direct path plus a lag.
    const double u = p[fast_gain] * g.ref_mw + (1.0 - p[fast_gain]) * x[droop_lag];
    d[droop_lag] = (g.ref_mw - x[droop_lag]) * p[inv_reset_lag_per_s];
    d[gate] = limited_rate(u, x[gate], g.inv_lag_per_s, g.ramp_mw_per_s, g.pmin_mw, g.pmax_mw);
    d[water] = (x[gate] - x[water]) * p[inv_half_water_per_s];
    return {output(x, p), x[gate], g.pmin_mw, g.pmax_mw};
  }
};

}  // namespace droopline::detail
