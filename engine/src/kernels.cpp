#include "kernels.hpp"

#include <algorithm>
#include <cmath>

#include <array>
#include <atomic>
#include <string>

#include "droopline/kernel_choice.hpp"
#include "models/models.hpp"

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

// The isochronous integrator stops while the valve sits at the limit it is pushing against.
inline double iso_rate(double kiso, double ed, double v, double lo, double hi) {
  double r = kiso * ed;
  r = (v >= hi && r > 0.0) ? 0.0 : r;
  r = (v <= lo && r < 0.0) ? 0.0 : r;
  return r;
}

}  // namespace

// Local restrict-qualified views of one segment's arrays, and the per-stage state read and
// bookkeeping write, shared by every kernel below (macros keep the restrict qualification that a
// helper function's parameters would lose after inlining).
#define DL_ARRAYS(i)                                \
  double* __restrict y##i = a.y[i];                 \
  double* __restrict k##i = a.k[i];                 \
  double* __restrict ac##i = a.acc[i];              \
  (void)y##i, (void)k##i, (void)ac##i
#define DL_X(i) (S == 1 ? y##i[j] : y##i[j] + c * k##i[j])
#define DL_PUT(i, d)                                 \
  do {                                               \
    if constexpr (S == 1) {                          \
      k##i[j] = (d);                                 \
    } else if constexpr (S == 2) {                   \
      ac##i[j] = k##i[j] + 2.0 * (d);                \
      k##i[j] = (d);                                 \
    } else if constexpr (S == 3) {                   \
      k##i[j] = (d);                                 \
      ac##i[j] = ac##i[j] + 2.0 * (d);               \
    } else {                                         \
      y##i[j] = y##i[j] + h6 * (ac##i[j] + (d));     \
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
  const double* __restrict pmax = g.pmax

// The arrays of one segment never overlap; GCC honours restrict only on function parameters, so
// say so to the vectorizer directly.
#if defined(__GNUC__) && !defined(__clang__)
#define DL_IVDEP _Pragma("GCC ivdep")
#else
#define DL_IVDEP
#endif

namespace {

// One RK4 stage of a segment of model M: the loop body reads the stage state, lets the model
// work out its rates and output, advances the isochronous integrator against the limits the
// model names, and in stage 4 keeps the model's clamped state in its range.
#define DL_READ(i)                                        \
  if constexpr (i < kIso) {                               \
    x[i] = DL_X(i);                                       \
  } else if constexpr (i == kIso) {                       \
    x[i] = ISO ? DL_X(i) : 0.0;                           \
  }
#define DL_PARAM(i) \
  if constexpr (i < M::kParams) p[i] = p##i[j]
#define DL_WRITE(i)                                       \
  if constexpr (i < kIso || (ISO && i == kIso)) DL_PUT(i, d[i])
#define DL_CLAMP(i)                                                         \
  if constexpr (S == 4 && M::kClamped == i) {                               \
    const Range range = M::clamp_range(p, drive);                           \
    y##i[j] = clamp(y##i[j], range.lo, range.hi);                           \
  }

// How the frequency deviation reaches the loop: one value for the whole segment (a single run:
// every unit sees its area's df) or one per element (an ensemble: each member's lane its own).
// Either way each element sees the same value through the same operations, so the bits agree.
struct DfScalar {
  double v;
  double operator[](std::size_t) const { return v; }
};
struct DfPerElement {
  const double* __restrict v;
  double operator[](std::size_t j) const { return v[j]; }
};

// Always inlined into each instruction-set variant's entry point, so the loop is compiled for
// that variant's instructions (an out-of-line copy would run the baseline code).
template <class M, int S, bool ISO, class Df>
[[gnu::always_inline]] inline void model_loop(std::size_t n, Df df, const GovernorParams& g, const ModelParams& t,
                                              const SegmentArrays& a, double c, double h6, double* __restrict out) {
  static_assert(M::kStates <= kMaxStates && M::kParams <= kMaxParams);
  constexpr std::size_t kIso = M::kStates - 1;
  DL_GOVERNOR;
  DL_ARRAYS(0);
  DL_ARRAYS(1);
  DL_ARRAYS(2);
  DL_ARRAYS(3);
  const double* __restrict p0 = t.p[0];
  const double* __restrict p1 = t.p[1];
  const double* __restrict p2 = t.p[2];
  const double* __restrict p3 = t.p[3];
  (void)p1, (void)p2, (void)p3;
  DL_IVDEP
  for (std::size_t j = 0; j < n; ++j) {
    double x[M::kStates], d[M::kStates], p[M::kParams];
    DL_READ(0);
    DL_READ(1);
    DL_READ(2);
    DL_READ(3);
    DL_PARAM(0);
    DL_PARAM(1);
    DL_PARAM(2);
    DL_PARAM(3);
    const double df_hz = df[j], e = -df_hz, ae = std::fabs(e);
    const double ed = deadband(e, ae, dbs[j]);
    const Drive drive{pref0[j] + kd[j] * ed + x[kIso], df_hz, inv_lag[j], ramp[j], pmin[j], pmax[j]};
    const RateResult r = M::rates(x, p, drive, d);
    out[j] = r.output_mw;
    if constexpr (ISO) d[kIso] = iso_rate(kiso[j], ed, r.held, r.lo_mw, r.hi_mw);
    DL_WRITE(0);
    DL_WRITE(1);
    DL_WRITE(2);
    DL_WRITE(3);
    DL_CLAMP(0);
    DL_CLAMP(1);
    DL_CLAMP(2);
    DL_CLAMP(3);
  }
}

#undef DL_READ
#undef DL_PARAM
#undef DL_WRITE
#undef DL_CLAMP
#undef DL_ARRAYS
#undef DL_X
#undef DL_PUT
#undef DL_GOVERNOR
#undef DL_IVDEP

// Dispatches the stage number to the loop instance (compiled inside each ISA clone).
#define DL_DISPATCH_ISO(loop, ISO, DF)                             \
  switch (s.stage) {                                               \
    case 1: loop, 1, ISO>(n, DF, g, t, a, s.c, s.h6, out); break;  \
    case 2: loop, 2, ISO>(n, DF, g, t, a, s.c, s.h6, out); break;  \
    case 3: loop, 3, ISO>(n, DF, g, t, a, s.c, s.h6, out); break;  \
    default: loop, 4, ISO>(n, DF, g, t, a, s.c, s.h6, out); break; \
  }
#define DL_DISPATCH(loop, DF)          \
  if (s.iso) {                         \
    DL_DISPATCH_ISO(loop, true, DF)    \
  } else {                             \
    DL_DISPATCH_ISO(loop, false, DF)   \
  }

}  // namespace

using StageFn = void (*)(std::size_t, double, const GovernorParams&, const ModelParams&, const SegmentArrays&,
                         const StageInfo&, double*);
using LanesStageFn = void (*)(std::size_t, const double*, const GovernorParams&, const ModelParams&,
                              const SegmentArrays&, const StageInfo&, double*);

// The entry points of every instruction-set variant: the same source compiled for AVX-512
// (x86-64-v4), AVX2 and baseline x86-64, one stage function per model. Every variant gives the
// same bits.
#define DL_ENTRY_POINTS(ATTR)                                                                                \
  template <class M>                                                                                         \
  ATTR void model_stage(std::size_t n, double df_hz, const GovernorParams& g, const ModelParams& t,           \
                        const SegmentArrays& a, const StageInfo& s, double* out) {                            \
    DL_DISPATCH(model_loop<M, DfScalar{df_hz})                                                               \
  }                                                                                                           \
  template <class M>                                                                                         \
  ATTR void lanes_stage(std::size_t n, const double* df, const GovernorParams& g, const ModelParams& t,       \
                        const SegmentArrays& a, const StageInfo& s, double* out) {                            \
    DL_DISPATCH(model_loop<M, DfPerElement{df})                                                              \
  }                                                                                                           \
  template <class... Ms>                                                                                      \
  constexpr std::array<StageFn, sizeof...(Ms)> stage_table(ModelList<Ms...>) {                                \
    return {&model_stage<Ms>...};                                                                             \
  }                                                                                                           \
  template <class... Ms>                                                                                      \
  constexpr std::array<LanesStageFn, sizeof...(Ms)> lanes_table(ModelList<Ms...>) {                           \
    return {&lanes_stage<Ms>...};                                                                             \
  }                                                                                                           \
  ATTR double ordered_sum(std::size_t n, const double* v) { return ordered_sum_body(n, v); }                   \
  ATTR void ordered_sums(std::size_t n, std::size_t lanes, const double* v, double* out) {                     \
    ordered_sums_body(n, lanes, v, out);                                                                      \
  }

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

// ordered_sum_body for each of `lanes` interleaved sequences (element i of lane l at v[i lanes +
// l]): lane by lane the same additions in the same order, done across the lanes side by side.
// The usual widths are compiled for their width; any other goes lane by lane.
template <std::size_t W>
[[gnu::always_inline]] inline void ordered_sums_fixed(std::size_t n, const double* v, double* out) {
  // Below eight values only the first partial sum takes any, from +0.0, so it never holds -0.0 and
  // adding the seven others' +0.0 leaves it as it is: the same bits without the 8 x W partial sums
  // (whose zeroing through memory was a quarter of this function's time in a 20-unit sweep).
  if (n < 8) {
    double s0[W] = {};
    for (std::size_t i = 0; i < n; ++i)
      for (std::size_t l = 0; l < W; ++l) s0[l] += v[i * W + l];
    for (std::size_t l = 0; l < W; ++l) out[l] = s0[l];
    return;
  }
  double s[8][W] = {};
  std::size_t i = 0;
  for (; i + 8 <= n; i += 8)
    for (std::size_t q = 0; q < 8; ++q)
      for (std::size_t l = 0; l < W; ++l) s[q][l] += v[(i + q) * W + l];
  for (; i < n; ++i)
    for (std::size_t l = 0; l < W; ++l) s[0][l] += v[i * W + l];
  for (std::size_t l = 0; l < W; ++l)
    out[l] = ((s[0][l] + s[1][l]) + (s[2][l] + s[3][l])) + ((s[4][l] + s[5][l]) + (s[6][l] + s[7][l]));
}
[[gnu::always_inline]] inline void ordered_sums_body(std::size_t n, std::size_t lanes, const double* v, double* out) {
  switch (lanes) {
    case 8: return ordered_sums_fixed<8>(n, v, out);
    case 4: return ordered_sums_fixed<4>(n, v, out);
    case 2: return ordered_sums_fixed<2>(n, v, out);
    default: break;
  }
  for (std::size_t l = 0; l < lanes; ++l) {
    double s[8] = {0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0, 0.0};
    std::size_t i = 0;
    for (; i + 8 <= n; i += 8)
      for (std::size_t q = 0; q < 8; ++q) s[q] += v[(i + q) * lanes + l];
    for (; i < n; ++i) s[0] += v[i * lanes + l];
    out[l] = ((s[0] + s[1]) + (s[2] + s[3])) + ((s[4] + s[5]) + (s[6] + s[7]));
  }
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
  std::array<StageFn, kModelCount> stage;        // by TurbineType
  std::array<LanesStageFn, kModelCount> lanes;   // by TurbineType
  decltype(&baseline::ordered_sum) sum;
  decltype(&baseline::ordered_sums) sums;
  std::size_t ensemble_lanes;  // doubles per vector register of the variant (ensemble width)
};

#define DL_SET(ns, width) \
  {#ns, ns::stage_table(Models{}), ns::lanes_table(Models{}), &ns::ordered_sum, &ns::ordered_sums, width}
constexpr KernelSet kBaseline = DL_SET(baseline, 4);
#if DL_VARIANTS
constexpr KernelSet kAvx2 = DL_SET(avx2, 4);
constexpr KernelSet kAvx512 = DL_SET(avx512, 8);
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

void model_stage(TurbineType type, std::size_t n, double df_hz, const GovernorParams& g, const ModelParams& t,
                 const SegmentArrays& a, const StageInfo& s, double* out) {
  active().stage[static_cast<std::size_t>(type)](n, df_hz, g, t, a, s, out);
}
double ordered_sum(std::size_t n, const double* v) { return active().sum(n, v); }
void lanes_stage(TurbineType type, std::size_t n, const double* df_hz, const GovernorParams& g, const ModelParams& t,
                 const SegmentArrays& a, const StageInfo& s, double* out_pm) {
  active().lanes[static_cast<std::size_t>(type)](n, df_hz, g, t, a, s, out_pm);
}
void ordered_sums(std::size_t n, std::size_t lanes, const double* v, double* out) { active().sums(n, lanes, v, out); }
std::size_t ensemble_lanes() { return active().ensemble_lanes; }

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
