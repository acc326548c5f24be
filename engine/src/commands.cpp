// Commands between steps: the checks that depend on the live state (on top of the static
// check_command that the loader shares), and their effect.
#include <cmath>
#include <numbers>

#include "droopline/format.hpp"
#include "engine_impl.hpp"

namespace droopline {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;

// Dense index of a scenario id (the count when absent); commands are validated first.
template <class T>
std::size_t index_of(const std::vector<T>& items, const std::string& id) {
  for (std::size_t i = 0; i < items.size(); ++i)
    if (items[i].id == id) return i;
  return items.size();
}

}  // namespace

std::size_t Engine::Impl::unit_idx(const std::string& id) const { return index_of(def.units, id); }
std::size_t Engine::Impl::area_idx(const std::string& id) const { return index_of(def.areas, id); }
std::size_t Engine::Impl::tie_idx(const std::string& id) const { return index_of(def.ties, id); }

std::string Engine::Impl::dynamic_error(const Command& c, Shadow& sh, const std::string& path) const {
  switch (c.kind) {
    case CommandKind::unit_trip: {
      const std::size_t u = unit_idx(c.unit);
      if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
      sh.unit_online[u] = false;
      break;
    }
    case CommandKind::unit_start: {
      const std::size_t u = unit_idx(c.unit);
      if (sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is already online";
      if (areas[units[u].area].collapsed)
        return path + ".unit: area \"" + def.areas[units[u].area].id + "\" has collapsed";
      sh.unit_online[u] = true;
      break;
    }
    case CommandKind::setpoint: {
      const std::size_t u = unit_idx(c.unit);
      if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
      break;
    }
    case CommandKind::governor: {
      const std::size_t u = unit_idx(c.unit);
      if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
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
          return path + ".droop: " + why;
      }
      break;
    }
    case CommandKind::tie_trip: {
      const std::size_t t = tie_idx(c.tie);
      if (!sh.tie_in[t]) return path + ".tie: tie \"" + c.tie + "\" is already open";
      sh.tie_in[t] = false;
      break;
    }
    case CommandKind::tie_close: {
      const std::size_t t = tie_idx(c.tie);
      if (sh.tie_in[t]) return path + ".tie: tie \"" + c.tie + "\" is already in service";
      if (areas[ties[t].from].collapsed || areas[ties[t].to].collapsed)
        return path + ".tie: an end of tie \"" + c.tie + "\" has collapsed";
      sh.tie_in[t] = true;
      break;
    }
    case CommandKind::load_step:
    case CommandKind::load_ramp:
    case CommandKind::agc:
    case CommandKind::fluctuation: {
      const std::size_t a = area_idx(c.area);
      if (areas[a].collapsed) return path + ".area: area \"" + c.area + "\" has collapsed";
      break;
    }
  }
  return {};
}

Engine::Impl::Shadow Engine::Impl::shadow() const {
  Shadow sh;
  for (const detail::UnitRt& u : units) {
    sh.unit_online.push_back(u.online);
    sh.droop.push_back(u.droop);
  }
  for (const detail::TieRt& t : ties) sh.tie_in.push_back(t.in_service);
  return sh;
}

ApplyResult Engine::Impl::apply_checked(std::span<const Command> cmds) {
  ApplyResult r = check(cmds);
  if (!r.ok) return r;
  for (const Command& c : cmds) perform(c);
  return r;
}

ApplyResult Engine::Impl::check(std::span<const Command> cmds) const {
  Shadow sh = shadow();
  std::vector<std::string> errors;
  for (std::size_t i = 0; i < cmds.size(); ++i) {
    const std::string path = cmds.size() == 1 ? "command" : "commands[" + std::to_string(i) + "]";
    auto issues = validate_command(def, cmds[i], path);
    for (const Issue& is : issues)
      if (!is.warning) errors.push_back(is.text());
    if (issues.empty()) {
      std::string dyn = dynamic_error(cmds[i], sh, path);
      if (!dyn.empty()) errors.push_back(dyn);
    }
  }
  ApplyResult r;
  r.at_s = time();
  for (std::size_t i = 0; i < errors.size(); ++i) r.error += (i ? "; " : "") + errors[i];
  r.ok = errors.empty();
  return r;
}

