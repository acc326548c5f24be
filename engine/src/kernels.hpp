#pragma once
// Hot kernels of the RK4 step, one instance per turbine model description (models/*.hpp). Each
// works on one contiguous segment of units of one turbine type in one area, so the area's speed
// error is a scalar and the loop body has no branch on type: the compiler vectorizes it. One call
// does a whole RK4 stage for the segment: it forms the stage state from the step's start state
// and the previous stage's slope, evaluates the model, and does the stage's bookkeeping (stage 4
// writes the new state, limits applied), so the unit data is read once per stage. Built in
// several instruction-set variants picked at load time; every variant gives bit-identical
// results because floating-point contraction is off and only element-wise IEEE operations are
// used.
#include <cstddef>

#include "models/model_base.hpp"

namespace droopline::detail {

/// Per-unit parameters shared by every turbine type, each pointer offset to the segment start.
struct GovernorParams {
  const double* pref0;    ///< setpoint plus secondary-control correction (MW)
  const double* kd;       ///< droop gain S/(R f0) (MW/Hz)
  const double* kiso;     ///< isochronous gain kd/integral_s (MW/(Hz s)); 0 in droop mode
  const double* dbs;      ///< deadband half-width (Hz); negative = step kind of |dbs|
  const double* inv_lag;  ///< 1/governor lag (1/s)
  const double* ramp;     ///< rate limit (MW/s), huge when none
  const double* pmin;     ///< lower valve/power limit (MW)
  const double* pmax;     ///< upper valve/power limit (MW)
};

/// Turbine parameters of a segment: array i holds parameter i of the model's `Param` list.
struct ModelParams {
  const double* p[kMaxParams];
};

/// Arrays of one segment: state i of unit j is at y[i][j]. The last state of every type is the
/// isochronous integrator, touched only in segments of isochronous units.
struct SegmentArrays {
  double* y[kMaxStates];    ///< state at the start of the step; stage 4 writes the new state
  double* k[kMaxStates];    ///< slope: read as the previous stage's, overwritten with this stage's
  double* acc[kMaxStates];  ///< k1 + 2 k2 + 2 k3, written from stage 2 on (stage 1 leaves it: k holds k1)
};

/// One RK4 stage: 1..4, the stage offset c (0, h/2, h/2, h) and h/6 for the final combination;
/// `iso` selects the variant with the isochronous integrator.
struct StageInfo {
  int stage;
  double c;
  double h6;
  bool iso;
};

/// One RK4 stage of a segment of `type` units. df_hz: the area's frequency deviation at the stage
/// point; out_pm receives each unit's output at the stage point (for the area's generation sum).
void model_stage(TurbineType type, std::size_t n, double df_hz, const GovernorParams& g, const ModelParams& t,
                 const SegmentArrays& a, const StageInfo& s, double* out_pm);

/// Sum of v[0..n) in a fixed order (eight interleaved partial sums), independent of the ISA.
double ordered_sum(std::size_t n, const double* v);

/// model_stage for an ensemble: `n` elements interleaved across members (element u lanes + l is
/// unit u of the lane-l member), df_hz with one value per element. Each element goes through
/// exactly the operations model_stage does for it, so each member's bits are its single run's.
void lanes_stage(TurbineType type, std::size_t n, const double* df_hz, const GovernorParams& g, const ModelParams& t,
                 const SegmentArrays& a, const StageInfo& s, double* out_pm);

/// ordered_sum of each of `lanes` interleaved sequences of n values (value i of lane l at
/// v[i lanes + l]) into out[l], each in ordered_sum's order.
void ordered_sums(std::size_t n, std::size_t lanes, const double* v, double* out);

/// Members an ensemble steps side by side with the kernels in use: the doubles in one vector
/// register (8 for AVX-512, 4 for AVX2; 4 for baseline, measured faster than 2 there).
std::size_t ensemble_lanes();

}  // namespace droopline::detail
