// Checks of one command against a definition: shared by the loader (scenario events) and the
// engine's live checks (Engine::check_all), so a bound is written once.
#include <algorithm>
#include <cmath>
#include <iterator>

#include "checker.hpp"

namespace droopline::detail {
namespace {

// A governor command that lowers a droop makes its area's frequency loop faster (M/beta, the
// inertia over the natural response, shrinks): the fixed step must still resolve it, as the loader
// requires of the initial settings.
void check_new_droop(Checker& ck, const SystemDef& def, std::size_t unit, double droop, const Where& path) {
  const UnitDef& u = def.units[unit];
  if (!(droop >= bound::kDroopMinPu) || !(def.nominal_hz > 0.0) || !(def.step_s > 0.0)) return;
  std::size_t area = def.areas.size();
  for (std::size_t a = 0; a < def.areas.size(); ++a)
    if (def.areas[a].id == u.area) area = a;
  if (area == def.areas.size()) return;
  double inertia = 0.0;
  for (const UnitDef& v : def.units)
    if (v.area == u.area && v.online && is_synchronous(v) && v.inertia_s > 0.0) inertia += v.inertia_s * v.rating_mw;
  double beta = natural_response_mw_per_hz(def, area);
  if (u.online && u.governor.droop > 0.0) beta -= u.rating_mw / (u.governor.droop * def.nominal_hz);
  beta += u.rating_mw / (droop * def.nominal_hz);
  if (std::string why = droop_step_problem(droop, u.area, 2.0 * inertia / def.nominal_hz, beta, def.step_s);
      !why.empty())
    ck.error(path, why);
}

}  // namespace

// The size of each area (MW): the larger of its demand and its units' ratings. Load steps, ramps
// and fluctuations are bounded by a multiple of it.
std::vector<double> area_sizes(const SystemDef& def, const IdIndex& areas) {
  std::vector<double> gen(def.areas.size(), 0.0), size(def.areas.size(), 0.0);
  for (const UnitDef& u : def.units)
    if (auto it = areas.find(u.area); it != areas.end() && u.rating_mw > 0.0) gen[it->second] += u.rating_mw;
  for (std::size_t a = 0; a < def.areas.size(); ++a) size[a] = std::max(def.areas[a].demand_mw, gen[a]);
  return size;
}

void check_command(Checker& ck, const SystemDef& def, const Command& c, const std::string& p, const IdIndex& areas,
                   const IdIndex& units, const IdIndex& ties, const std::vector<double>& area_size_mw) {
  auto ref = [&](const IdIndex& ids, const std::string& field, const std::string& value,
                 const char* what) -> const std::size_t* {
    auto it = ids.find(value);
    if (it == ids.end()) {
      ck.error(at(p, field.c_str(), true), "unknown " + std::string(what) + " \"" + value + "\"");
      return nullptr;
    }
    return &it->second;
  };
  auto unit_range = [&](std::size_t ui, const std::string& field, double mw) {
    const UnitDef& u = def.units[ui];
    const double lo = unit_min_mw(u), hi = unit_max_mw(u);
    if (!(mw >= lo && mw <= hi))
      ck.error(at(p, field.c_str(), true), "must lie within [min_mw, max_mw] = [" + fmt_num(lo) + ", " + fmt_num(hi) +
                                               "] of unit \"" + u.id + "\", got " + shown(mw, lo, hi));
  };
  // A change of load within ten times the area's size (either sign); a fluctuation within it.
  auto area_load = [&](const std::size_t* ai, const char* field, double mw, bool fluctuation) {
    ck.finite(at(p, field, true), mw);
    if (!ai || !std::isfinite(mw)) return;
    const double size = std::max(area_size_mw[*ai], 1.0);
    const std::string area = "area \"" + def.areas[*ai].id + "\", " + fmt_num(area_size_mw[*ai]) + " MW";
    if (!fluctuation && std::fabs(mw) > bound::kAreaStepFactor * size)
      ck.error(at(p, field, true), "must lie within +/-" + fmt_num(bound::kAreaStepFactor * size) +
                                       " MW (ten times the size of " + area + "), got " + fmt_num(mw));
    if (fluctuation && mw > size)
      ck.error(at(p, field, true),
               "must be at most " + fmt_num(size) + " MW (the size of " + area + "), got " + fmt_num(mw));
  };
  switch (c.kind) {
    case CommandKind::load_step:
      area_load(ref(areas, "area", c.area, "area"), "mw", c.mw, false);
      break;
    case CommandKind::load_ramp:
      area_load(ref(areas, "area", c.area, "area"), "mw", c.mw, false);
      ck.positive_at_most(at(p, ".over_s"), c.over_s, bound::kDurationS, " s");
      break;
    case CommandKind::unit_trip:
      ref(units, "unit", c.unit, "unit");
      break;
    case CommandKind::unit_start:
      if (auto ui = ref(units, "unit", c.unit, "unit")) unit_range(*ui, "mw", c.mw);
      break;
    case CommandKind::setpoint:
      if (auto ui = ref(units, "unit", c.unit, "unit")) unit_range(*ui, "mw", c.mw);
      if (c.ramp_mw_per_s) ck.positive_at_most(at(p, ".ramp_mw_per_s"), *c.ramp_mw_per_s, bound::kRampMwPerS, " MW/s");
      break;
    case CommandKind::governor:
      ref(units, "unit", c.unit, "unit");
      if (c.droop) {
        ck.within(at(p, ".droop"), *c.droop, bound::kDroopMinPu, bound::kDroopPu);
        if (const std::size_t* ui = units.count(c.unit) ? &units.at(c.unit) : nullptr)
          check_new_droop(ck, def, *ui, *c.droop, at(p, ".droop"));
      }
      if (c.deadband_hz) ck.non_negative_at_most(at(p, ".deadband_hz"), *c.deadband_hz, bound::kDeadbandHz, " Hz");
      if (!c.droop && !c.deadband_hz && !c.deadband && !c.mode)
        ck.error(p, "a governor command needs at least one of droop, deadband_hz, deadband, mode");
      break;
    case CommandKind::tie_trip:
    case CommandKind::tie_close:
      ref(ties, "tie", c.tie, "tie");
      break;
    case CommandKind::agc:
      ref(areas, "area", c.area, "area");
      break;
    case CommandKind::unit_stop:
      ref(units, "unit", c.unit, "unit");
      if (c.ramp_mw_per_s) ck.positive_at_most(at(p, ".ramp_mw_per_s"), *c.ramp_mw_per_s, bound::kRampMwPerS, " MW/s");
      break;
    case CommandKind::schedule:
      area_load(ref(areas, "area", c.area, "area"), "mw", c.mw, false);
      ck.non_negative_at_most(at(p, ".over_s"), c.over_s, bound::kDurationS, " s");
      break;
    case CommandKind::shed:
    case CommandKind::restore:
      if (const std::size_t* ai = ref(areas, "area", c.area, "area"); !c.all_shed || c.kind == CommandKind::shed) {
        ck.positive(at(p, ".mw"), c.mw);
        if (c.mw > 0.0) area_load(ai, "mw", c.mw, false);
      }
      break;
    case CommandKind::fluctuation:
      if (const std::size_t* ai = ref(areas, "area", c.area, "area"); ai && c.sigma_mw > 0.0)
        area_load(ai, "sigma_mw", c.sigma_mw, true);
      ck.non_negative(at(p, ".sigma_mw"), c.sigma_mw);
      ck.positive_at_most(at(p, ".tau_s"), c.tau_s, bound::kTimeS, " s");
      break;
  }
}

Action to_action(const SystemIndex& index, const Command& c) {
  auto area = [&] { return AreaId{static_cast<std::uint32_t>(index.areas.find(c.area)->second)}; };
  auto unit = [&] { return UnitId{static_cast<std::uint32_t>(index.units.find(c.unit)->second)}; };
  auto tie = [&] { return TieId{static_cast<std::uint32_t>(index.ties.find(c.tie)->second)}; };
  switch (c.kind) {
    case CommandKind::load_step: return LoadStep{area(), c.mw};
    case CommandKind::load_ramp: return LoadRamp{area(), c.mw, c.over_s};
    case CommandKind::unit_trip: return UnitTrip{unit()};
    case CommandKind::unit_start: return UnitStart{unit(), c.mw};
    case CommandKind::setpoint: return Setpoint{unit(), c.mw, c.ramp_mw_per_s};
    case CommandKind::governor: return GovernorChange{unit(), c.droop, c.deadband_hz, c.deadband, c.mode};
    case CommandKind::tie_trip: return TieTrip{tie()};
    case CommandKind::tie_close: return TieClose{tie()};
    case CommandKind::agc: return AgcSwitch{area(), c.enabled, c.agc_mode};
    case CommandKind::fluctuation: return Fluctuation{area(), c.sigma_mw, c.tau_s};
    case CommandKind::unit_stop: return UnitStop{unit(), c.ramp_mw_per_s};
    case CommandKind::schedule: return Schedule{area(), c.mw, c.over_s};
    case CommandKind::shed: return Shed{area(), c.mw};
    case CommandKind::restore: return Restore{area(), c.all_shed ? std::nullopt : std::optional<double>(c.mw)};
  }
  return LoadStep{area(), c.mw};
}

}  // namespace droopline::detail

