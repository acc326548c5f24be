// Commands between steps: the checks that depend on the live state (on top of the static
// check_command that the loader shares), and their effect.
#include <cmath>
#include <numbers>
#include <optional>
#include <variant>

#include "droopline/format.hpp"
#include "engine_impl.hpp"

namespace droopline {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;

// The area of a command that names one (load_step, load_ramp, agc, fluctuation).
std::size_t area_of(const Action& action) {
  return std::visit(
      [](const auto& c) -> std::size_t {
        if constexpr (requires { c.area; })
          return c.area.index;
        else
          return 0;
      },
      action);
}

}  // namespace

std::optional<Issue> Engine::Impl::dynamic_error(const Action& action, Shadow& sh, const std::string& path) const {
  // Ids come resolved against this engine's system; one from another is an error, not a crash.
  std::optional<Issue> stale = std::visit(
      [&](const auto& c) -> std::optional<Issue> {
        auto out_of = [&](const char* field, std::size_t index, std::size_t count) -> std::optional<Issue> {
          if (index < count) return std::nullopt;
          return Issue{path + "." + field, std::string("no ") + field + " with index " + std::to_string(index)};
        };
        if constexpr (requires { c.area; }) return out_of("area", c.area.index, na);
        if constexpr (requires { c.unit; }) return out_of("unit", c.unit.index, nu);
        if constexpr (requires { c.tie; }) return out_of("tie", c.tie.index, nt);
        return std::nullopt;
      },
      action);
  if (stale) return stale;
  auto unit_issue = [&](std::size_t u, const std::string& what) {
    return Issue{path + ".unit", "unit \"" + def.units[u].id + "\" " + what};
  };
  auto tie_issue = [&](const std::string& message) { return Issue{path + ".tie", message}; };
  auto sync_time = [&](std::size_t u) {
    return units[u].starting ? " (it synchronises at " + fmt_num(static_cast<double>(units[u].sync_step) * h) + " s)"
                             : std::string();
  };
  auto not_online = [&](std::size_t u) -> std::optional<Issue> {
    if (sh.unit_starting[u]) return unit_issue(u, "is starting, not yet online" + sync_time(u));
    if (!sh.unit_online[u]) return unit_issue(u, "is not online");
    return std::nullopt;
  };
  switch (kind_of(action)) {
    case CommandKind::unit_trip: {
      const std::size_t u = std::get<UnitTrip>(action).unit.index;
      if (std::optional<Issue> off = not_online(u)) return off;
      sh.unit_online[u] = sh.unit_stopping[u] = false;
      break;
    }
    case CommandKind::unit_start: {
      const std::size_t u = std::get<UnitStart>(action).unit.index;
      if (sh.unit_starting[u]) return unit_issue(u, "is already starting" + sync_time(u));
      if (sh.unit_stopping[u]) return unit_issue(u, "is stopping: start it again once it is offline");
      if (sh.unit_online[u]) return unit_issue(u, "is already online");
      if (areas[units[u].area].collapsed)
        return Issue{path + ".unit", "area \"" + def.areas[units[u].area].id + "\" has collapsed"};
      (def.units[u].start_up_s > 0.0 ? sh.unit_starting : sh.unit_online)[u] = true;
      break;
    }
    case CommandKind::setpoint: {
      const std::size_t u = std::get<Setpoint>(action).unit.index;
      if (std::optional<Issue> off = not_online(u)) return off;
      if (sh.unit_stopping[u]) return unit_issue(u, "is stopping: its setpoint is ramping to zero");
      break;
    }
    case CommandKind::unit_stop: {
      const std::size_t u = std::get<UnitStop>(action).unit.index;
      if (std::optional<Issue> off = not_online(u)) return off;
      if (sh.unit_stopping[u]) return unit_issue(u, "is already stopping");
      // A controlled stop is planned: it may not leave the area without inertia (a trip may).
      const std::size_t a = units[u].area;
      bool other = false;
      for (std::size_t v = 0; v < nu && !other; ++v)
        other = v != u && units[v].area == a && sh.unit_online[v] && !sh.unit_stopping[v] &&
                is_synchronous(def.units[v]) && def.units[v].inertia_s > 0.0;
      if (!other && is_synchronous(def.units[u]) && def.units[u].inertia_s > 0.0)
        return unit_issue(u, "is the last synchronous unit running in area \"" + def.areas[a].id +
                                 "\": stopping it would leave the area without inertia");
      sh.unit_stopping[u] = true;
      break;
    }
    case CommandKind::governor: {
      const GovernorChange& c = std::get<GovernorChange>(action);
      const std::size_t u = c.unit.index;
      if (std::optional<Issue> off = not_online(u)) return off;
      if (c.droop) {
        // With the droops as they are now (earlier commands included), the area's frequency
        // loop must stay slow enough for the fixed step: M/beta at least five steps.
        sh.droop[u] = *c.droop;
        const std::size_t a = units[u].area;
        double beta = areas[a].dmp;
        for (std::size_t v = 0; v < nu; ++v)
          if (units[v].area == a && sh.unit_online[v] && sh.droop[v] > 0.0)
            beta += def.units[v].rating_mw / (sh.droop[v] * f0);
        if (std::string why = droop_step_problem(*c.droop, def.areas[a].id, areas[a].m, beta, h); !why.empty())
          return Issue{path + ".droop", why};
      }
      break;
    }
    case CommandKind::tie_trip: {
      const std::size_t t = std::get<TieTrip>(action).tie.index;
      if (!sh.tie_in[t]) return tie_issue("tie \"" + def.ties[t].id + "\" is already open");
      sh.tie_in[t] = false;
      break;
    }
    case CommandKind::tie_close: {
      const std::size_t t = std::get<TieClose>(action).tie.index;
      if (sh.tie_in[t]) return tie_issue("tie \"" + def.ties[t].id + "\" is already in service");
      if (areas[ties[t].from].collapsed || areas[ties[t].to].collapsed)
        return tie_issue("an end of tie \"" + def.ties[t].id + "\" has collapsed");
      sh.tie_in[t] = true;
      break;
    }
    case CommandKind::load_step:
    case CommandKind::load_ramp:
    case CommandKind::agc:
    case CommandKind::fluctuation:
    case CommandKind::schedule:
    case CommandKind::shed:
    case CommandKind::restore: {
      const std::size_t a = area_of(action);
      const std::string area = "area \"" + def.areas[a].id + "\"";
      if (areas[a].collapsed) return Issue{path + ".area", area + " has collapsed"};
      if (const Shed* c = std::get_if<Shed>(&action)) {
        if (c->mw > sh.connected[a] + 1e-9)
          return Issue{path + ".mw", "cannot shed " + fmt_num(c->mw) + " MW: " + area + " has " +
                                         fmt_num(std::max(0.0, sh.connected[a])) + " MW of load connected"};
        sh.connected[a] -= c->mw;
        sh.shed[a] += c->mw;
      }
      if (const Restore* c = std::get_if<Restore>(&action)) {
        if (!(sh.shed[a] > 0.0)) return Issue{path + ".area", area + " has no shed load to restore"};
        const double mw = c->mw.value_or(sh.shed[a]);
        if (mw > sh.shed[a] + 1e-9)
          return Issue{path + ".mw", "cannot restore " + fmt_num(mw) + " MW: " + area + " has " + fmt_num(sh.shed[a]) +
                                         " MW of shed load"};
        sh.connected[a] += mw;
        sh.shed[a] -= mw;
      }
      break;
    }
  }
  return std::nullopt;
}

