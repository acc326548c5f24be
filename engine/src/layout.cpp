// The state layout: slots grouped by turbine type, area and governor mode; the model parameters
// of each block; segments and work pieces; and a unit's start-up and shut-down.
#include <algorithm>
#include <cmath>
#include <numbers>
#include <numeric>

#include "engine_impl.hpp"
#include "models/models.hpp"

namespace droopline {

using detail::Block;
using detail::kNoRamp;
using detail::Segment;
using detail::UnitRt;

Engine::Impl::Impl(const CheckedSystem& checked) : EngineState(checked) {
  const InitialFlows& flows = system.flows();
  // Ids are looked up in the checked system's index, here at creation only.
  auto area_idx = [&ids = system.index().areas](const std::string& id) { return ids.find(id)->second; };
  f0 = def.nominal_hz;
  h = def.step_s;
  n_total = std::llround(def.duration_s / h);
  if (const double r = std::round(1.0 / h); std::fabs(1.0 / h - r) < 1e-9 * r) steps_per_s = r;
  na = def.areas.size();
  nt = def.ties.size();
  nu = def.units.size();
  auto steps_of = [&](double s) { return std::max<std::int64_t>(1, std::llround(s / h)); };

  areas.resize(na);
  for (std::size_t a = 0; a < na; ++a) {
    const AreaDef& ad = def.areas[a];
    detail::AreaRt& ar = areas[a];
    ar.pd0 = ad.demand_mw;
    ar.dmp = ad.load_damping * ad.demand_mw / f0;
    ar.stages.resize(ad.shedding.size());
    ar.rng = detail::NormalSource(def.seed * 0x100000001b3ULL + a + 1);
    ar.agc_on = ad.agc.enabled;
    ar.bias = ad.agc.bias_mw_per_hz ? *ad.agc.bias_mw_per_hz : natural_response_mw_per_hz(def, a);
    ar.kp = ad.agc.kp;
    ar.ki = ad.agc.ki_per_s;
    ar.period_steps = ad.agc.period_s > 0.0 ? steps_of(ad.agc.period_s) : 1;
    ar.agc_mode = ad.agc.mode;
  }
  ties.resize(nt);
  for (std::size_t t = 0; t < nt; ++t) {
    const TieDef& td = def.ties[t];
    detail::TieRt& tr = ties[t];
    tr.from = area_idx(td.from);
    tr.to = area_idx(td.to);
    tr.pmax = td.pmax_mw;
    tr.dt = td.damping_mw_per_hz;
    if (td.trip_angle_deg) tr.trip_rad = *td.trip_angle_deg * std::numbers::pi / 180.0;
    tr.in_service = td.in_service;
    tr.scheduled = flows.flow_mw[t];
  }

  // Slots: units sorted by (type, area, mode) so each segment is contiguous.
  units.resize(nu);
  std::vector<std::size_t> order(nu);
  std::iota(order.begin(), order.end(), 0);
  auto type_rank = [](TurbineType t) { return static_cast<int>(t); };
  std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t z) {
    const UnitDef &ux = def.units[x], &uz = def.units[z];
    if (ux.turbine.type != uz.turbine.type) return type_rank(ux.turbine.type) < type_rank(uz.turbine.type);
    if (ux.area != uz.area) return area_idx(ux.area) < area_idx(uz.area);
    return ux.governor.mode < uz.governor.mode;
  });
  unit_of_slot = order;
  for (auto* v : {&pref0, &pset, &pagc, &kd, &kiso, &dbs, &inv_lag, &ramp, &pmin, &pmax, &pm, &def_pmin, &def_pmax,
                  &def_ramp, &pm_stage})
    v->assign(nu, 0.0);

  std::size_t off = 2 * na;
  std::size_t slot = 0;
  for (std::size_t rank = 0; rank < detail::kModelCount; ++rank) {
    Block b;
    b.type = static_cast<TurbineType>(rank);
    b.first_slot = slot;
    detail::with_model(b.type, [&](auto model) { b.nstate = decltype(model)::kStates; });
    while (slot < nu && def.units[order[slot]].turbine.type == b.type) ++slot;
    b.n = slot - b.first_slot;
    if (b.n == 0) continue;
    b.off = off;
    off += b.n * b.nstate;
    for (auto& p : b.params) p.assign(b.n, 0.0);
    blocks.push_back(std::move(b));
  }
  y.assign(off, 0.0);
  k.assign(off, 0.0);
  acc.assign(off, 0.0);
  saved_y.assign(off, 0.0);
  for (std::size_t a = 0; a < na; ++a) y[na + a] = flows.angle_rad[a];

  for (std::size_t bi = 0; bi < blocks.size(); ++bi) {
    Block& b = blocks[bi];
    for (std::size_t j = 0; j < b.n; ++j) {
      const std::size_t s = b.first_slot + j, u = order[s];
      const UnitDef& ud = def.units[u];
      UnitRt& ur = units[u];
      ur.slot = s;
      ur.block = bi;
      ur.j = j;
      ur.area = area_idx(ud.area);
      ur.online = ud.online;
      ur.droop = ud.governor.droop;
      ur.deadband_hz = ud.governor.deadband_hz;
      ur.deadband = ud.governor.deadband;
      ur.mode = ud.governor.mode;
      ur.target_mw = ud.setpoint_mw;
      def_pmin[s] = unit_min_mw(ud);
      def_pmax[s] = unit_max_mw(ud);
      def_ramp[s] = ud.ramp_mw_per_s ? *ud.ramp_mw_per_s : kNoRamp;
      inv_lag[s] = 1.0 / ud.governor.lag_s;
      if (ud.online) {
        bring_online(u, ud.setpoint_mw, true);
      } else {
        take_offline(u);
        detail::with_model(b.type, [&](auto model) {
          using M = decltype(model);
          if constexpr (M::kCarried < M::kStates) state(u, M::kCarried) = M::carried_at_start(ud);
        });
      }
    }
  }
  for (std::size_t u = 0; u < nu; ++u) fill_type_params(u);
  rebuild_segments();
  update_inertia();
  update_topology();
  for (std::size_t a = 0; a < na; ++a) refresh_participants(a);
  agc_give.assign(nu, 0.0);
  agc_fixed.assign(nu, 0);

  for (auto* v : {&dfv, &thv, &gen, &net_out, &out_gen, &out_net, &lc0, &lc1, &rocof}) v->assign(na, 0.0);
  metrics = detail::DisturbanceTracker(na, h);

  for (const TimedAction& e : system.events()) schedule.emplace_back(std::llround(e.at_s / h), e.action);
  std::stable_sort(schedule.begin(), schedule.end(), [](const auto& a, const auto& b) { return a.first < b.first; });
  post_step();
}

