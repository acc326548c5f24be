#include "droopline/validate.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <numbers>
#include <string_view>

#include "droopline/format.hpp"

namespace droopline {
namespace {

constexpr double kBalanceToleranceMw = 0.1;
constexpr double kStepFraction = 5.0;  // step must be at most 1/5 of the fastest time constant

// Physical bounds: what a real power system can have, generously. A finite value beyond them is
// a typing slip or an attack, and it is refused rather than simulated into garbage.
namespace bound {
constexpr double kNominalHzMin = 10.0;  // below any supply frequency in use (16.7 Hz rail supplies)
constexpr double kNominalHz = 1000.0;   // above any supply frequency in use
constexpr double kDroopMinPu = 0.001;   // 0.1 %: below it a unit is isochronous in all but name
constexpr double kStepS = 1.0;          // a fixed step longer than any governor time constant
constexpr double kDurationS = 1e7;      // about 115 days of simulated time
constexpr double kPowerMw = 2e6;        // demand, rating, limits: above the largest interconnection
constexpr double kTimeS = 1e4;          // any lag, reset or delay
constexpr double kInertiaS = 100.0;     // H on own rating (aggregates included)
constexpr double kRampMwPerS = 1e6;     // any ramp limit or ramp command
constexpr double kDroopPu = 1.0;        // 100 % droop
constexpr double kDeadbandHz = 5.0;     // half-width
constexpr double kGainPerPu = 100.0;    // secondary-control gains, load damping, temporary droop
constexpr double kMwPerHz = 1e7;        // bias and tie damping
constexpr double kEnergyMwh = 1e6;      // battery energy
constexpr double kAreaStepFactor = 10.0;  // a load step or ramp within ten times the area's size
}  // namespace bound

// A path made of a prefix and a field, joined only when a message needs it: validating a large
// fleet checks hundreds of thousands of values and reports few.
struct Where {
  std::string_view base;
  const char* suffix;
  bool dot = false;  // insert '.' between base and suffix
  Where(const std::string& b) : base(b), suffix(nullptr) {}  // NOLINT: implicit on purpose
  Where(const char* b) : base(b), suffix(nullptr) {}         // NOLINT: implicit on purpose
  Where(const std::string& b, const char* s, bool d) : base(b), suffix(s), dot(d) {}
  std::string str() const {
    std::string out(base);
    if (suffix) {
      if (dot) out += '.';
      out += suffix;
    }
    return out;
  }
};

Where at(const std::string& base, const char* suffix, bool dot = false) { return {base, suffix, dot}; }

// A refused value as a message shows it: in full when the short form would read like the bound it
// broke (900.0000001 is not "900").
std::string shown(double v, double lo, double hi) {
  const std::string s = fmt_num(v);
  return (s == fmt_num(lo) || s == fmt_num(hi)) ? fmt_exact(v) : s;
}

class Checker {
 public:
  explicit Checker(std::vector<Issue>& out) : out_(out) {}

  void error(const Where& path, const std::string& message) {
    out_.push_back({path.str(), message, false});
  }
  void warn(const Where& path, const std::string& message) {
    out_.push_back({path.str(), message, true});
  }
  void positive(const Where& path, double v) {
    if (!(v > 0.0)) error(path, "must be > 0, got " + fmt_num(v));
  }
  void non_negative(const Where& path, double v) {
    if (!(v >= 0.0)) error(path, "must be >= 0, got " + fmt_num(v));
  }
  void finite(const Where& path, double v) {
    if (!std::isfinite(v)) error(path, "must be a finite number");
  }
  /// Refuses a value above what a real system can have (NaN and infinity included).
  void at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v <= hi))
      error(path, "must be at most " + fmt_num(hi) + unit + " (beyond what a real system can have), got " + fmt_num(v));
  }
  /// `positive` and `at_most` together: the usual bound of a physical quantity.
  void positive_at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v > 0.0)) error(path, "must be > 0, got " + fmt_num(v));
    else at_most(path, v, hi, unit);
  }
  void non_negative_at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v >= 0.0)) error(path, "must be >= 0, got " + fmt_num(v));
    else at_most(path, v, hi, unit);
  }
  void within(const Where& path, double v, double lo, double hi) {
    if (!(v >= lo && v <= hi))
      error(path, "must lie within [" + fmt_num(lo) + ", " + fmt_num(hi) + "], got " + shown(v, lo, hi));
  }
  /// Warns when a valid value lies outside its typical range (section 9 of the model notes).
  void typical(const Where& path, double v, double lo, double hi, const char* what) {
    if (v > 0.0 && (v < lo || v > hi))
      warn(path, fmt_num(v) + " is outside the typical range " + fmt_num(lo) + "-" + fmt_num(hi) +
                     " of " + what);
  }

 private:
  std::vector<Issue>& out_;
};

