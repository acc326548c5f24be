// Secondary control (model notes, section 7): PI on the area control error, sampled every
// period, shared over the participants by share and kept inside each unit's range.
#include <algorithm>
#include <cmath>

#include "engine_impl.hpp"

namespace droopline {

// The three modes of the trade (model notes, section 12).
double Engine::Impl::ace(std::size_t a) {
  ensure_outputs();
  const detail::AreaRt& ar = areas[a];
  switch (ar.agc_mode) {
    case AgcMode::constant_frequency:
      return ar.bias * y[a];
    case AgcMode::constant_interchange:
      return out_net[a] - ar.sched_export;
    case AgcMode::tie_line_bias:
      break;
  }
  return (out_net[a] - ar.sched_export) + ar.bias * y[a];
}

// Schedules set with a ramp move linearly, step by step, from where they were to the new value.
void Engine::Impl::advance_schedules() {
  if (!sched_ramps) return;
  sched_ramps = false;
  for (detail::AreaRt& ar : areas) {
    if (!ar.sched_ramping) continue;
    const std::int64_t done = n - ar.sched_n0;
    if (done >= ar.sched_steps) {
      ar.sched_export = ar.sched_to;
      ar.sched_ramping = false;
    } else {
      ar.sched_export = ar.sched_from +
                        (ar.sched_to - ar.sched_from) * static_cast<double>(done) / static_cast<double>(ar.sched_steps);
      sched_ramps = true;
    }
  }
}

void Engine::Impl::run_agc(std::size_t a) {
  detail::AreaRt& ar = areas[a];
  const double period = static_cast<double>(ar.period_steps) * h;
  const double e = ace(a);
  const double trial = ar.integral + e * period;
  const double want = -(ar.kp * e + ar.ki * trial);
  const double got = allocate_agc(a, want, false);
  // Anti-windup: keep the integral while the participants cannot follow it further.
  const bool saturated = std::fabs(got - want) > 1e-9 * std::max(1.0, std::fabs(want));
  const bool deeper = std::fabs(-(ar.kp * e + ar.ki * ar.integral)) < std::fabs(want);
  if (!(saturated && deeper)) ar.integral = trial;
  ar.agc_total = allocate_agc(a, -(ar.kp * e + ar.ki * ar.integral), true);
}

// Water-filling of a requested correction over participants by share, within each unit's
// [min, max] around its setpoint. Returns what could be placed; writes pagc when `commit`. Works
// in the pre-sized agc_give / agc_fixed: the step does not allocate.
double Engine::Impl::allocate_agc(std::size_t a, double want, bool commit) {
  const auto& parts = areas[a].participants;
  if (parts.empty()) return 0.0;
  double* give = agc_give.data();
  unsigned char* fixed = agc_fixed.data();
  std::fill_n(give, parts.size(), 0.0);
  std::fill_n(fixed, parts.size(), static_cast<unsigned char>(0));
  double left = want;
  for (int round = 0; round < 8 && std::fabs(left) > 1e-12; ++round) {
    double shares = 0.0;
    for (std::size_t i = 0; i < parts.size(); ++i)
      if (!fixed[i]) shares += def.units[unit_of_slot[parts[i]]].agc_share;
    if (shares <= 0.0) break;
    double placed = 0.0;
    for (std::size_t i = 0; i < parts.size(); ++i) {
      if (fixed[i]) continue;
      const std::size_t s = parts[i];
      const double share = def.units[unit_of_slot[s]].agc_share / shares;
      const double lo = pmin[s] - pset[s], hi = pmax[s] - pset[s];
      const double wish = give[i] + left * share;
      const double now = std::clamp(wish, lo, hi);
      if (now != wish) fixed[i] = 1;
      placed += now - give[i];
      give[i] = now;
    }
    left -= placed;
  }
  double total = 0.0;
  for (std::size_t i = 0; i < parts.size(); ++i) {
    total += give[i];
    if (commit) {
      pagc[parts[i]] = give[i];
      pref0[parts[i]] = pset[parts[i]] + give[i];
    }
  }
  return total;
}

}  // namespace droopline
