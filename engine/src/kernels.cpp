#include "kernels.hpp"

#include <algorithm>
#include <cmath>

#include <atomic>
#include <string>

#include "droopline/kernel_choice.hpp"

// GCC on x86-64 builds three variants of the entry points and picks one at run time; other
// compilers (the sanitizer builds use clang) build the portable one only.
#if defined(__GNUC__) && defined(__x86_64__) && !defined(__clang__) && !defined(DROOPLINE_NO_CLONES)
#define DL_VARIANTS 1
#else
#define DL_VARIANTS 0
#endif

namespace droopline::detail {
namespace {

// Speed error after the deadband. e = -df; dbs < 0 selects the step kind of half-width -dbs.
inline double deadband(double e, double ae, double dbs) {
  const double off = std::copysign(std::max(ae - dbs, 0.0), e);
  const double stp = ae > -dbs ? e : 0.0;
  return dbs < 0.0 ? stp : off;
}

// Valve/power rate: first-order toward the reference, rate-limited, and stopped at a limit in the
// outward direction so the state never winds up beyond it.
inline double limited_rate(double ref, double v, double inv_lag, double ramp, double lo,
                           double hi) {
  double r = (ref - v) * inv_lag;
  r = std::min(r, ramp);
  r = std::max(r, -ramp);
  r = v >= hi ? std::min(r, 0.0) : r;
  r = v <= lo ? std::max(r, 0.0) : r;
  return r;
}

// The isochronous integrator stops while the valve sits at the limit it is pushing against.
inline double iso_rate(double kiso, double ed, double v, double lo, double hi) {
  double r = kiso * ed;
  r = (v >= hi && r > 0.0) ? 0.0 : r;
  r = (v <= lo && r < 0.0) ? 0.0 : r;
  return r;
}

inline double clamp(double v, double lo, double hi) { return std::min(std::max(v, lo), hi); }

}  // namespace

// Local restrict-qualified views of one segment's arrays, and the per-stage state read and
// bookkeeping write, shared by every kernel below (macros keep the restrict qualification that a
// helper function's parameters would lose after inlining).
#define DL_ARRAYS(i)                                \
  double* __restrict y##i = a.y[i];                 \
  double* __restrict k##i = a.k[i];                 \
  double* __restrict ac##i = a.acc[i]
#define DL_X(i) (S == 1 ? y##i[j] : y##i[j] + c * k##i[j])
#define DL_PUT(i, d)                                 \
  do {                                               \
    if constexpr (S == 1) {                          \
      k##i[j] = (d);                                 \
      ac##i[j] = (d);                                \
    } else if constexpr (S < 4) {                    \
      k##i[j] = (d);                                 \
      ac##i[j] = ac##i[j] + 2.0 * (d);               \
    } else {                                         \
      y##i[j] = y##i[j] + h6 * (ac##i[j] + (d));     \
    }                                                \
  } while (0)
// The isochronous integrator: read and advanced only in isochronous segments.
#define DL_ISO_X(i) (ISO ? DL_X(i) : 0.0)
#define DL_ISO_PUT(i, v, lo, hi)                     \
  do {                                               \
    if constexpr (ISO) {                             \
      const double diso = iso_rate(kiso[j], ed, v, lo, hi); \
      DL_PUT(i, diso);                               \
    }                                                \
  } while (0)
#define DL_GOVERNOR                                  \
  const double* __restrict pref0 = g.pref0;          \
  const double* __restrict kd = g.kd;                \
  const double* __restrict kiso = g.kiso;            \
  (void)kiso;                                        \
  const double* __restrict dbs = g.dbs;              \
  const double* __restrict inv_lag = g.inv_lag;      \
  (void)inv_lag;                                     \
  const double* __restrict ramp = g.ramp;            \
  const double* __restrict pmin = g.pmin;            \
  const double* __restrict pmax = g.pmax;            \
  const double e = -df_hz, ae = std::fabs(e)

// The arrays of one segment never overlap; GCC honours restrict only on function parameters, so
// say so to the vectorizer directly.
#if defined(__GNUC__) && !defined(__clang__)
#define DL_IVDEP _Pragma("GCC ivdep")
#else
#define DL_IVDEP
#endif

namespace {

template <int S, bool ISO>
inline void steam_loop(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,
                       const SegmentArrays& a, double c, double h6, double* __restrict out) {
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  const double* __restrict inv_tch = t.p1;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    const double pv = DL_X(0), pm = DL_X(1), iso = DL_ISO_X(2);
    const double ed = deadband(e, ae, dbs[j]);
    const double ref = pref0[j] + kd[j] * ed + iso;
    const double dpv = limited_rate(ref, pv, inv_lag[j], ramp[j], pmin[j], pmax[j]);
    const double dpm = (pv - pm) * inv_tch[j];
    out[j] = pm;
    DL_PUT(0, dpv);
    DL_PUT(1, dpm);
    DL_ISO_PUT(2, pv, pmin[j], pmax[j]);
    if constexpr (S == 4) y0[j] = clamp(y0[j], pmin[j], pmax[j]);
  }
}

template <int S, bool ISO>
inline void reheat_loop(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,
                        const SegmentArrays& a, double c, double h6, double* __restrict out) {
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  DL_ARRAYS(3);
  const double* __restrict inv_tch = t.p1;
  const double* __restrict inv_trh = t.p2;
  const double* __restrict fhp = t.p3;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    const double pv = DL_X(0), hp = DL_X(1), rh = DL_X(2), iso = DL_ISO_X(3);
    const double ed = deadband(e, ae, dbs[j]);
    const double ref = pref0[j] + kd[j] * ed + iso;
    const double dpv = limited_rate(ref, pv, inv_lag[j], ramp[j], pmin[j], pmax[j]);
    const double dhp = (pv - hp) * inv_tch[j];
    const double drh = (hp - rh) * inv_trh[j];
    out[j] = fhp[j] * hp + (1.0 - fhp[j]) * rh;
    DL_PUT(0, dpv);
    DL_PUT(1, dhp);
    DL_PUT(2, drh);
    DL_ISO_PUT(3, pv, pmin[j], pmax[j]);
    if constexpr (S == 4) y0[j] = clamp(y0[j], pmin[j], pmax[j]);
  }
}

