#pragma once
// What every turbine model description shares: the governor's output at a stage point, the
// limits the isochronous integrator is held by, the common valve law, and the defaults a model
// may leave out. A model description is a struct of static members (see steam.hpp for the
// smallest one); the stage kernels, the outputs, the state names and start-up all read it.
#include <algorithm>
#include <cmath>
#include <cstddef>

#include "droopline/defs.hpp"

namespace droopline::detail {

/// Most states and parameters any model has (the width of the engine's per-block arrays).
inline constexpr std::size_t kMaxStates = 4;
inline constexpr std::size_t kMaxParams = 4;

/// The governor at one unit's stage point: the reference it drives toward and the valve limits.
struct Drive {
  double ref_mw;         ///< setpoint + secondary correction + droop response + isochronous integral
  double df_hz;          ///< the area's frequency deviation at the stage point (Hz)
  double inv_lag_per_s;  ///< 1/governor lag (1/s)
  double ramp_mw_per_s;  ///< rate limit (MW/s), huge when none
  double pmin_mw;        ///< lower valve/power limit (MW)
  double pmax_mw;        ///< upper valve/power limit (MW)
};

/// What a model's rates return: its output, and what the isochronous integrator stops against
/// (it does not integrate further while `held` sits at the limit it is pushing toward).
struct RateResult {
  double output_mw;  ///< mechanical (battery: electrical) output at the stage point (MW)
  double held;       ///< the valve-like state the integrator watches (MW)
  double lo_mw;      ///< its lower limit (MW)
  double hi_mw;      ///< its upper limit (MW)
};

/// Value range of the state a model clamps at the end of each step.
struct Range {
  double lo;
  double hi;
};

inline double clamp(double v, double lo, double hi) { return std::min(std::max(v, lo), hi); }

// Valve/power rate: first-order toward the reference, rate-limited, and stopped at a limit in the
// outward direction so the state never winds up beyond it.
inline double limited_rate(double ref, double v, double inv_lag, double ramp, double lo, double hi) {
  double r = (ref - v) * inv_lag;
  r = std::min(r, ramp);
  r = std::max(r, -ramp);
  r = v >= hi ? std::min(r, 0.0) : r;
  r = v <= lo ? std::max(r, 0.0) : r;
  return r;
}

/// Defaults of a model description; a model declares only what differs.
struct ModelDefaults {
  /// Range of the clamped state (kClamped) at the end of a step: the valve limits.
  static Range clamp_range(const double* /*p*/, const Drive& g) { return {g.pmin_mw, g.pmax_mw}; }
  /// No state survives a trip (a battery's stored energy does).
  static constexpr std::size_t kCarried = kMaxStates;
  /// The carried state's value at t = 0.
  static double carried_at_start(const UnitDef&) { return 0.0; }
  /// Highest output the unit can reach (MW): the valve limit unless the model adds one.
  static double upper_limit_mw(const double* /*p*/, double pmax_mw) { return pmax_mw; }
  /// Stored energy (MWh); 0 for a unit that stores none.
  static double energy_mwh(const double* /*x*/) { return 0.0; }
  /// True when a storage limit stops the unit raising its output (empty).
  static bool cannot_raise(const double* /*x*/, const double* /*p*/, double /*tol_mw*/) { return false; }
  /// True when a storage limit stops the unit lowering its output (full).
  static bool cannot_lower(const double* /*x*/, const double* /*p*/, double /*tol_mw*/) { return false; }
};

}  // namespace droopline::detail