namespace droopline {

namespace {
template <class Id>
std::optional<Id> find_id(const SystemIndex::Ids& ids, std::string_view id) {
  auto it = ids.find(id);
  if (it == ids.end()) return std::nullopt;
  return Id{static_cast<std::uint32_t>(it->second)};
}
}  // namespace

std::optional<AreaId> SystemIndex::area(std::string_view id) const { return find_id<AreaId>(areas, id); }
std::optional<UnitId> SystemIndex::unit(std::string_view id) const { return find_id<UnitId>(units, id); }
std::optional<TieId> SystemIndex::tie(std::string_view id) const { return find_id<TieId>(ties, id); }

std::optional<Action> resolve(const CheckedSystem& system, const Command& command, const std::string& path,
                              std::vector<Issue>& issues) {
  std::vector<Issue> found;
  detail::Checker ck(found);
  const SystemIndex& ix = system.index();
  detail::check_command(ck, system.def(), command, path, ix.areas, ix.units, ix.ties, ix.area_size_mw);
  const bool ok = found.empty();
  issues.insert(issues.end(), std::make_move_iterator(found.begin()), std::make_move_iterator(found.end()));
  if (!ok) return std::nullopt;
  return detail::to_action(ix, command);
}

Resolved resolve_all(const CheckedSystem& system, std::span<const Command> commands) {
  Resolved out;
  for (std::size_t i = 0; i < commands.size(); ++i) {
    const std::string path = commands.size() == 1 ? "command" : "commands[" + std::to_string(i) + "]";
    if (auto a = resolve(system, commands[i], path, out.issues)) out.actions.push_back(std::move(*a));
  }
  if (!out.issues.empty()) out.actions.clear();
  return out;
}

}  // namespace droopline

