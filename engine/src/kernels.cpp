#include "kernels.hpp"

#include <algorithm>
#include <cmath>

#if defined(__GNUC__) && defined(__x86_64__) && !defined(__clang__) && !defined(DROOPLINE_NO_CLONES)
#define DROOPLINE_CLONES __attribute__((target_clones("avx2", "default")))
#else
#define DROOPLINE_CLONES
#endif

namespace droopline::detail {
namespace {

// Speed error after the deadband. e = -df; the caller passes |e| too.
inline double deadband(double e, double ae, double db, double stepm) {
  const double off = std::copysign(std::max(ae - db, 0.0), e);
  const double stp = ae > db ? e : 0.0;
  return stepm != 0.0 ? stp : off;
}

// Valve/power rate: first-order toward the reference, rate-limited, and stopped at a limit
// in the outward direction so the state never winds up beyond it.
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

}  // namespace

DROOPLINE_CLONES
void steam_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tch,
               const SegmentState& s, double* out_pm) {
  const double e = -df_hz, ae = std::fabs(e);
  const double* __restrict pv = s.x[0];
  const double* __restrict pm = s.x[1];
  const double* __restrict iso = s.x[2];
  double* __restrict dpv = s.dx[0];
  double* __restrict dpm = s.dx[1];
  double* __restrict diso = s.dx[2];
  for (std::size_t j = 0; j < n; ++j) {
    const double ed = deadband(e, ae, g.db[j], g.stepm[j]);
    const double ref = g.pset[j] + g.pagc[j] + g.kd[j] * ed + iso[j];
    dpv[j] = limited_rate(ref, pv[j], g.inv_lag[j], g.ramp[j], g.pmin[j], g.pmax[j]);
    dpm[j] = (pv[j] - pm[j]) * inv_tch[j];
    diso[j] = iso_rate(g.kiso[j], ed, pv[j], g.pmin[j], g.pmax[j]);
    out_pm[j] = pm[j];
  }
}

DROOPLINE_CLONES
void reheat_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tch,
                const double* inv_trh, const double* fhp, const SegmentState& s, double* out_pm) {
  const double e = -df_hz, ae = std::fabs(e);
  const double* __restrict pv = s.x[0];
  const double* __restrict hp = s.x[1];
  const double* __restrict rh = s.x[2];
  const double* __restrict iso = s.x[3];
  double* __restrict dpv = s.dx[0];
  double* __restrict dhp = s.dx[1];
  double* __restrict drh = s.dx[2];
  double* __restrict diso = s.dx[3];
  for (std::size_t j = 0; j < n; ++j) {
    const double ed = deadband(e, ae, g.db[j], g.stepm[j]);
    const double ref = g.pset[j] + g.pagc[j] + g.kd[j] * ed + iso[j];
    dpv[j] = limited_rate(ref, pv[j], g.inv_lag[j], g.ramp[j], g.pmin[j], g.pmax[j]);
    dhp[j] = (pv[j] - hp[j]) * inv_tch[j];
    drh[j] = (hp[j] - rh[j]) * inv_trh[j];
    diso[j] = iso_rate(g.kiso[j], ed, pv[j], g.pmin[j], g.pmax[j]);
    out_pm[j] = fhp[j] * hp[j] + (1.0 - fhp[j]) * rh[j];
  }
}

DROOPLINE_CLONES
void hydro_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_ta,
               const double* gain_hf, const double* inv_half_tw, const SegmentState& s,
               double* out_pm) {
  const double e = -df_hz, ae = std::fabs(e);
  const double* __restrict w = s.x[0];
  const double* __restrict pv = s.x[1];
  const double* __restrict z = s.x[2];
  const double* __restrict iso = s.x[3];
  double* __restrict dw = s.dx[0];
  double* __restrict dpv = s.dx[1];
  double* __restrict dz = s.dx[2];
  double* __restrict diso = s.dx[3];
  for (std::size_t j = 0; j < n; ++j) {
    const double ed = deadband(e, ae, g.db[j], g.stepm[j]);
    const double ref = g.pset[j] + g.pagc[j] + g.kd[j] * ed + iso[j];
    // Transient droop (1 + s TR)/(1 + s TR RT/R) as a direct path plus a lag.
    const double u = gain_hf[j] * ref + (1.0 - gain_hf[j]) * w[j];
    dw[j] = (ref - w[j]) * inv_ta[j];
    dpv[j] = limited_rate(u, pv[j], g.inv_lag[j], g.ramp[j], g.pmin[j], g.pmax[j]);
    dz[j] = (pv[j] - z[j]) * inv_half_tw[j];
    diso[j] = iso_rate(g.kiso[j], ed, pv[j], g.pmin[j], g.pmax[j]);
    out_pm[j] = 3.0 * z[j] - 2.0 * pv[j];
  }
}