template <int S, bool ISO>
inline void hydro_loop(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,
                       const SegmentArrays& a, double c, double h6, double* __restrict out) {
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  DL_ARRAYS(3);
  const double* __restrict inv_ta = t.p1;
  const double* __restrict gain_hf = t.p2;
  const double* __restrict inv_half_tw = t.p3;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    const double w = DL_X(0), pv = DL_X(1), z = DL_X(2), iso = DL_ISO_X(3);
    const double ed = deadband(e, ae, dbs[j]);
    const double ref = pref0[j] + kd[j] * ed + iso;
    // Transient droop (1 + s TR)/(1 + s TR RT/R) as a direct path plus a lag.
    const double u = gain_hf[j] * ref + (1.0 - gain_hf[j]) * w;
    const double dw = (ref - w) * inv_ta[j];
    const double dpv = limited_rate(u, pv, inv_lag[j], ramp[j], pmin[j], pmax[j]);
    const double dz = (pv - z) * inv_half_tw[j];
    out[j] = 3.0 * z - 2.0 * pv;
    DL_PUT(0, dw);
    DL_PUT(1, dpv);
    DL_PUT(2, dz);
    DL_ISO_PUT(3, pv, pmin[j], pmax[j]);
    if constexpr (S == 4) y1[j] = clamp(y1[j], pmin[j], pmax[j]);
  }
}

template <int S, bool ISO>
inline void gas_loop(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,
                     const SegmentArrays& a, double c, double h6, double* __restrict out) {
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  DL_ARRAYS(3);
  const double* __restrict inv_tf = t.p1;
  const double* __restrict inv_tc = t.p2;
  const double* __restrict load_limit = t.p3;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    const double pv = DL_X(0), fuel = DL_X(1), pm = DL_X(2), iso = DL_ISO_X(3);
    const double ed = deadband(e, ae, dbs[j]);
    const double ref = pref0[j] + kd[j] * ed + iso;
    const double dpv = limited_rate(ref, pv, inv_lag[j], ramp[j], pmin[j], pmax[j]);
    const double dfuel = (std::min(pv, load_limit[j]) - fuel) * inv_tf[j];
    const double dpm = (fuel - pm) * inv_tc[j];
    out[j] = pm;
    DL_PUT(0, dpv);
    DL_PUT(1, dfuel);
    DL_PUT(2, dpm);
    DL_ISO_PUT(3, pv, pmin[j], std::min(pmax[j], load_limit[j]));
    if constexpr (S == 4) y0[j] = clamp(y0[j], pmin[j], pmax[j]);
  }
}