bool valid_id(const std::string& id) {
  if (id.empty() || id.size() > 64) return false;
  return std::all_of(id.begin(), id.end(), [](char c) {
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_' ||
           c == '-';
  });
}

template <class T>
std::map<std::string, std::size_t> index_ids(Checker& ck, const std::vector<T>& items,
                                             const std::string& list) {
  std::map<std::string, std::size_t> index;
  for (std::size_t i = 0; i < items.size(); ++i) {
    const std::string path = list + "[" + std::to_string(i) + "].id";
    const std::string& id = items[i].id;
    if (!valid_id(id)) {
      ck.error(path, "must be 1-64 letters, digits, '_' or '-', got \"" + id + "\"");
      continue;
    }
    auto [it, fresh] = index.emplace(id, i);
    if (!fresh)
      ck.error(path, "duplicate id \"" + id + "\" (also " + list + "[" +
                         std::to_string(it->second) + "])");
  }
  return index;
}

struct TimeConstant {
  double value_s;
  std::string path;
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

void check_turbine(Checker& ck, const std::string& p, const UnitDef& u,
                   std::vector<TimeConstant>& tcs) {
  const TurbineDef& t = u.turbine;
  auto tc = [&](const char* name, double v) {
    ck.positive_at_most(at(p, name, true), v, bound::kTimeS, " s");
    if (v > 0.0) tcs.push_back({v, p + "." + name});
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
      if (t.water_s > 0.0) tcs.push_back({t.water_s / 2.0, p + ".water_s (Tw/2)"});
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
        if (tr > 0.0) tcs.push_back({tr * rt / u.governor.droop, p + " (TR*RT/R)"});
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

// The size of each area (MW): the larger of its demand and its units' ratings. Load steps, ramps
// and fluctuations are bounded by a multiple of it.
std::vector<double> area_sizes(const SystemDef& def, const std::map<std::string, std::size_t>& areas) {
  std::vector<double> gen(def.areas.size(), 0.0), size(def.areas.size(), 0.0);
  for (const UnitDef& u : def.units)
    if (auto it = areas.find(u.area); it != areas.end() && u.rating_mw > 0.0) gen[it->second] += u.rating_mw;
  for (std::size_t a = 0; a < def.areas.size(); ++a) size[a] = std::max(def.areas[a].demand_mw, gen[a]);
  return size;
}

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
  if (std::string why = droop_step_problem(droop, u.area, 2.0 * inertia / def.nominal_hz, beta, def.step_s); !why.empty())
    ck.error(path, why);
}

void check_command(Checker& ck, const SystemDef& def, const Command& c, const std::string& p,
                   const std::map<std::string, std::size_t>& areas,
                   const std::map<std::string, std::size_t>& units,
                   const std::map<std::string, std::size_t>& ties, const std::vector<double>& area_size_mw) {
  auto ref = [&](const std::map<std::string, std::size_t>& ids, const std::string& field,
                 const std::string& value, const char* what) -> const std::size_t* {
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
      ck.error(at(p, field.c_str(), true), "must lie within [min_mw, max_mw] = [" + fmt_num(lo) + ", " +
                                    fmt_num(hi) + "] of unit \"" + u.id + "\", got " + shown(mw, lo, hi));
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
      ck.error(at(p, field, true), "must be at most " + fmt_num(size) + " MW (the size of " + area + "), got " + fmt_num(mw));
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
    case CommandKind::fluctuation:
      if (const std::size_t* ai = ref(areas, "area", c.area, "area"); ai && c.sigma_mw > 0.0)
        area_load(ai, "sigma_mw", c.sigma_mw, true);
      ck.non_negative(at(p, ".sigma_mw"), c.sigma_mw);
      ck.positive_at_most(at(p, ".tau_s"), c.tau_s, bound::kTimeS, " s");
      break;
  }
}

std::string island_names(const SystemDef& def, const std::vector<int>& island, int which) {
  std::string names;
  for (std::size_t a = 0; a < def.areas.size(); ++a)
    if (island[a] == which) names += (names.empty() ? "" : ", ") + def.areas[a].id;
  return names;
}

struct Topology {
  std::vector<int> from, to;
  std::vector<bool> in_service;
};

Topology topology_of(const SystemDef& def, const std::map<std::string, std::size_t>& areas) {
  Topology t;
  for (const TieDef& tie : def.ties) {
    auto f = areas.find(tie.from), e = areas.find(tie.to);
    const bool ok = f != areas.end() && e != areas.end() && f->second != e->second;
    t.from.push_back(ok ? static_cast<int>(f->second) : 0);
    t.to.push_back(ok ? static_cast<int>(e->second) : 0);
    t.in_service.push_back(ok && tie.in_service);
  }
  return t;
}

std::map<std::string, std::size_t> plain_index(const SystemDef& def) {
  std::map<std::string, std::size_t> m;
  for (std::size_t i = 0; i < def.areas.size(); ++i) m.emplace(def.areas[i].id, i);
  return m;
}

// Dense Gaussian elimination with partial pivoting; returns false when singular.
bool solve_dense(std::vector<double>& a, std::vector<double>& b, std::size_t n) {
  for (std::size_t c = 0; c < n; ++c) {
    std::size_t piv = c;
    for (std::size_t r = c + 1; r < n; ++r)
      if (std::fabs(a[r * n + c]) > std::fabs(a[piv * n + c])) piv = r;
    if (std::fabs(a[piv * n + c]) < 1e-12) return false;
    if (piv != c) {
      for (std::size_t k = 0; k < n; ++k) std::swap(a[c * n + k], a[piv * n + k]);
      std::swap(b[c], b[piv]);
    }
    for (std::size_t r = c + 1; r < n; ++r) {
      const double f = a[r * n + c] / a[c * n + c];
      for (std::size_t k = c; k < n; ++k) a[r * n + k] -= f * a[c * n + k];
      b[r] -= f * b[c];
    }
  }
  for (std::size_t c = n; c-- > 0;) {
    double s = b[c];
    for (std::size_t k = c + 1; k < n; ++k) s -= a[c * n + k] * b[k];
    b[c] = s / a[c * n + c];
  }
  return true;
}

}  // namespace

bool has_errors(const std::vector<Issue>& issues) {
  return std::any_of(issues.begin(), issues.end(), [](const Issue& i) { return !i.warning; });
}

std::string droop_step_problem(double droop, const std::string& area, double m, double beta, double step_s) {
  if (!(m > 0.0 && beta > 0.0)) return {};
  const double tc = m / beta;
  if (!(step_s > tc / kStepFraction)) return {};
  return fmt_num(droop) + " would make area \"" + area + "\" respond faster (inertia over natural response, M/beta = " +
         fmt_num(tc) + " s) than the fixed step can follow: step_s (" + fmt_num(step_s) + " s) must be at most a fifth of it";
}

bool is_synchronous(const UnitDef& unit) { return unit.turbine.type != TurbineType::battery; }

double unit_min_mw(const UnitDef& u) {
  if (u.min_mw) return *u.min_mw;
  return u.turbine.type == TurbineType::battery ? -u.rating_mw : 0.0;
}

double unit_max_mw(const UnitDef& u) { return u.max_mw ? *u.max_mw : u.rating_mw; }

// Design rule for the transient droop compensation of a hydro governor (model notes, sec. 5).
double hydro_temporary_droop(const UnitDef& u) {
  if (u.turbine.temporary_droop) return *u.turbine.temporary_droop;
  const double tw = u.turbine.water_s;
  const double tm = 2.0 * u.inertia_s;
  if (!(tm > 0.0)) return 0.0;
  return (2.3 - (tw - 1.0) * 0.15) * tw / tm;
}

double hydro_reset_s(const UnitDef& u) {
  if (u.turbine.reset_s) return *u.turbine.reset_s;
  const double tw = u.turbine.water_s;
  return (5.0 - (tw - 1.0) * 0.5) * tw;
}

double natural_response_mw_per_hz(const SystemDef& def, std::size_t area_index) {
  const AreaDef& area = def.areas[area_index];
  double beta = area.load_damping * area.demand_mw / def.nominal_hz;
  for (const UnitDef& u : def.units)
    if (u.online && u.area == area.id && u.governor.droop > 0.0)
      beta += u.rating_mw / (u.governor.droop * def.nominal_hz);
  return beta;
}

std::vector<int> islands_of(std::size_t area_count, const std::vector<int>& tie_from,
                            const std::vector<int>& tie_to, const std::vector<bool>& in_service) {
  std::vector<int> parent(area_count);
  for (std::size_t i = 0; i < area_count; ++i) parent[i] = static_cast<int>(i);
  auto find = [&](int x) {
    while (parent[x] != x) x = parent[x] = parent[parent[x]];
    return x;
  };
  for (std::size_t t = 0; t < tie_from.size(); ++t)
    if (in_service[t]) parent[find(tie_from[t])] = find(tie_to[t]);
  // Number islands densely in order of their first area.
  std::vector<int> label(area_count, -1), island(area_count);
  int next = 0;
  for (std::size_t a = 0; a < area_count; ++a) {
    const int root = find(static_cast<int>(a));
    if (label[root] < 0) label[root] = next++;
    island[a] = label[root];
  }
  return island;
}

std::optional<InitialFlows> solve_initial_flows(const SystemDef& def, std::vector<Issue>& issues) {
  const std::size_t na = def.areas.size();
  const auto areas = plain_index(def);
  const Topology topo = topology_of(def, areas);
  const std::vector<int> island = islands_of(na, topo.from, topo.to, topo.in_service);

  std::vector<double> surplus(na, 0.0);
  for (std::size_t a = 0; a < na; ++a) surplus[a] = -def.areas[a].demand_mw;
  for (const UnitDef& u : def.units) {
    auto it = areas.find(u.area);
    if (it != areas.end() && u.online) surplus[it->second] += u.setpoint_mw;
  }

  InitialFlows out;
  out.angle_rad.assign(na, 0.0);
  out.flow_mw.assign(def.ties.size(), 0.0);
  const int n_islands = na ? *std::max_element(island.begin(), island.end()) + 1 : 0;
  bool ok = true;
  for (int isl = 0; isl < n_islands; ++isl) {
    std::vector<std::size_t> members;
    for (std::size_t a = 0; a < na; ++a)
      if (island[a] == isl) members.push_back(a);
    double gen = 0.0, dem = 0.0;
    for (std::size_t a : members) {
      dem += def.areas[a].demand_mw;
      gen += surplus[a] + def.areas[a].demand_mw;
    }
    if (std::fabs(gen - dem) > kBalanceToleranceMw) {
      const std::string where = members.size() == 1 ? "areas[" + std::to_string(members[0]) + "]"
                                                    : "areas";
      issues.push_back({where,
                        "generation " + fmt_fixed(gen, 1) + " MW does not balance demand " +
                            fmt_fixed(dem, 1) + " MW in the island {" +
                            island_names(def, island, isl) + "} (allowed difference " +
                            fmt_num(kBalanceToleranceMw) + " MW)",
                        false});
      ok = false;
      continue;
    }
    if (members.size() < 2) continue;
    // Newton-Raphson on the non-reference angles, from the linear (DC) estimate.
    const std::size_t n = members.size() - 1;
    std::vector<int> pos(na, -1);
    for (std::size_t k = 1; k < members.size(); ++k) pos[members[k]] = static_cast<int>(k - 1);
    std::vector<double> theta(na, 0.0);
    auto mismatch = [&](std::vector<double>& f, std::vector<double>* jac, bool linear) {
      f.assign(n, 0.0);
      if (jac) jac->assign(n * n, 0.0);
      for (std::size_t k = 1; k < members.size(); ++k) f[k - 1] = -surplus[members[k]];
      for (std::size_t t = 0; t < def.ties.size(); ++t) {
        if (!topo.in_service[t] || island[topo.from[t]] != isl) continue;
        const int a = topo.from[t], b = topo.to[t];
        const double d = theta[a] - theta[b], pm = def.ties[t].pmax_mw;
        const double flow = linear ? pm * d : pm * std::sin(d);
        const double slope = linear ? pm : pm * std::cos(d);
        if (pos[a] >= 0) f[pos[a]] += flow;
        if (pos[b] >= 0) f[pos[b]] -= flow;
        if (!jac) continue;
        auto add = [&](int r, int c, double v) {
          if (r >= 0 && c >= 0) (*jac)[r * n + c] += v;
        };
        add(pos[a], pos[a], slope);
        add(pos[a], pos[b], -slope);
        add(pos[b], pos[a], -slope);
        add(pos[b], pos[b], slope);
      }
    };
    std::vector<double> f, jac;
    bool converged = false;
    for (int iter = 0; iter < 60; ++iter) {
      mismatch(f, &jac, iter == 0);
      double worst = 0.0;
      for (double v : f) worst = std::max(worst, std::fabs(v));
      if (iter > 0 && worst < 1e-9) {
        converged = true;
        break;
      }
      std::vector<double> rhs(n);
      for (std::size_t k = 0; k < n; ++k) rhs[k] = -f[k];
      if (!solve_dense(jac, rhs, n)) break;
      for (std::size_t k = 1; k < members.size(); ++k) {
        double step = rhs[k - 1];
        step = std::clamp(step, -0.5, 0.5);  // damped: stay on the stable side of pull-out
        theta[members[k]] += step;
      }
    }
    bool stable = converged;
    for (std::size_t t = 0; t < def.ties.size() && stable; ++t)
      if (topo.in_service[t] && island[topo.from[t]] == isl &&
          std::fabs(theta[topo.from[t]] - theta[topo.to[t]]) >= std::numbers::pi / 2)
        stable = false;
    if (!stable) {
      double largest = 0.0;
      std::string which;
      for (std::size_t a : members)
        if (std::fabs(surplus[a]) > largest) {
          largest = std::fabs(surplus[a]);
          which = def.areas[a].id;
        }
      issues.push_back({"ties", "the scheduled exchanges of the island {" +
                                    island_names(def, island, isl) +
                                    "} exceed what its ties can carry below the 90 degree "
                                    "pull-out angle (largest area surplus " +
                                    fmt_fixed(largest, 1) + " MW in \"" + which + "\")",
                        false});
      ok = false;
      continue;
    }
    for (std::size_t a : members) out.angle_rad[a] = theta[a];
  }
  if (!ok) return std::nullopt;
  for (std::size_t t = 0; t < def.ties.size(); ++t)
    if (topo.in_service[t])
      out.flow_mw[t] = def.ties[t].pmax_mw *
                       std::sin(out.angle_rad[topo.from[t]] - out.angle_rad[topo.to[t]]);
  return out;
}

std::vector<Issue> validate_command(const SystemDef& def, const Command& command,
                                    const std::string& path) {
  std::vector<Issue> out;
  Checker ck(out);
  std::map<std::string, std::size_t> areas, units, ties;
  for (std::size_t i = 0; i < def.areas.size(); ++i) areas.emplace(def.areas[i].id, i);
  for (std::size_t i = 0; i < def.units.size(); ++i) units.emplace(def.units[i].id, i);
  for (std::size_t i = 0; i < def.ties.size(); ++i) ties.emplace(def.ties[i].id, i);
  check_command(ck, def, command, path, areas, units, ties, area_sizes(def, areas));
  return out;
}

std::vector<Issue> validate(const SystemDef& def) {
  std::vector<Issue> out;
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

  const auto areas = index_ids(ck, def.areas, "areas");
  const auto units = index_ids(ck, def.units, "units");
  const auto ties = index_ids(ck, def.ties, "ties");

  std::vector<TimeConstant> tcs;
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
    check_governor(ck, p + ".governor", u.governor, battery);
    if (!battery && u.governor.lag_s > 0.0)
      tcs.push_back({u.governor.lag_s, p + ".governor.lag_s"});
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

  const std::vector<double> sizes = area_sizes(def, areas);
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
        tcs.push_back({m / beta, "areas[" + std::to_string(i) + "] (inertia over natural response, M/beta)"});
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

  if (def.step_s > 0.0 && !tcs.empty()) {
    auto fastest = std::min_element(tcs.begin(), tcs.end(), [](auto& a, auto& b) {
      return a.value_s < b.value_s;
    });
    if (def.step_s > fastest->value_s / kStepFraction)
      ck.error("step_s", fmt_num(def.step_s) + " s is too large for the fastest time constant, " +
                             fastest->path + " = " + fmt_num(fastest->value_s) +
                             " s: the fixed RK4 step must be at most a fifth of it (" +
                             fmt_num(fastest->value_s / kStepFraction) +
                             " s) to stay accurate and stable");
  }

  // The operating point only means something once the parts are valid.
  if (!has_errors(out)) {
    auto flows = solve_initial_flows(def, out);
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
  return out;
}

const char* to_string(TurbineType t) {
  switch (t) {
    case TurbineType::steam: return "steam";
    case TurbineType::reheat: return "reheat";
    case TurbineType::hydro: return "hydro";
    case TurbineType::gas: return "gas";
    case TurbineType::battery: return "battery";
  }
  return "?";
}

const char* to_string(GovernorMode m) {
  return m == GovernorMode::droop ? "droop" : "isochronous";
}

const char* to_string(DeadbandKind k) { return k == DeadbandKind::offset ? "offset" : "step"; }

const char* to_string(CommandKind k) {
  switch (k) {
    case CommandKind::load_step: return "load_step";
    case CommandKind::load_ramp: return "load_ramp";
    case CommandKind::unit_trip: return "unit_trip";
    case CommandKind::unit_start: return "unit_start";
    case CommandKind::setpoint: return "setpoint";
    case CommandKind::governor: return "governor";
    case CommandKind::tie_trip: return "tie_trip";
    case CommandKind::tie_close: return "tie_close";
    case CommandKind::agc: return "agc";
    case CommandKind::fluctuation: return "fluctuation";
  }
  return "?";
}

}  // namespace droopline
