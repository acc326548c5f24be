#pragma once
// Hot per-type kernels of the right-hand side. Each works on one contiguous segment of units of
// one turbine type in one area, so the area's speed error is a scalar and the loop body has no
// branch on type: the compiler vectorizes it. Built in several instruction-set variants
// (target_clones) and picked at load time; every variant computes bit-identical results because
// floating-point contraction is off and only element-wise IEEE operations are used.
#include <cstddef>

namespace droopline::detail {

/// Per-unit parameters shared by every turbine type, each pointer offset to the segment start.
struct GovernorParams {
  const double* pset;     ///< setpoint (MW)
  const double* pagc;     ///< secondary-control correction (MW)
  const double* kd;       ///< droop gain S/(R f0) (MW/Hz)
  const double* kiso;     ///< isochronous gain kd/integral_s (MW/(Hz s)); 0 in droop mode
  const double* db;       ///< deadband half-width (Hz)
  const double* stepm;    ///< 1 = step deadband, 0 = offset deadband
  const double* inv_lag;  ///< 1/governor lag (1/s)
  const double* ramp;     ///< rate limit (MW/s), huge when none
  const double* pmin;     ///< lower valve/power limit (MW)
  const double* pmax;     ///< upper valve/power limit (MW)
};

/// Offsets of one segment's state and derivative arrays: state k of unit j is at base[k] + j.
struct SegmentState {
  const double* x[4];  ///< state arrays at the stage point
  double* dx[4];       ///< derivative arrays
};

// df_hz: the area's frequency deviation at the stage point; out_pm receives each unit's output.
void steam_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tch,
               const SegmentState& s, double* out_pm);
void reheat_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tch,
                const double* inv_trh, const double* fhp, const SegmentState& s, double* out_pm);
void hydro_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_ta,
               const double* gain_hf, const double* inv_half_tw, const SegmentState& s,
               double* out_pm);
void gas_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tf,
             const double* inv_tc, const double* load_limit, const SegmentState& s,
             double* out_pm);
void battery_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tfilt,
                 const double* inv_tr, const double* kin, const double* cap,
                 const SegmentState& s, double* out_pm);

/// acc = first ? k : acc + w*k;  xs = y + c*k  (one RK4 stage bookkeeping pass).
void rk4_stage(std::size_t n, const double* y, const double* k, double* acc, double* xs, double w,
               double c, bool first);
/// y += c * (acc + k)  (the final RK4 combination).
void rk4_finish(std::size_t n, double* y, const double* acc, const double* k, double c);
/// Sum of v[0..n) in a fixed order (four interleaved partial sums), independent of the ISA.
double ordered_sum(std::size_t n, const double* v);

}  // namespace droopline::detail