template <int S, bool ISO>
inline void battery_loop(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,
                         const SegmentArrays& a, double c, double h6, double* __restrict out) {
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  DL_ARRAYS(3);
  const double* __restrict inv_tfilt = t.p1;
  const double* __restrict inv_tr = t.p2;
  const double* __restrict kin = t.p3;
  const double* __restrict cap = t.p4;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    const double q = DL_X(0), p = DL_X(1), en = DL_X(2), iso = DL_ISO_X(3);
    const double ed = deadband(e, ae, dbs[j]);
    const double rocof = (df_hz - q) * inv_tfilt[j];  // washout s/(1 + s Tf) on df
    const double ref = pref0[j] + kd[j] * ed + iso - kin[j] * rocof;
    // No discharge when empty, no charge when full.
    const double hi = en <= 0.0 ? std::min(pmax[j], 0.0) : pmax[j];
    const double lo = en >= cap[j] ? std::max(pmin[j], 0.0) : pmin[j];
    double r = (clamp(ref, lo, hi) - p) * inv_tr[j];
    r = std::min(r, ramp[j]);
    r = std::max(r, -ramp[j]);
    const double den = -p * (1.0 / 3600.0);
    out[j] = p;
    DL_PUT(0, rocof);
    DL_PUT(1, r);
    DL_PUT(2, den);
    DL_ISO_PUT(3, p, lo, hi);
    if constexpr (S == 4) y2[j] = clamp(y2[j], 0.0, cap[j]);
  }
}

#undef DL_ARRAYS
#undef DL_X
#undef DL_PUT
#undef DL_ISO_X
#undef DL_ISO_PUT
#undef DL_GOVERNOR
#undef DL_IVDEP

// Dispatches the stage number to the loop instance (compiled inside each ISA clone).
#define DL_DISPATCH_ISO(loop, ISO)                                   \
  switch (s.stage) {                                                 \
    case 1: loop<1, ISO>(n, df_hz, g, t, a, s.c, s.h6, out); break;  \
    case 2: loop<2, ISO>(n, df_hz, g, t, a, s.c, s.h6, out); break;  \
    case 3: loop<3, ISO>(n, df_hz, g, t, a, s.c, s.h6, out); break;  \
    default: loop<4, ISO>(n, df_hz, g, t, a, s.c, s.h6, out); break; \
  }
#define DL_DISPATCH(loop)          \
  if (s.iso) {                     \
    DL_DISPATCH_ISO(loop, true)    \
  } else {                         \
    DL_DISPATCH_ISO(loop, false)   \
  }

}  // namespace

// The entry points of every instruction-set variant: the same source compiled for AVX-512
// (x86-64-v4), AVX2 and baseline x86-64. Every variant gives the same bits.
#define DL_ENTRY_POINTS(ATTR)                                                                      \
  ATTR void steam_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,  \
                        const SegmentArrays& a, const StageInfo& s, double* out) {                  \
    DL_DISPATCH(steam_loop)                                                                         \
  }                                                                                                 \
  ATTR void reheat_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, \
                         const SegmentArrays& a, const StageInfo& s, double* out) {                 \
    DL_DISPATCH(reheat_loop)                                                                        \
  }                                                                                                 \
  ATTR void hydro_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,  \
                        const SegmentArrays& a, const StageInfo& s, double* out) {                  \
    DL_DISPATCH(hydro_loop)                                                                         \
  }                                                                                                 \
  ATTR void gas_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,    \
                      const SegmentArrays& a, const StageInfo& s, double* out) {                    \
    DL_DISPATCH(gas_loop)                                                                           \
  }                                                                                                 \
  ATTR void battery_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t,\
                          const SegmentArrays& a, const StageInfo& s, double* out) {                \
    DL_DISPATCH(battery_loop)                                                                       \
  }                                                                                                 \
  ATTR double ordered_sum(std::size_t n, const double* v) { return ordered_sum_body(n, v); }

// Eight interleaved partial sums combined pairwise: a fixed order the compiler can map onto vector
// lanes without reassociating anything, so every ISA variant gives the same bits.
inline double ordered_sum_body(std::size_t n, const double* v) {
  double s[8] = {0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0};
  std::size_t i = 0;
  for (; i + 8 <= n; i += 8)
    for (int l = 0; l < 8; ++l) s[l] += v[i + static_cast<std::size_t>(l)];
  for (; i < n; ++i) s[0] += v[i];
  return ((s[0] + s[1]) + (s[2] + s[3])) + ((s[4] + s[5]) + (s[6] + s[7]));
}

