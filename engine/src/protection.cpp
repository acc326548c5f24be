// Protection: out-of-step tie trips, under-frequency load shedding, and the collapse of an area
// that lost all synchronous inertia.
#include <cmath>
#include <numbers>

#include "engine_impl.hpp"

namespace droopline {

// Out-of-step: the unwrapped angle passed the trip setting.
void Engine::Impl::check_out_of_step() {
  for (bool tripped = true; tripped;) {
    tripped = false;
    for (int t_idx : active_ties) {
      const detail::TieRt& tr = ties[t_idx];
      const double ang = y[na + tr.from] - y[na + tr.to];
      if (std::fabs(ang) <= tr.trip_rad) continue;
      Notice note = detail::notice_at(time(), NoticeKind::out_of_step);
      note.tie = static_cast<std::uint32_t>(t_idx);
      note.value = ang * 180.0 / std::numbers::pi;
      notices.push_back(std::move(note));
      trip_tie(static_cast<std::size_t>(t_idx), std::nullopt);
      tripped = true;  // active_ties changed: scan again
      break;
    }
  }
}

void Engine::Impl::check_shedding(std::size_t a) {
  detail::AreaRt& ar = areas[a];
  const double f = f0 + y[a];
  const auto& stages = def.areas[a].shedding;
  for (std::size_t s = 0; s < stages.size(); ++s) {
    detail::ShedTimer& st = ar.stages[s];
    if (st.done) continue;
    if (f < stages[s].below_hz) {
      if (st.below) st.timer_s += h;
      st.below = true;
      if (st.timer_s >= stages[s].delay_s - 1e-9) {
        st.done = true;
        const double mw = stages[s].shed_pct / 100.0 * ar.pd0;
        st.shed_mw = mw;
        ar.shed_mw += mw;
        Notice note = detail::notice_at(time(), NoticeKind::shedding);
        note.area = static_cast<std::uint32_t>(a);
        note.stage = static_cast<std::uint32_t>(s);
        note.value = mw;
        notices.push_back(std::move(note));
      }
    } else {
      st.timer_s = 0.0;
      st.below = false;
    }
  }
}

void Engine::Impl::trip_tie(std::size_t t, const std::optional<Action>& by) {
  ensure_outputs();
  detail::TieRt& tr = ties[t];
  const double flow = tr.flow;
  tr.in_service = false;
  update_topology();
  tr.flow = 0.0;
  if (areas[tr.from].island != areas[tr.to].island) {
    Notice cause = detail::notice_at(time(), NoticeKind::islanded, by);
    cause.tie = static_cast<std::uint32_t>(t);
    cause.area = static_cast<std::uint32_t>(tr.from);
    open_disturbance(tr.from, -flow, CommandKind::tie_trip, cause);
    cause.area = static_cast<std::uint32_t>(tr.to);
    open_disturbance(tr.to, flow, CommandKind::tie_trip, cause);
  }
  invalidate_outputs();
}

void Engine::Impl::collapse_area_if_dead(std::size_t a) {
  detail::AreaRt& ar = areas[a];
  if (ar.collapsed || ar.m > 0.0) return;
  ar.collapsed = true;
  Notice note = detail::notice_at(time(), NoticeKind::collapse);
  note.area = static_cast<std::uint32_t>(a);
  notices.push_back(std::move(note));
  for (std::size_t t = 0; t < nt; ++t)
    if (ties[t].in_service && (ties[t].from == a || ties[t].to == a)) {
      ties[t].in_service = false;
      ties[t].flow = 0.0;
    }
  for (std::size_t u = 0; u < nu; ++u) {
    if (units[u].area != a) continue;
    if (units[u].online) take_offline(u);
    if (units[u].starting) {  // a unit starting in a dead area has nothing to synchronise with
      units[u].starting = false;
      --changing_units;
    }
  }
  update_topology();
  refresh_participants(a);
}

// Load connected now, leaving out its frequency dependence and noise (MW): what can be shed.
double Engine::Impl::connected_load(std::size_t a) const {
  const detail::AreaRt& ar = areas[a];
  return ar.pd0 - ar.shed_mw + extra_load(ar, time());
}

// Reconnects `mw` of shed load: first what was shed by hand, then the stages from the last one
// back. A stage whose load is all back is re-armed (it can pick up again); returns how many were.
std::uint32_t Engine::Impl::restore_load(std::size_t a, double mw) {
  detail::AreaRt& ar = areas[a];
  const bool all = mw >= ar.shed_mw;
  double left = mw - std::min(mw, ar.manual_shed_mw);
  ar.manual_shed_mw = all ? 0.0 : ar.manual_shed_mw - std::min(mw, ar.manual_shed_mw);
  std::uint32_t rearmed = 0;
  for (std::size_t s = ar.stages.size(); s-- > 0;) {
    detail::ShedTimer& st = ar.stages[s];
    if (!st.done) continue;
    const double take = std::min(left, st.shed_mw);
    left -= take;
    st.shed_mw = all ? 0.0 : st.shed_mw - take;
    if (st.shed_mw <= 1e-9 * std::max(1.0, ar.pd0)) {
      st = detail::ShedTimer{};
      ++rearmed;
    }
  }
  ar.shed_mw = all ? 0.0 : ar.shed_mw - mw;
  return rearmed;
}

}  // namespace droopline
