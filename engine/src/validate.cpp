// Checks of a whole system definition: every field's range, references, the fixed step against
// every time constant, and (once the parts are valid) the initial operating point.
#include <algorithm>
#include <cmath>
#include <numbers>

#include "checker.hpp"

namespace droopline {

using namespace detail;  // the validation toolkit (checker.hpp)

namespace {

bool valid_id(const std::string& id) {
  if (id.empty() || id.size() > 64) return false;
  return std::all_of(id.begin(), id.end(), [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
           c == '-';
  });
}

template <class T>
IdIndex index_ids(Checker& ck, const std::vector<T>& items,
                                             const std::string& list) {
  IdIndex index;
  for (std::size_t i = 0; i < items.size(); ++i) {
    auto path = [&] { return list + "[" + std::to_string(i) + "].id"; };  // for a message only
    const std::string& id = items[i].id;
    if (!valid_id(id)) {
      ck.error(path(), "must be 1-64 letters, digits, '_' or '-', got \"" + id + "\"");
      continue;
    }
    auto [it, fresh] = index.emplace(id, i);
    if (!fresh) ck.error(path(), "duplicate id \"" + id + "\" (also " + list + "[" + std::to_string(it->second) + "])");
  }
  return index;
}

// Start-up to synchronisation, typical (model notes, section 12; common practice, from memory):
// hydro 1-5 min, open-cycle gas 5-20 min, a hot steam unit 1-4 h. Exercises often use shorter
// times on purpose; the warning says so rather than refusing them.
void check_start_up(Checker& ck, const std::string& p, const UnitDef& u) {
  ck.non_negative_at_most(at(p, ".start_up_s"), u.start_up_s, bound::kStartUpS, " s");
  switch (u.turbine.type) {
    case TurbineType::hydro:
      ck.typical(at(p, ".start_up_s"), u.start_up_s, 60.0, 300.0, "hydro start-up (s)");
      break;
    case TurbineType::gas:
      ck.typical(at(p, ".start_up_s"), u.start_up_s, 300.0, 1200.0, "open-cycle gas turbine start-up (s)");
      break;
    case TurbineType::steam:
    case TurbineType::reheat:
      ck.typical(at(p, ".start_up_s"), u.start_up_s, 3600.0, 14400.0, "hot steam unit start-up (s)");
      break;
    case TurbineType::battery:
      break;
  }
}

// The fastest time constant so far and where it is. The path is built only when a value is the
// new fastest (a few times in a fleet), not for each of a large fleet's tens of thousands.
struct Fastest {
  double value_s = 0.0;
  std::string path;
  bool any = false;
  template <class... Parts>
  void offer(double v, const Parts&... parts) {
    if (any && !(v < value_s)) return;  // the first of equal values stays, as a min_element
    any = true;
    value_s = v;
    path.clear();
    ((path += parts), ...);
  }
};

void check_governor(Checker& ck, const std::string& p, const GovernorDef& g, bool battery) {
  ck.within(at(p, ".droop"), g.droop, bound::kDroopMinPu, bound::kDroopPu);
  ck.typical(at(p, ".droop"), g.droop, 0.02, 0.12, "droop (pu)");
  ck.non_negative_at_most(at(p, ".deadband_hz"), g.deadband_hz, bound::kDeadbandHz, " Hz");
  if (g.deadband_hz > 0.5)
    ck.warn(at(p, ".deadband_hz"),
            fmt_num(g.deadband_hz) + " is outside the typical range 0-0.5 of deadband (Hz)");
  ck.positive_at_most(at(p, ".lag_s"), g.lag_s, bound::kTimeS, " s");
  if (!battery) ck.typical(at(p, ".lag_s"), g.lag_s, 0.05, 0.5, "governor lag (s)");
  ck.positive_at_most(at(p, ".integral_s"), g.integral_s, bound::kTimeS, " s");
}

void check_turbine(Checker& ck, const std::string& p, const UnitDef& u, Fastest& tcs) {
  const TurbineDef& t = u.turbine;
  auto tc = [&](const char* name, double v) {
    ck.positive_at_most(at(p, name, true), v, bound::kTimeS, " s");
    if (v > 0.0) tcs.offer(v, p, ".", name);
  };
  switch (t.type) {
    case TurbineType::steam:
      tc("steam_chest_s", t.steam_chest_s);
      ck.typical(at(p, ".steam_chest_s"), t.steam_chest_s, 0.1, 0.5, "steam chest lag (s)");
      break;
    case TurbineType::reheat:
      tc("steam_chest_s", t.steam_chest_s);
      tc("reheat_s", t.reheat_s);
      ck.typical(at(p, ".steam_chest_s"), t.steam_chest_s, 0.1, 0.5, "steam chest lag (s)");
      ck.typical(at(p, ".reheat_s"), t.reheat_s, 4.0, 12.0, "reheat lag (s)");
      ck.within(at(p, ".hp_fraction"), t.hp_fraction, 0.0, 1.0);
      if (t.hp_fraction >= 0.0 && t.hp_fraction <= 1.0)
        ck.typical(at(p, ".hp_fraction"), t.hp_fraction, 0.2, 0.4, "high-pressure fraction");
      break;
    case TurbineType::hydro: {
      tc("water_s", t.water_s);
      ck.typical(at(p, ".water_s"), t.water_s, 0.5, 4.0, "water starting time (s)");
      if (t.water_s > 0.0) tcs.offer(t.water_s / 2.0, p, ".water_s (Tw/2)");
      if (t.temporary_droop) ck.positive_at_most(at(p, ".temporary_droop"), *t.temporary_droop, bound::kGainPerPu, " pu");
      if (t.reset_s) ck.positive_at_most(at(p, ".reset_s"), *t.reset_s, bound::kTimeS, " s");
      if (!t.temporary_droop && !t.reset_s && !(u.inertia_s > 0.0))
        ck.error(p, "a hydro unit needs inertia_s > 0 or explicit temporary_droop and reset_s");
      const double rt = hydro_temporary_droop(u);
      const double tr = hydro_reset_s(u);
      if (t.water_s > 0.0 && u.inertia_s > 0.0 && rt > 0.0 && u.governor.droop > 0.0) {
        if (rt < u.governor.droop)
          ck.warn(at(p, ".temporary_droop"),
                  fmt_num(rt) + " is below the permanent droop " + fmt_num(u.governor.droop) +
                      ": the compensation then amplifies fast changes instead of softening them");
        if (tr > 0.0) tcs.offer(tr * rt / u.governor.droop, p, " (TR*RT/R)");
      }
      if (!(tr > 0.0) && !t.reset_s && t.water_s > 0.0)
        ck.error(at(p, ".water_s"), "the design rule gives no positive reset_s for Tw = " +
                                     fmt_num(t.water_s) + " s; give reset_s explicitly");
      if (!(rt > 0.0) && !t.temporary_droop && t.water_s > 0.0 && u.inertia_s > 0.0)
        ck.error(at(p, ".water_s"), "the design rule gives no positive temporary_droop for Tw = " +
                                     fmt_num(t.water_s) + " s; give temporary_droop explicitly");
      break;
    }
    case TurbineType::gas:
      tc("fuel_s", t.fuel_s);
      tc("combustion_s", t.combustion_s);
      if (t.load_limit_mw) ck.positive_at_most(at(p, ".load_limit_mw"), *t.load_limit_mw, bound::kPowerMw, " MW");
      break;
    case TurbineType::battery:
      tc("response_s", t.response_s);
      tc("rocof_filter_s", t.rocof_filter_s);
      ck.non_negative_at_most(at(p, ".synthetic_inertia_s"), t.synthetic_inertia_s, bound::kInertiaS, " s");
      if (!t.energy_mwh)
        ck.error(at(p, ".energy_mwh"), "required for a battery");
      else
        ck.positive_at_most(at(p, ".energy_mwh"), *t.energy_mwh, bound::kEnergyMwh, " MWh");
      ck.within(at(p, ".soc"), t.soc, 0.0, 1.0);
      break;
  }
}

}  // namespace

namespace {

// Every issue of `def` into `out`, errors first; the initial flows when the parts were valid
// enough to solve them.
// `index`, when given, receives the id index and the area sizes the checks built.
std::optional<InitialFlows> check_definition(const SystemDef& def, std::vector<Issue>& out, SystemIndex* index) {
  Checker ck(out);
  ck.within("nominal_hz", def.nominal_hz, bound::kNominalHzMin, bound::kNominalHz);
  if (def.nominal_hz > 0.0 && def.nominal_hz != 50.0 && def.nominal_hz != 60.0)
    ck.warn("nominal_hz", "usually 50 or 60, got " + fmt_num(def.nominal_hz));
  ck.positive_at_most("step_s", def.step_s, bound::kStepS, " s");
  ck.positive_at_most("duration_s", def.duration_s, bound::kDurationS, " s");
  ck.positive_at_most("output_every_s", def.output_every_s, bound::kTimeS, " s");
  if (def.step_s > 0.0 && def.duration_s > 0.0 && def.duration_s / def.step_s > 1e10)
    ck.error("duration_s", "needs more than 1e10 steps of " + fmt_num(def.step_s) + " s");
  if (def.step_s > 0.0 && def.output_every_s > 0.0) {
    const double ratio = def.output_every_s / def.step_s;
    if (std::fabs(ratio - std::round(ratio)) > 1e-6 * ratio || ratio < 0.5)
      ck.error("output_every_s", "must be a whole multiple of step_s (" + fmt_num(def.step_s) +
                                     "), got " + fmt_num(def.output_every_s));
  }
  if (def.areas.empty()) ck.error("areas", "at least one area is required");

  auto areas = index_ids(ck, def.areas, "areas");
  auto units = index_ids(ck, def.units, "units");
  auto ties = index_ids(ck, def.ties, "ties");

  Fastest tcs;
  std::vector<double> inertia(def.areas.size(), 0.0);

  for (std::size_t i = 0; i < def.areas.size(); ++i) {
    const AreaDef& a = def.areas[i];
    const std::string p = "areas[" + std::to_string(i) + "]";
    ck.non_negative_at_most(at(p, ".demand_mw"), a.demand_mw, bound::kPowerMw, " MW");
    ck.non_negative_at_most(at(p, ".load_damping"), a.load_damping, bound::kGainPerPu, "");
    if (a.load_damping > 3.0)
      ck.warn(at(p, ".load_damping"),
              fmt_num(a.load_damping) + " is outside the typical range 0-3 of load damping");
    if (a.agc.bias_mw_per_hz) ck.positive_at_most(at(p, ".agc.bias_mw_per_hz"), *a.agc.bias_mw_per_hz, bound::kMwPerHz, " MW/Hz");
    ck.non_negative_at_most(at(p, ".agc.kp"), a.agc.kp, bound::kGainPerPu, "");
    ck.non_negative_at_most(at(p, ".agc.ki_per_s"), a.agc.ki_per_s, bound::kGainPerPu, " /s");
    ck.non_negative_at_most(at(p, ".agc.period_s"), a.agc.period_s, bound::kTimeS, " s");
    double shed_total = 0.0;
    for (std::size_t s = 0; s < a.shedding.size(); ++s) {
      const SheddingStageDef& st = a.shedding[s];
      const std::string sp = p + ".shedding[" + std::to_string(s) + "]";
      if (!(st.below_hz > 0.0 && st.below_hz < def.nominal_hz))
        ck.error(at(sp, ".below_hz"), "must lie between 0 and nominal_hz (" +
                                       fmt_num(def.nominal_hz) + "), got " + fmt_num(st.below_hz));
      ck.non_negative_at_most(at(sp, ".delay_s"), st.delay_s, bound::kTimeS, " s");
      if (!(st.shed_pct > 0.0 && st.shed_pct <= 100.0))
        ck.error(at(sp, ".shed_pct"), "must lie within (0, 100], got " + fmt_num(st.shed_pct));
      else
        shed_total += st.shed_pct;
    }
    if (shed_total > 100.0)
      ck.error(at(p, ".shedding"), "stages shed " + fmt_num(shed_total) +
                                    " % of the demand in total, at most 100 %");
  }

  for (std::size_t i = 0; i < def.ties.size(); ++i) {
    const TieDef& t = def.ties[i];
    const std::string p = "ties[" + std::to_string(i) + "]";
    if (!areas.count(t.from)) ck.error(at(p, ".from"), "unknown area \"" + t.from + "\"");
    if (!areas.count(t.to)) ck.error(at(p, ".to"), "unknown area \"" + t.to + "\"");
    if (t.from == t.to && areas.count(t.from))
      ck.error(at(p, ".to"), "must differ from \"from\" (\"" + t.from + "\")");
    ck.positive_at_most(at(p, ".pmax_mw"), t.pmax_mw, bound::kPowerMw, " MW");
    ck.non_negative_at_most(at(p, ".damping_mw_per_hz"), t.damping_mw_per_hz, bound::kMwPerHz, " MW/Hz");
    if (t.trip_angle_deg && !(*t.trip_angle_deg > 0.0 && *t.trip_angle_deg <= 3600.0))
      ck.error(at(p, ".trip_angle_deg"), "must lie within (0, 3600], got " + fmt_num(*t.trip_angle_deg));
  }

  for (std::size_t i = 0; i < def.units.size(); ++i) {
    const UnitDef& u = def.units[i];
    const std::string p = "units[" + std::to_string(i) + "]";
    const bool battery = u.turbine.type == TurbineType::battery;
    auto area = areas.find(u.area);
    if (area == areas.end()) ck.error(at(p, ".area"), "unknown area \"" + u.area + "\"");
    ck.positive_at_most(at(p, ".rating_mw"), u.rating_mw, bound::kPowerMw, " MW");
    if (battery) {
      if (u.inertia_s != 0.0)
        ck.error(at(p, ".inertia_s"), "a battery has no physical inertia, got " +
                                       fmt_num(u.inertia_s) + " (use turbine.synthetic_inertia_s)");
    } else {
      ck.non_negative_at_most(at(p, ".inertia_s"), u.inertia_s, bound::kInertiaS, " s");
      if (u.inertia_s == 0.0)
        ck.warn(at(p, ".inertia_s"), "0 s: this synchronous unit adds no inertia");
      else
        ck.typical(at(p, ".inertia_s"), u.inertia_s, 2.0, 10.0, "inertia constant H (s)");
    }
    const double lo = unit_min_mw(u), hi = unit_max_mw(u);
    if (u.max_mw) ck.positive_at_most(at(p, ".max_mw"), *u.max_mw, bound::kPowerMw, " MW");
    if (u.min_mw && !(*u.min_mw >= -bound::kPowerMw))
      ck.error(at(p, ".min_mw"), "must be at least " + fmt_num(-bound::kPowerMw) +
                                     " MW (beyond what a real system can have), got " + fmt_num(*u.min_mw));
    if (u.max_mw && u.rating_mw > 0.0 && *u.max_mw > u.rating_mw)
      ck.warn(at(p, ".max_mw"), fmt_num(*u.max_mw) + " MW is above the rating " +
                                 fmt_num(u.rating_mw) + " MW");
    if (!battery && u.min_mw && *u.min_mw < 0.0)
      ck.error(at(p, ".min_mw"), "must be >= 0 for a generating unit, got " + fmt_num(*u.min_mw));
    if (lo > hi)
      ck.error(at(p, ".min_mw"), "must be <= max_mw (" + fmt_num(hi) + "), got " + fmt_num(lo));
    else if (!(u.setpoint_mw >= lo && u.setpoint_mw <= hi))
      ck.error(at(p, ".setpoint_mw"), "must lie within [min_mw, max_mw] = [" + fmt_num(lo) + ", " +
                                       fmt_num(hi) + "], got " + fmt_num(u.setpoint_mw));
    if (u.ramp_mw_per_s) ck.positive_at_most(at(p, ".ramp_mw_per_s"), *u.ramp_mw_per_s, bound::kRampMwPerS, " MW/s");
    ck.non_negative_at_most(at(p, ".agc_share"), u.agc_share, bound::kPowerMw, "");
    check_start_up(ck, p, u);
    check_governor(ck, p + ".governor", u.governor, battery);
    if (!battery && u.governor.lag_s > 0.0) tcs.offer(u.governor.lag_s, p, ".governor.lag_s");
    check_turbine(ck, p + ".turbine", u, tcs);
    if (area != areas.end() && u.online && is_synchronous(u) && u.inertia_s > 0.0 &&
        u.rating_mw > 0.0)
      inertia[area->second] += u.inertia_s * u.rating_mw;
  }

  for (std::size_t i = 0; i < def.areas.size(); ++i)
    if (!(inertia[i] > 0.0))
      ck.error("areas[" + std::to_string(i) + "]",
               "area \"" + def.areas[i].id +
                   "\" has no inertia: no online synchronous unit with inertia_s > 0");

  std::vector<double> sizes = area_sizes(def, areas);
  for (std::size_t i = 0; i < def.events.size(); ++i) {
    const EventDef& e = def.events[i];
    const std::string p = "events[" + std::to_string(i) + "]";
    if (!(e.at_s >= 0.0 && e.at_s <= def.duration_s))
      ck.error(at(p, ".at_s"), "must lie within [0, duration_s] = [0, " + fmt_num(def.duration_s) +
                                "], got " + fmt_num(e.at_s));
    check_command(ck, def, e.command, p, areas, units, ties, sizes);
  }

  // The governors act on frequency through the area's inertia: M/beta (s) is how fast that loop
  // can move, and a fixed step must resolve it like any other time constant.
  if (def.step_s > 0.0)
    for (std::size_t i = 0; i < def.areas.size(); ++i) {
      const double m = 2.0 * inertia[i] / def.nominal_hz;
      const double beta = natural_response_mw_per_hz(def, i);
      if (m > 0.0 && beta > 0.0 && def.nominal_hz > 0.0)
        tcs.offer(m / beta, "areas[", std::to_string(i), "] (inertia over natural response, M/beta)");
    }

  // Tie damping pulls the two areas' speeds together with the time constant
  // tau = 1 / (Dt (1/M1 + 1/M2)); a step past 2 tau leaves the real-axis stability interval of RK4
  // (|h lambda| < 2.78) and the run diverges.
  for (std::size_t i = 0; i < def.ties.size() && def.step_s > 0.0; ++i) {
    const TieDef& t = def.ties[i];
    auto a = areas.find(t.from), b = areas.find(t.to);
    if (!(t.damping_mw_per_hz > 0.0) || !t.in_service || a == areas.end() || b == areas.end() || a->second == b->second) continue;
    const double m1 = 2.0 * inertia[a->second] / def.nominal_hz, m2 = 2.0 * inertia[b->second] / def.nominal_hz;
    if (!(m1 > 0.0 && m2 > 0.0)) continue;
    const double tau = 1.0 / (t.damping_mw_per_hz * (1.0 / m1 + 1.0 / m2));
    if (def.step_s > 2.0 * tau)
      ck.error(at("ties[" + std::to_string(i) + "]", ".damping_mw_per_hz"),
               fmt_num(t.damping_mw_per_hz) + " MW/Hz couples the areas' speeds with a time constant of " + fmt_num(tau) +
                   " s (1 / (Dt (1/M1 + 1/M2))): the fixed step (" + fmt_num(def.step_s) +
                   " s) must be at most twice it for the integration to stay stable");
  }

  if (def.step_s > 0.0 && tcs.any) {
    const Fastest* fastest = &tcs;
    if (def.step_s > fastest->value_s / kStepFraction)
      ck.error("step_s", fmt_num(def.step_s) + " s is too large for the fastest time constant, " +
                             fastest->path + " = " + fmt_num(fastest->value_s) +
                             " s: the fixed RK4 step must be at most a fifth of it (" +
                             fmt_num(fastest->value_s / kStepFraction) +
                             " s) to stay accurate and stable");
  }

  // The operating point only means something once the parts are valid.
  std::optional<InitialFlows> flows;
  if (!has_errors(out)) {
    flows = solve_initial_flows(def, out);
    if (flows && def.step_s > 0.0) {
      for (std::size_t i = 0; i < def.ties.size(); ++i) {
        const TieDef& t = def.ties[i];
        if (!t.in_service) continue;
        const std::size_t a = areas.at(t.from), b = areas.at(t.to);
        const double m1 = 2.0 * inertia[a] / def.nominal_hz, m2 = 2.0 * inertia[b] / def.nominal_hz;
        const double c = std::cos(flows->angle_rad[a] - flows->angle_rad[b]);
        const double w2 = 2.0 * std::numbers::pi * t.pmax_mw * c * (1.0 / m1 + 1.0 / m2);
        const double w = std::sqrt(std::max(w2, 0.0));
        if (w > 0.0 && def.step_s > 1.0 / (w * kStepFraction))
          ck.error("step_s", fmt_num(def.step_s) + " s is too large for the swing of ties[" +
                                 std::to_string(i) + "] (" + fmt_fixed(w / (2 * std::numbers::pi), 2) +
                                 " Hz): the step must be at most " +
                                 fmt_num(1.0 / (w * kStepFraction)) + " s");
        if (t.damping_mw_per_hz == 0.0 && w > 0.0) {
          const double suggest = 2.0 * 0.1 * w / (1.0 / m1 + 1.0 / m2);
          ck.warn("ties[" + std::to_string(i) + "].damping_mw_per_hz",
                  "0 leaves the inter-area swing (" + fmt_fixed(w / (2 * std::numbers::pi), 2) +
                      " Hz) undamped: the aggregate model has no other damping; about " +
                      fmt_fixed(suggest, 0) + " MW/Hz gives 10 % damping");
        }
      }
    }
  }
  std::stable_partition(out.begin(), out.end(), [](const Issue& i) { return !i.warning; });
  if (index) *index = SystemIndex{std::move(areas), std::move(units), std::move(ties), std::move(sizes)};
  return flows;
}

}  // namespace

std::vector<Issue> validate(const SystemDef& def) {
  std::vector<Issue> out;
  check_definition(def, out, nullptr);
  return out;
}

CheckResult check(SystemDef def) {
  CheckResult r;
  SystemIndex index;
  std::optional<InitialFlows> flows = check_definition(def, r.issues, &index);
  if (!flows || has_errors(r.issues)) return r;
  // The events passed check_command above: only their ids are looked up here.
  std::vector<TimedAction> events;
  events.reserve(def.events.size());
  for (const EventDef& e : def.events) events.push_back({e.at_s, to_action(index, e.command)});
  r.system = CheckedSystem(std::make_shared<const CheckedSystem::Parts>(
      CheckedSystem::Parts{std::move(def), std::move(*flows), std::move(index), std::move(events)}));
  return r;
}

}  // namespace droopline
