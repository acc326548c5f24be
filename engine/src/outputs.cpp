// Outputs derived from the state (unit powers, tie flows, area balances), worked out when
// something reads them rather than after every step; a unit's reading; the state's names.
#include <algorithm>
#include <cmath>

#include "engine_impl.hpp"
#include "kernels.hpp"
#include "models/models.hpp"

namespace droopline {
namespace {

// Unit j's states and parameters in block b, in its model's order.
template <class M>
void gather(const detail::Block& b, const std::vector<double>& y, std::size_t j, double* x, double* p) {
  for (std::size_t i = 0; i < M::kStates; ++i) x[i] = y[b.off + i * b.n + j];
  for (std::size_t i = 0; i < M::kParams; ++i) p[i] = b.params[i][j];
}

}  // namespace

void Engine::Impl::ensure_outputs() {
  if (outputs_valid) return;
  outputs_valid = true;
  std::fill(out_gen.begin(), out_gen.end(), 0.0);
  for (detail::Block& b : blocks) {
    double* out = &pm[b.first_slot];
    detail::with_model(b.type, [&](auto model) {
      using M = decltype(model);
      for (std::size_t j = 0; j < b.n; ++j) {
        double x[M::kStates], p[M::kParams];
        gather<M>(b, y, j, x, p);
        out[j] = M::output(x, p);
      }
    });
    for (const detail::Segment& sg : b.segments)
      out_gen[sg.area] += detail::ordered_sum(sg.end - sg.begin, out + sg.begin);
  }
  std::fill(out_net.begin(), out_net.end(), 0.0);
  for (std::size_t t = 0; t < nt; ++t) ties[t].flow = 0.0;
  for (int t : active_ties) {
    detail::TieRt& tr = ties[t];
    tr.flow = tr.pmax * std::sin(y[na + tr.from] - y[na + tr.to]) + tr.dt * (y[tr.from] - y[tr.to]);
    out_net[tr.from] += tr.flow;
    out_net[tr.to] -= tr.flow;
  }
  const double t = time();
  for (std::size_t a = 0; a < na; ++a) {
    if (areas[a].collapsed) {
      rocof[a] = 0.0;
      continue;
    }
    const double load = current_load(a, t);
    rocof[a] = (out_gen[a] - load - out_net[a]) * inv_m[a];
  }
}

double Engine::Impl::current_load(std::size_t a, double t) const {
  const detail::AreaRt& ar = areas[a];
  return ar.pd0 - ar.shed_mw + extra_load(ar, t) + ar.noise_mw + ar.dmp * y[a];
}

UnitState Engine::Impl::unit_state(std::size_t u) {
  ensure_outputs();
  const detail::UnitRt& ur = units[u];
  const detail::Block& b = blocks[ur.block];
  const std::size_t s = ur.slot;
  UnitState st;
  st.p_mw = pm[s];
  st.setpoint_mw = pset[s];
  st.agc_mw = pagc[s];
  st.droop = ur.droop;
  st.deadband_hz = ur.deadband_hz;
  st.deadband = ur.deadband;
  st.mode = ur.mode;
  detail::with_model(b.type, [&](auto model) {
    using M = decltype(model);
    double x[M::kStates], p[M::kParams];
    gather<M>(b, y, ur.j, x, p);
    st.valve_mw = x[M::kValve];
    st.energy_mwh = M::energy_mwh(x);
    const double hi = M::upper_limit_mw(p, def_pmax[s]);
    st.headroom_up_mw = ur.online ? std::max(0.0, hi - st.p_mw) : 0.0;
    st.headroom_down_mw = ur.online ? std::max(0.0, st.p_mw - def_pmin[s]) : 0.0;
    const double tol = 1e-6 * std::max(1.0, std::fabs(hi));
    if (ur.starting)
      st.status = UnitStatus::starting;
    else if (!ur.online)
      st.status = ur.tripped ? UnitStatus::tripped : UnitStatus::offline;  // offline: stopped, or never started
    else if (ur.stopping)
      st.status = UnitStatus::stopping;
    else if (st.valve_mw >= hi - tol || M::cannot_raise(x, p, tol))
      st.status = UnitStatus::at_max;
    else if (st.valve_mw <= def_pmin[s] + tol || M::cannot_lower(x, p, tol))
      st.status = UnitStatus::at_min;
  });
  return st;
}

std::vector<std::string> Engine::Impl::state_names() const {
  std::vector<std::string> out(y.size());
  for (std::size_t a = 0; a < na; ++a) {
    out[a] = def.areas[a].id + ".df_hz";
    out[na + a] = def.areas[a].id + ".angle_rad";
  }
  for (const detail::Block& b : blocks)
    detail::with_model(b.type, [&](auto model) {
      using M = decltype(model);
      for (std::size_t which = 0; which < M::kStates; ++which)
        for (std::size_t j = 0; j < b.n; ++j)
          out[b.off + which * b.n + j] = def.units[unit_of_slot[b.first_slot + j]].id + "." + M::kStateNames[which];
    });
  return out;
}

}  // namespace droopline
