// Topology and the operating point's structure: which areas form islands over the ties in
// service, each area's inertia from its online synchronous units, and its secondary-control
// participants.
#include "engine_impl.hpp"

namespace droopline {

void Engine::Impl::update_inertia() {
  std::vector<double> hs(na, 0.0);
  for (std::size_t u = 0; u < nu; ++u)
    if (units[u].online && is_synchronous(def.units[u]))
      hs[units[u].area] += def.units[u].inertia_s * def.units[u].rating_mw;
  inv_m.assign(na, 0.0);
  for (std::size_t a = 0; a < na; ++a) {
    areas[a].m = 2.0 * hs[a] / f0;
    inv_m[a] = areas[a].m > 0.0 ? 1.0 / areas[a].m : 0.0;
  }
}

void Engine::Impl::update_topology() {
  std::vector<int> from(nt), to(nt);
  std::vector<bool> in(nt);
  active_ties.clear();
  for (std::size_t t = 0; t < nt; ++t) {
    from[t] = static_cast<int>(ties[t].from);
    to[t] = static_cast<int>(ties[t].to);
    in[t] = ties[t].in_service;
    if (in[t]) active_ties.push_back(static_cast<int>(t));
  }
  const std::vector<int> isl = islands_of(na, from, to, in);
  for (std::size_t a = 0; a < na; ++a) {
    areas[a].island = isl[a];
    if (!areas[a].sched_manual) areas[a].sched_export = 0.0;
  }
  // The initial exchange over the ties in service, for areas whose schedule no command has set.
  for (int t : active_ties) {
    if (detail::AreaRt& sender = areas[ties[t].from]; !sender.sched_manual) sender.sched_export += ties[t].scheduled;
    if (detail::AreaRt& receiver = areas[ties[t].to]; !receiver.sched_manual)
      receiver.sched_export -= ties[t].scheduled;
  }
}

void Engine::Impl::refresh_participants(std::size_t a) {
  areas[a].participants.clear();
  for (std::size_t s = 0; s < nu; ++s) {
    const std::size_t u = unit_of_slot[s];
    if (units[u].area == a && units[u].online && !units[u].stopping && def.units[u].agc_share > 0.0)
      areas[a].participants.push_back(s);
  }
}

}  // namespace droopline