// Model parameters from the definition and the current droop (hydro's compensation uses it).
void Engine::Impl::fill_type_params(std::size_t u) {
  const UnitRt& ur = units[u];
  Block& b = blocks[ur.block];
  detail::with_model(b.type, [&](auto model) {
    using M = decltype(model);
    double p[M::kParams];
    M::params(def.units[u], ur.droop, f0, p);
    for (std::size_t i = 0; i < M::kParams; ++i) b.params[i][ur.j] = p[i];
  });
}

void Engine::Impl::rebuild_segments() {
  for (Block& b : blocks) {
    b.segments.clear();
    for (std::size_t j = 0; j < b.n; ++j) {
      const UnitRt& ur = units[unit_of_slot[b.first_slot + j]];
      const bool iso = ur.mode == GovernorMode::isochronous;
      if (b.segments.empty() || b.segments.back().area != ur.area || b.segments.back().iso != iso)
        b.segments.push_back({ur.area, j, j, iso});
      b.segments.back().end = j + 1;
    }
  }
  rebuild_pieces();
}

void Engine::Impl::rebuild_pieces() {
  pieces.clear();
  for (std::size_t bi = 0; bi < blocks.size(); ++bi)
    for (const Segment& sg : blocks[bi].segments)
      for (std::size_t j = sg.begin; j < sg.end; j += kPieceUnits)
        pieces.push_back({bi, sg.area, j, std::min(sg.end, j + kPieceUnits), sg.iso});
  piece_gen.assign(pieces.size(), 0.0);
  calls.resize(pieces.size());  // sized here so that a step never allocates
  calls_key[0] = nullptr;       // the pieces' kernel calls are worked out again
}

void Engine::Impl::set_governor_gains(std::size_t u) {
  const UnitDef& ud = def.units[u];
  const UnitRt& ur = units[u];
  const std::size_t s = ur.slot;
  if (!ur.online) return;
  kd[s] = ud.rating_mw / (ur.droop * f0);
  kiso[s] = ur.mode == GovernorMode::isochronous ? kd[s] / ud.governor.integral_s : 0.0;
  dbs[s] = ur.deadband == DeadbandKind::step ? -ur.deadband_hz : ur.deadband_hz;
}

// Puts a unit in service with all states at `mw` (steady), or, when starting during a run, at
// its minimum stable output with the setpoint at `mw`: the governor then loads it.
void Engine::Impl::bring_online(std::size_t u, double mw, bool steady) {
  UnitRt& ur = units[u];
  const std::size_t s = ur.slot;
  if (ur.starting) --changing_units;
  ur.online = true;
  ur.tripped = ur.starting = ur.stopped = false;
  ur.target_mw = mw;
  ur.target_rate = 0.0;
  pset[s] = mw;
  pagc[s] = 0.0;
  pref0[s] = mw;
  pmin[s] = def_pmin[s];
  pmax[s] = def_pmax[s];
  ramp[s] = def_ramp[s];
  set_governor_gains(u);
  const double start = steady ? mw : std::max(def_pmin[s], 0.0);
  detail::with_model(blocks[ur.block].type, [&](auto model) {
    using M = decltype(model);
    double x[M::kStates] = {};  // the isochronous integrator starts at 0
    M::initial(start, y[ur.area], x);
    if constexpr (M::kCarried < M::kStates)  // kept across a trip; at t = 0 from the definition
      x[M::kCarried] = steady ? M::carried_at_start(def.units[u]) : state(u, M::kCarried);
    for (std::size_t i = 0; i < M::kStates; ++i) state(u, i) = x[i];
  });
  pm[s] = start;
}