namespace baseline {
DL_ENTRY_POINTS()
}
#if DL_VARIANTS
namespace avx2 {
DL_ENTRY_POINTS(__attribute__((target("avx2"))))
}
namespace avx512 {
DL_ENTRY_POINTS(__attribute__((target("arch=x86-64-v4"))))
}
#endif

#undef DL_ENTRY_POINTS
#undef DL_DISPATCH
#undef DL_DISPATCH_ISO

namespace {

struct KernelSet {
  const char* name;
  decltype(&baseline::steam_stage) steam, reheat, hydro, gas, battery;
  decltype(&baseline::ordered_sum) sum;
};

#define DL_SET(ns) {#ns, &ns::steam_stage, &ns::reheat_stage, &ns::hydro_stage, &ns::gas_stage, &ns::battery_stage, &ns::ordered_sum}
constexpr KernelSet kBaseline = DL_SET(baseline);
#if DL_VARIANTS
constexpr KernelSet kAvx2 = DL_SET(avx2);
constexpr KernelSet kAvx512 = DL_SET(avx512);
#endif
#undef DL_SET

// What this processor runs: the widest variant it supports.
const KernelSet* widest() {
#if DL_VARIANTS
  __builtin_cpu_init();
  if (__builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512bw") && __builtin_cpu_supports("avx512cd") &&
      __builtin_cpu_supports("avx512dq") && __builtin_cpu_supports("avx512vl"))
    return &kAvx512;
  if (__builtin_cpu_supports("avx2")) return &kAvx2;
#endif
  return &kBaseline;
}

std::atomic<const KernelSet*> g_active{nullptr};

const KernelSet& active() {
  const KernelSet* k = g_active.load(std::memory_order_relaxed);
  if (!k) {
    k = widest();
    g_active.store(k, std::memory_order_relaxed);
  }
  return *k;
}

}  // namespace

void steam_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, const SegmentArrays& a,
                 const StageInfo& s, double* out) {
  active().steam(n, df_hz, g, t, a, s, out);
}
void reheat_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, const SegmentArrays& a,
                  const StageInfo& s, double* out) {
  active().reheat(n, df_hz, g, t, a, s, out);
}
void hydro_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, const SegmentArrays& a,
                 const StageInfo& s, double* out) {
  active().hydro(n, df_hz, g, t, a, s, out);
}
void gas_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, const SegmentArrays& a,
               const StageInfo& s, double* out) {
  active().gas(n, df_hz, g, t, a, s, out);
}
void battery_stage(std::size_t n, double df_hz, const GovernorParams& g, const TypeParams& t, const SegmentArrays& a,
                   const StageInfo& s, double* out) {
  active().battery(n, df_hz, g, t, a, s, out);
}
double ordered_sum(std::size_t n, const double* v) { return active().sum(n, v); }

}  // namespace droopline::detail

namespace droopline {

bool use_kernels(std::string_view variant, std::string& error) {
  using namespace detail;
  const KernelSet* best = widest();
  const KernelSet* want = nullptr;
  if (variant == "baseline") want = &kBaseline;
#if DL_VARIANTS
  else if (variant == "avx2") want = &kAvx2;
  else if (variant == "avx512") want = &kAvx512;
#else
  else if (variant == "avx2" || variant == "avx512") want = &kBaseline;  // this build has one portable variant
#endif
  else {
    error = "unknown kernel variant \"" + std::string(variant.substr(0, 32)) + "\" (expected avx512, avx2 or baseline)";
    return false;
  }
  // A variant is usable when it is not wider than what the processor runs.
  auto rank = [](const KernelSet* k) { return std::string_view(k->name) == "avx512" ? 2 : std::string_view(k->name) == "avx2" ? 1 : 0; };
  if (rank(want) > rank(best)) {
    error = "this processor cannot run the " + std::string(variant) + " kernels (its widest are " + best->name + ")";
    return false;
  }
  g_active.store(want, std::memory_order_relaxed);
  return true;
}

const char* kernels_in_use() { return detail::active().name; }

bool kernel_variants_built() { return DL_VARIANTS != 0; }

}  // namespace droopline