DROOPLINE_CLONES
void gas_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tf,
             const double* inv_tc, const double* load_limit, const SegmentState& s,
             double* out_pm) {
  const double e = -df_hz, ae = std::fabs(e);
  const double* __restrict pv = s.x[0];
  const double* __restrict fuel = s.x[1];
  const double* __restrict pm = s.x[2];
  const double* __restrict iso = s.x[3];
  double* __restrict dpv = s.dx[0];
  double* __restrict dfuel = s.dx[1];
  double* __restrict dpm = s.dx[2];
  double* __restrict diso = s.dx[3];
  for (std::size_t j = 0; j < n; ++j) {
    const double ed = deadband(e, ae, g.db[j], g.stepm[j]);
    const double ref = g.pset[j] + g.pagc[j] + g.kd[j] * ed + iso[j];
    dpv[j] = limited_rate(ref, pv[j], g.inv_lag[j], g.ramp[j], g.pmin[j], g.pmax[j]);
    dfuel[j] = (std::min(pv[j], load_limit[j]) - fuel[j]) * inv_tf[j];
    dpm[j] = (fuel[j] - pm[j]) * inv_tc[j];
    diso[j] = iso_rate(g.kiso[j], ed, pv[j], g.pmin[j], std::min(g.pmax[j], load_limit[j]));
    out_pm[j] = pm[j];
  }
}

DROOPLINE_CLONES
void battery_rhs(std::size_t n, double df_hz, const GovernorParams& g, const double* inv_tfilt,
                 const double* inv_tr, const double* kin, const double* cap,
                 const SegmentState& s, double* out_pm) {
  const double e = -df_hz, ae = std::fabs(e);
  const double* __restrict q = s.x[0];
  const double* __restrict p = s.x[1];
  const double* __restrict en = s.x[2];
  const double* __restrict iso = s.x[3];
  double* __restrict dq = s.dx[0];
  double* __restrict dp = s.dx[1];
  double* __restrict den = s.dx[2];
  double* __restrict diso = s.dx[3];
  for (std::size_t j = 0; j < n; ++j) {
    const double ed = deadband(e, ae, g.db[j], g.stepm[j]);
    const double rocof = (df_hz - q[j]) * inv_tfilt[j];  // washout s/(1 + s Tf) on df
    const double ref = g.pset[j] + g.pagc[j] + g.kd[j] * ed + iso[j] - kin[j] * rocof;
    // No discharge when empty, no charge when full.
    const double hi = en[j] <= 0.0 ? std::min(g.pmax[j], 0.0) : g.pmax[j];
    const double lo = en[j] >= cap[j] ? std::max(g.pmin[j], 0.0) : g.pmin[j];
    const double target = std::min(std::max(ref, lo), hi);
    double r = (target - p[j]) * inv_tr[j];
    r = std::min(r, g.ramp[j]);
    r = std::max(r, -g.ramp[j]);
    dq[j] = rocof;
    dp[j] = r;
    den[j] = -p[j] * (1.0 / 3600.0);
    diso[j] = iso_rate(g.kiso[j], ed, p[j], lo, hi);
    out_pm[j] = p[j];
  }
}

DROOPLINE_CLONES
void rk4_stage(std::size_t n, const double* y, const double* k, double* acc, double* xs, double w,
               double c, bool first) {
  const double* __restrict yy = y;
  const double* __restrict kk = k;
  double* __restrict aa = acc;
  double* __restrict xx = xs;
  if (first) {
    for (std::size_t i = 0; i < n; ++i) {
      aa[i] = kk[i];
      xx[i] = yy[i] + c * kk[i];
    }
  } else {
    for (std::size_t i = 0; i < n; ++i) {
      aa[i] = aa[i] + w * kk[i];
      xx[i] = yy[i] + c * kk[i];
    }
  }
}

DROOPLINE_CLONES
void rk4_finish(std::size_t n, double* y, const double* acc, const double* k, double c) {
  double* __restrict yy = y;
  const double* __restrict aa = acc;
  const double* __restrict kk = k;
  for (std::size_t i = 0; i < n; ++i) yy[i] = yy[i] + c * (aa[i] + kk[i]);
}

double ordered_sum(std::size_t n, const double* v) {
  double s0 = 0.0, s1 = 0.0, s2 = 0.0, s3 = 0.0;
  std::size_t i = 0;
  for (; i + 4 <= n; i += 4) {
    s0 += v[i];
    s1 += v[i + 1];
    s2 += v[i + 2];
    s3 += v[i + 3];
  }
  for (; i < n; ++i) s0 += v[i];
  return (s0 + s1) + (s2 + s3);
}

}  // namespace droopline::detail
