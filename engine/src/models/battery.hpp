#pragma once
// Battery: P_ref = P_set + (S/R) e'/f0 - 2 Hs S rocof_meas / f0, rocof_meas from a washout
// s/(1 + s Tfilt) on df; Tr dP/dt = clamp(P_ref, min, max) - P; dE/dt = -P/3600 (MWh); no
// discharge when empty, no charge when full.
#include "models/model_base.hpp"

namespace droopline::detail {

/// Grid-forming-style battery with droop and synthetic inertia.
struct Battery : ModelDefaults {
  static constexpr TurbineType kType = TurbineType::battery;
  /// States, in block order; the isochronous integrator is always last.
  enum State : std::size_t { df_filter, power, energy, iso_integral, kStates };
  /// Names of the states in Engine::state_names().
  static constexpr const char* kStateNames[kStates] = {"df_filter", "power", "energy", "iso_integral"};
  /// The output state (UnitState::valve_mw) and the state limited at the end of a step.
  static constexpr std::size_t kValve = power, kClamped = energy;
  /// The stored energy survives a trip.
  static constexpr std::size_t kCarried = energy;
  /// Parameters, one array each per block.
  enum Param : std::size_t { inv_filter_per_s, inv_response_per_s, inertia_gain_mws_per_hz, capacity_mwh, kParams };

  /// Parameters from the definition (`droop_pu` is the governor's current droop).
  static void params(const UnitDef& u, double /*droop_pu*/, double f0_hz, double* p) {
    p[inv_filter_per_s] = 1.0 / u.turbine.rocof_filter_s;
    p[inv_response_per_s] = 1.0 / u.turbine.response_s;
    p[inertia_gain_mws_per_hz] = 2.0 * u.turbine.synthetic_inertia_s * u.rating_mw / f0_hz;
    p[capacity_mwh] = *u.turbine.energy_mwh;
  }
  /// Electrical output (MW).
  static double output(const double* x, const double* /*p*/) { return x[power]; }
  /// Steady states at output `mw`; the washout starts settled on the area's deviation.
  static void initial(double mw, double df_hz, double* x) {
    x[df_filter] = df_hz;
    x[power] = mw;
  }
  /// Stored energy at t = 0: soc times capacity.
  static double carried_at_start(const UnitDef& u) { return u.turbine.soc * *u.turbine.energy_mwh; }
  /// Rates of every state but the integrator, into `d`.
  static RateResult rates(const double* x, const double* p, const Drive& g, double* d) {
    const double rocof = (g.df_hz - x[df_filter]) * p[inv_filter_per_s];  // washout s/(1 + s Tf) on df
    const double ref = g.ref_mw - p[inertia_gain_mws_per_hz] * rocof;
    // No discharge when empty, no charge when full.
    const double hi = x[energy] <= 0.0 ? std::min(g.pmax_mw, 0.0) : g.pmax_mw;
    const double lo = x[energy] >= p[capacity_mwh] ? std::max(g.pmin_mw, 0.0) : g.pmin_mw;
    double r = (clamp(ref, lo, hi) - x[power]) * p[inv_response_per_s];
    r = std::min(r, g.ramp_mw_per_s);
    r = std::max(r, -g.ramp_mw_per_s);
    d[df_filter] = rocof;
    d[power] = r;
    d[energy] = -x[power] * (1.0 / 3600.0);
    return {output(x, p), x[power], lo, hi};
  }
  /// Range of kClamped at the end of a step.
  static Range clamp_range(const double* p, const Drive& /*g*/) { return {0.0, p[capacity_mwh]}; }
  /// Stored energy (MWh).
  static double energy_mwh(const double* x) { return x[energy]; }
  /// Empty: it cannot discharge.
  static bool cannot_raise(const double* x, const double* /*p*/, double tol_mw) {
    return x[energy] <= 0.0 && x[power] <= tol_mw;
  }
  /// Full: it cannot charge.
  static bool cannot_lower(const double* x, const double* p, double tol_mw) {
    return x[energy] >= p[capacity_mwh] && x[power] >= -tol_mw;
  }
};

}  // namespace droopline::detail