Engine::Impl::Shadow Engine::Impl::shadow() const {
  Shadow sh;
  for (const detail::UnitRt& u : units) {
    sh.unit_online.push_back(u.online);
    sh.unit_starting.push_back(u.starting);
    sh.unit_stopping.push_back(u.stopping);
    sh.droop.push_back(u.droop);
  }
  for (std::size_t a = 0; a < na; ++a) {
    sh.shed.push_back(areas[a].shed_mw);
    sh.connected.push_back(connected_load(a));
  }
  for (const detail::TieRt& t : ties) sh.tie_in.push_back(t.in_service);
  return sh;
}

ApplyResult Engine::Impl::apply_checked(std::span<const Action> cmds) {
  ApplyResult r = check(cmds);
  if (!r.ok) return r;
  for (const Action& c : cmds) perform(c);
  return r;
}

ApplyResult Engine::Impl::check(std::span<const Action> cmds) const {
  Shadow sh = shadow();
  ApplyResult r;
  r.at_s = time();
  for (std::size_t i = 0; i < cmds.size(); ++i) {
    const std::string path = cmds.size() == 1 ? "command" : "commands[" + std::to_string(i) + "]";
    if (std::optional<Issue> issue = dynamic_error(cmds[i], sh, path)) r.issues.push_back(std::move(*issue));
  }
  r.ok = r.issues.empty();
  return r;
}