// Zero every gain, limit and state (but a carried one): the unit's derivatives are then zero.
void Engine::Impl::take_offline(std::size_t u) {
  UnitRt& ur = units[u];
  const std::size_t s = ur.slot;
  if (ur.starting || ur.stopping) --changing_units;
  ur.online = ur.starting = ur.stopping = false;
  ur.target_rate = 0.0;
  pset[s] = pagc[s] = pref0[s] = kd[s] = kiso[s] = pmin[s] = pmax[s] = dbs[s] = 0.0;
  ramp[s] = kNoRamp;
  detail::with_model(blocks[ur.block].type, [&](auto model) {
    using M = decltype(model);
    for (std::size_t i = 0; i < M::kStates; ++i)
      if (i != M::kCarried) state(u, i) = 0.0;
  });
  pm[s] = 0.0;
}

// A start with a start-up time: the unit is `starting` (no output, no inertia) until its
// synchronisation step, when advance_units brings it online as a start without one would.
void Engine::Impl::begin_start(std::size_t u, double mw) {
  UnitRt& ur = units[u];
  ur.starting = true;
  ur.stopped = false;
  ur.sync_step = n + std::max<std::int64_t>(1, std::llround(def.units[u].start_up_s / h));
  ur.start_mw = mw;
  ++changing_units;
}

// A controlled stop: the secondary-control share is folded into the setpoint (the unit leaves
// secondary control), the lower limit is relaxed to zero, and the setpoint ramps to zero.
void Engine::Impl::begin_stop(std::size_t u, double rate_mw_per_s) {
  UnitRt& ur = units[u];
  const std::size_t s = ur.slot;
  pset[s] += pagc[s];
  pagc[s] = 0.0;
  pref0[s] = pset[s];
  pmin[s] = std::min(def_pmin[s], 0.0);
  ur.stopping = true;
  ur.stop_at_zero = -1;
  ur.target_mw = 0.0;
  if (ur.target_rate <= 0.0) ramping.push_back(u);
  ur.target_rate = rate_mw_per_s;
  ++changing_units;
  refresh_participants(ur.area);
}

// Between steps, after the setpoint ramps: starting units whose start-up time has passed
// synchronise; a stopping unit whose setpoint reached zero opens its breaker once its output is
// within 1 % of rating of zero, or has settled (moved less than 0.1 % of rating in a second: what
// is left is its governor's answer to the frequency), or kStopHoldS after, whatever it is then.
void Engine::Impl::advance_units() {
  if (changing_units == 0) return;
  constexpr double kStopHoldS = 600.0;
  const std::int64_t second = std::max<std::int64_t>(1, std::llround(1.0 / h));
  for (std::size_t u = 0; u < nu && changing_units > 0; ++u) {
    UnitRt& ur = units[u];
    const std::size_t a = ur.area;
    if (ur.starting && n >= ur.sync_step) {
      const double mw = ur.start_mw;
      bring_online(u, mw, false);
      update_inertia();
      refresh_participants(a);
      invalidate_outputs();
      Notice note = detail::notice_at(time(), NoticeKind::unit_synchronised,
                                      UnitStart{UnitId{static_cast<std::uint32_t>(u)}, mw});
      open_disturbance(a, -mw, CommandKind::unit_start, note);
      notices.push_back(std::move(note));
    } else if (ur.stopping && ur.target_rate <= 0.0) {
      ensure_outputs();
      const double p = pm[ur.slot], rating = def.units[u].rating_mw;
      if (ur.stop_at_zero < 0) {
        ur.stop_at_zero = n;
        ur.stop_last_p = p;
      }
      const std::int64_t waited = n - ur.stop_at_zero;
      bool open = std::fabs(p) <= 0.01 * rating || waited >= std::llround(kStopHoldS / h);
      if (!open && waited > 0 && waited % second == 0) {
        open = std::fabs(p - ur.stop_last_p) <= 0.001 * rating;
        ur.stop_last_p = p;
      }
      if (!open) continue;
      take_offline(u);
      ur.stopped = true;
      update_inertia();
      refresh_participants(a);
      invalidate_outputs();
      Notice note = detail::notice_at(time(), NoticeKind::unit_stopped,
                                      UnitStop{UnitId{static_cast<std::uint32_t>(u)}, std::nullopt});
      note.value = p;
      notices.push_back(std::move(note));
      collapse_area_if_dead(a);
    }
  }
}

}  // namespace droopline