void Engine::Impl::perform(const Command& c) {
  ensure_outputs();
  const double t = time();
  std::string text;
  switch (c.kind) {
    case CommandKind::load_step: {
      const std::size_t a = area_idx(c.area);
      areas[a].steps_mw += c.mw;
      text = "load step " + fmt_num(c.mw) + " MW in area " + c.area;
      open_disturbance(a, c.mw, c.kind, text);
      break;
    }
    case CommandKind::load_ramp: {
      const std::size_t a = area_idx(c.area);
      areas[a].ramps.push_back({t, c.over_s, c.mw});
      text = "load ramp " + fmt_num(c.mw) + " MW over " + fmt_num(c.over_s) + " s in area " + c.area;
      open_disturbance(a, c.mw, c.kind, text);
      break;
    }
    case CommandKind::unit_trip: {
      const std::size_t u = unit_idx(c.unit);
      const double lost = pm[units[u].slot];
      const std::size_t a = units[u].area;
      take_offline(u);
      units[u].tripped = true;
      update_inertia();
      refresh_participants(a);
      text = "unit " + c.unit + " tripped from " + fmt_fixed(lost, 1) + " MW";
      collapse_area_if_dead(a);
      if (!areas[a].collapsed) open_disturbance(a, lost, c.kind, text);
      break;
    }
    case CommandKind::unit_start: {
      const std::size_t u = unit_idx(c.unit);
      bring_online(u, c.mw, false);
      update_inertia();
      refresh_participants(units[u].area);
      text = "unit " + c.unit + " started, loading to " + fmt_num(c.mw) + " MW";
      open_disturbance(units[u].area, -c.mw, c.kind, text);
      break;
    }
    case CommandKind::setpoint: {
      detail::UnitRt& ur = units[unit_idx(c.unit)];
      ur.target_mw = c.mw;
      if (c.ramp_mw_per_s) {
        if (ur.target_rate <= 0.0) ramping.push_back(unit_idx(c.unit));
        ur.target_rate = *c.ramp_mw_per_s;
      } else {
        ur.target_rate = 0.0;
        pset[ur.slot] = c.mw;
        pref0[ur.slot] = c.mw + pagc[ur.slot];
      }
      text = "setpoint of " + c.unit + " to " + fmt_num(c.mw) + " MW" +
             (c.ramp_mw_per_s ? " at " + fmt_num(*c.ramp_mw_per_s) + " MW/s" : "");
      break;
    }
    case CommandKind::governor: {
      const std::size_t u = unit_idx(c.unit);
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
      text = "governor of " + c.unit + ": droop " + fmt_num(ur.droop) + ", deadband " + fmt_num(ur.deadband_hz) +
             " Hz " + to_string(ur.deadband) + ", " + to_string(ur.mode);
      break;
    }
    case CommandKind::tie_trip: {
      const std::size_t ti = tie_idx(c.tie);
      text = "tie " + c.tie + " tripped carrying " + fmt_fixed(ties[ti].flow, 1) + " MW";
      trip_tie(ti, "trip of tie " + c.tie);
      break;
    }
    case CommandKind::tie_close: {
      const std::size_t ti = tie_idx(c.tie);
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
      text = "tie " + c.tie + " closed at " +
             fmt_fixed((y[na + tr.from] - y[na + tr.to]) * 180.0 / std::numbers::pi, 1) + " deg";
      break;
    }
    case CommandKind::agc: {
      const std::size_t a = area_idx(c.area);
      areas[a].agc_on = c.enabled;
      text = std::string("secondary control ") + (c.enabled ? "on" : "off") + " in area " + c.area;
      break;
    }
    case CommandKind::fluctuation: {
      detail::AreaRt& ar = areas[area_idx(c.area)];
      ar.noise_sigma = c.sigma_mw;
      ar.noise_tau = c.tau_s;
      if (c.sigma_mw <= 0.0) ar.noise_mw = 0.0;
      text = c.sigma_mw > 0.0
                 ? "load fluctuation " + fmt_num(c.sigma_mw) + " MW (tau " + fmt_num(c.tau_s) + " s) in area " + c.area
                 : "load fluctuation off in area " + c.area;
      break;
    }
  }
  invalidate_outputs();
  notices.push_back({t, "command", text});
}

}  // namespace droopline