void Engine::Impl::perform(const Action& action) {
  ensure_outputs();
  const double t = time();
  Notice notice = detail::notice_at(t, NoticeKind::command, action);
  switch (kind_of(action)) {
    case CommandKind::load_step: {
      const LoadStep& c = std::get<LoadStep>(action);
      const std::size_t a = c.area.index;
      areas[a].steps_mw += c.mw;
      open_disturbance(a, c.mw, kind_of(action), notice);
      break;
    }
    case CommandKind::load_ramp: {
      const LoadRamp& c = std::get<LoadRamp>(action);
      const std::size_t a = c.area.index;
      areas[a].ramps.push_back({t, c.over_s, c.mw});
      open_disturbance(a, c.mw, kind_of(action), notice);
      break;
    }
    case CommandKind::unit_trip: {
      const UnitTrip& c = std::get<UnitTrip>(action);
      const std::size_t u = c.unit.index;
      const double lost = pm[units[u].slot];
      notice.value = lost;
      const std::size_t a = units[u].area;
      take_offline(u);
      units[u].tripped = true;
      update_inertia();
      refresh_participants(a);
      collapse_area_if_dead(a);
      if (!areas[a].collapsed) open_disturbance(a, lost, kind_of(action), notice);
      break;
    }
    case CommandKind::unit_start: {
      const UnitStart& c = std::get<UnitStart>(action);
      const std::size_t u = c.unit.index;
      if (def.units[u].start_up_s > 0.0) {  // synchronises later (advance_units)
        begin_start(u, c.mw);
        break;
      }
      bring_online(u, c.mw, false);
      update_inertia();
      refresh_participants(units[u].area);
      open_disturbance(units[u].area, -c.mw, kind_of(action), notice);
      break;
    }
    case CommandKind::setpoint: {
      const Setpoint& c = std::get<Setpoint>(action);
      detail::UnitRt& ur = units[c.unit.index];
      ur.target_mw = c.mw;
      if (c.ramp_mw_per_s) {
        if (ur.target_rate <= 0.0) ramping.push_back(c.unit.index);
        ur.target_rate = *c.ramp_mw_per_s;
      } else {
        ur.target_rate = 0.0;
        pset[ur.slot] = c.mw;
        pref0[ur.slot] = c.mw + pagc[ur.slot];
      }
      break;
    }
    case CommandKind::governor: {
      const GovernorChange& c = std::get<GovernorChange>(action);
      const std::size_t u = c.unit.index;
      detail::UnitRt& ur = units[u];
      if (c.droop) ur.droop = *c.droop;
      if (c.deadband_hz) ur.deadband_hz = *c.deadband_hz;
      if (c.deadband) ur.deadband = *c.deadband;
      if (c.mode && *c.mode != ur.mode) {
        // Leaving isochronous mode, the integrator's output is taken into the setpoint so the
        // reference does not jump; entering it, the integrator starts from zero.
        double& iso = state(u, blocks[ur.block].nstate - 1);
        if (ur.mode == GovernorMode::isochronous) {
          pset[ur.slot] += iso;
          ur.target_mw = pset[ur.slot];
          pref0[ur.slot] = pset[ur.slot] + pagc[ur.slot];
        }
        iso = 0.0;
        ur.mode = *c.mode;
        rebuild_segments();
      }
      set_governor_gains(u);
      fill_type_params(u);
      notice.action = GovernorChange{c.unit, ur.droop, ur.deadband_hz, ur.deadband, ur.mode};  // as they now stand
      break;
    }
    case CommandKind::tie_trip: {
      const TieTrip& c = std::get<TieTrip>(action);
      const std::size_t ti = c.tie.index;
      notice.value = ties[ti].flow;
      trip_tie(ti, action);
      break;
    }
    case CommandKind::tie_close: {
      const TieClose& c = std::get<TieClose>(action);
      const std::size_t ti = c.tie.index;
      detail::TieRt& tr = ties[ti];
      // Closing between islands: shift the joining island's angles by whole turns so the
      // tracked (unwrapped) difference starts within +/-180 degrees.
      if (areas[tr.from].island != areas[tr.to].island) {
        const double d = y[na + tr.from] - y[na + tr.to];
        const double turns = std::round(d / kTwoPi);
        const int isl = areas[tr.to].island;
        for (std::size_t a = 0; a < na; ++a)
          if (areas[a].island == isl) y[na + a] += turns * kTwoPi;
      }
      tr.in_service = true;
      update_topology();
      invalidate_outputs();
      notice.value = (y[na + tr.from] - y[na + tr.to]) * 180.0 / std::numbers::pi;
      break;
    }
    case CommandKind::agc: {
      const AgcSwitch& c = std::get<AgcSwitch>(action);
      const std::size_t a = c.area.index;
      areas[a].agc_on = c.enabled;
      if (c.mode) areas[a].agc_mode = *c.mode;  // the integral carries on under the new ACE
      break;
    }
    case CommandKind::fluctuation: {
      const Fluctuation& c = std::get<Fluctuation>(action);
      detail::AreaRt& ar = areas[c.area.index];
      ar.noise_sigma = c.sigma_mw;
      ar.noise_tau = c.tau_s;
      if (c.sigma_mw <= 0.0) ar.noise_mw = 0.0;
      break;
    }
    case CommandKind::unit_stop: {
      const UnitStop& c = std::get<UnitStop>(action);
      const std::size_t u = c.unit.index;
      notice.value = c.ramp_mw_per_s.value_or(unit_stop_rate_mw_per_s(def.units[u]));
      begin_stop(u, notice.value);
      break;
    }
    case CommandKind::schedule: {
      const Schedule& c = std::get<Schedule>(action);
      detail::AreaRt& ar = areas[c.area.index];
      notice.value = ar.sched_export;
      ar.sched_manual = true;
      ar.sched_ramping = c.over_s > 0.0;
      if (ar.sched_ramping) {
        ar.sched_from = ar.sched_export;
        ar.sched_to = c.mw;
        ar.sched_n0 = n;
        ar.sched_steps = std::max<std::int64_t>(1, std::llround(c.over_s / h));
        sched_ramps = true;
      } else {
        ar.sched_export = c.mw;
      }
      break;
    }
    case CommandKind::shed: {
      const Shed& c = std::get<Shed>(action);
      detail::AreaRt& ar = areas[c.area.index];
      ar.manual_shed_mw += c.mw;
      ar.shed_mw += c.mw;
      break;
    }
    case CommandKind::restore: {
      const Restore& c = std::get<Restore>(action);
      const std::size_t a = c.area.index;
      notice.value = c.mw.value_or(areas[a].shed_mw);
      notice.stage = restore_load(a, notice.value);
      break;
    }
  }
  invalidate_outputs();
  notices.push_back(std::move(notice));
}

}  // namespace droopline
