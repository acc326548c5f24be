#include "droopline/scenario_io.hpp"

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <set>
#include <string_view>
#include <sstream>

#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"

namespace droopline {
namespace {

// Objects as small vectors of pairs: far fewer allocations than std::map for the many small
// objects of a large fleet, lookups over a dozen keys as fast, and output in insertion order.
using json = nlohmann::ordered_json;
using ijson = json;

std::string join(const std::string& path, const std::string& key) {
  return path.empty() ? key : path + "." + key;
}

const char* type_name(const ijson& j) {
  switch (j.type()) {
    case ijson::value_t::null: return "null";
    case ijson::value_t::object: return "an object";
    case ijson::value_t::array: return "an array";
    case ijson::value_t::string: return "a string";
    case ijson::value_t::boolean: return "a boolean";
    case ijson::value_t::number_integer:
    case ijson::value_t::number_unsigned:
    case ijson::value_t::number_float: return "a number";
    default: return "something else";
  }
}

// Reads fields out of JSON objects, recording every problem with its path.
class Reader {
 public:
  explicit Reader(std::vector<Issue>& issues) : issues_(issues) {}

  void error(const std::string& path, const std::string& message) {
    issues_.push_back({path, message, false});
  }

  bool object(const ijson& j, const std::string& path, std::initializer_list<std::string_view> allowed) {
    if (!j.is_object()) {
      error(path, std::string("must be an object, got ") + type_name(j));
      return false;
    }
    for (auto it = j.begin(); it != j.end(); ++it)
      if (std::find(allowed.begin(), allowed.end(), it.key()) == allowed.end())
        error(join(path, it.key()), "unknown field");
    return true;
  }

  const ijson* field(const ijson& obj, const std::string& key, const std::string& path, bool required) {
    auto it = obj.find(key);
    if (it == obj.end()) {
      if (required) error(join(path, key), "required");
      return nullptr;
    }
    return &*it;
  }

  void number(const ijson& obj, const std::string& key, const std::string& path, double& out,
              bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_number())
        out = v->get<double>();
      else
        error(join(path, key), std::string("must be a number, got ") + type_name(*v));
    }
  }

  void number(const ijson& obj, const std::string& key, const std::string& path,
              std::optional<double>& out) {
    double v = 0.0;
    const std::size_t before = issues_.size();
    if (!obj.contains(key)) return;
    number(obj, key, path, v, true);
    if (issues_.size() == before) out = v;
  }

  void string(const ijson& obj, const std::string& key, const std::string& path, std::string& out,
              bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_string())
        out = v->get<std::string>();
      else
        error(join(path, key), std::string("must be a string, got ") + type_name(*v));
    }
  }

  void boolean(const ijson& obj, const std::string& key, const std::string& path, bool& out,
               bool required = false) {
    if (const ijson* v = field(obj, key, path, required)) {
      if (v->is_boolean())
        out = v->get<bool>();
      else
        error(join(path, key), std::string("must be true or false, got ") + type_name(*v));
    }
  }

  template <class E>
  bool choice(const ijson& obj, const std::string& key, const std::string& path,
              const std::vector<std::pair<const char*, E>>& options, E& out,
              bool required = false) {
    const ijson* v = field(obj, key, path, required);
    if (!v) return false;
    std::string names;
    for (auto& [name, value] : options) {
      if (v->is_string() && v->get<std::string>() == name) {
        out = value;
        return true;
      }
      names += (names.empty() ? "" : ", ") + std::string("\"") + name + "\"";
    }
    error(join(path, key), "must be one of " + names + ", got " +
                               (v->is_string() ? "\"" + v->get<std::string>() + "\"" : type_name(*v)));
    return false;
  }

  const ijson* array(const ijson& obj, const std::string& key, const std::string& path,
                    bool required = false) {
    const ijson* v = field(obj, key, path, required);
    if (v && !v->is_array()) {
      error(join(path, key), std::string("must be an array, got ") + type_name(*v));
      return nullptr;
    }
    return v;
  }

 private:
  std::vector<Issue>& issues_;
};

const std::vector<std::pair<const char*, TurbineType>> kTurbineNames = {
    {"steam", TurbineType::steam}, {"reheat", TurbineType::reheat}, {"hydro", TurbineType::hydro},
    {"gas", TurbineType::gas}, {"battery", TurbineType::battery}};
const std::vector<std::pair<const char*, GovernorMode>> kModeNames = {
    {"droop", GovernorMode::droop}, {"isochronous", GovernorMode::isochronous}};
const std::vector<std::pair<const char*, DeadbandKind>> kDeadbandNames = {
    {"offset", DeadbandKind::offset}, {"step", DeadbandKind::step}};
const std::vector<std::pair<const char*, CommandKind>> kCommandNames = {
    {"load_step", CommandKind::load_step}, {"load_ramp", CommandKind::load_ramp},
    {"unit_trip", CommandKind::unit_trip}, {"unit_start", CommandKind::unit_start},
    {"setpoint", CommandKind::setpoint}, {"governor", CommandKind::governor},
    {"tie_trip", CommandKind::tie_trip}, {"tie_close", CommandKind::tie_close},
    {"agc", CommandKind::agc}, {"fluctuation", CommandKind::fluctuation}};

// Fields each command kind takes (besides "kind" and, for events, "at_s"), and which are required.
struct KindFields {
  std::set<std::string> allowed;
  std::set<std::string> required;
};

const KindFields& fields_of(CommandKind k) {
  static const std::vector<KindFields> table = [] {
    std::vector<KindFields> t(10);
    t[static_cast<int>(CommandKind::load_step)] = {{"area", "mw"}, {"area", "mw"}};
    t[static_cast<int>(CommandKind::load_ramp)] = {{"area", "mw", "over_s"}, {"area", "mw", "over_s"}};
    t[static_cast<int>(CommandKind::unit_trip)] = {{"unit"}, {"unit"}};
    t[static_cast<int>(CommandKind::unit_start)] = {{"unit", "mw"}, {"unit", "mw"}};
    t[static_cast<int>(CommandKind::setpoint)] = {{"unit", "mw", "ramp_mw_per_s"}, {"unit", "mw"}};
    t[static_cast<int>(CommandKind::governor)] = {
        {"unit", "droop", "deadband_hz", "deadband", "mode"}, {"unit"}};
    t[static_cast<int>(CommandKind::tie_trip)] = {{"tie"}, {"tie"}};
    t[static_cast<int>(CommandKind::tie_close)] = {{"tie"}, {"tie"}};
    t[static_cast<int>(CommandKind::agc)] = {{"area", "enabled"}, {"area", "enabled"}};
    t[static_cast<int>(CommandKind::fluctuation)] = {{"area", "sigma_mw", "tau_s"},
                                                     {"area", "sigma_mw"}};
    return t;
  }();
  return table[static_cast<int>(k)];
}

std::optional<Command> read_command(Reader& r, const ijson& j, const std::string& path,
                                    bool with_time, double* at_s) {
  if (!j.is_object()) {
    r.error(path, std::string("must be an object, got ") + type_name(j));
    return std::nullopt;
  }
  Command c;
  if (!r.choice(j, "kind", path, kCommandNames, c.kind, true)) return std::nullopt;
  const KindFields& kf = fields_of(c.kind);
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!kf.allowed.count(it.key()) && it.key() != "kind" && !(with_time && it.key() == "at_s"))
      r.error(join(path, it.key()),
              it.key() == "at_s" ? "not allowed in a live command (it applies now)"
                                 : "unknown field for " + std::string(to_string(c.kind)));
  if (with_time) r.number(j, "at_s", path, *at_s, true);
  auto req = [&](const char* f) { return kf.required.count(f) > 0; };
  if (kf.allowed.count("area")) r.string(j, "area", path, c.area, req("area"));
  if (kf.allowed.count("unit")) r.string(j, "unit", path, c.unit, req("unit"));
  if (kf.allowed.count("tie")) r.string(j, "tie", path, c.tie, req("tie"));
  if (kf.allowed.count("mw")) r.number(j, "mw", path, c.mw, req("mw"));
  if (kf.allowed.count("over_s")) r.number(j, "over_s", path, c.over_s, req("over_s"));
  if (kf.allowed.count("ramp_mw_per_s")) r.number(j, "ramp_mw_per_s", path, c.ramp_mw_per_s);
  if (kf.allowed.count("droop")) r.number(j, "droop", path, c.droop);
  if (kf.allowed.count("deadband_hz")) r.number(j, "deadband_hz", path, c.deadband_hz);
  if (kf.allowed.count("deadband")) {
    DeadbandKind k{};
    if (r.choice(j, "deadband", path, kDeadbandNames, k)) c.deadband = k;
  }
  if (kf.allowed.count("mode")) {
    GovernorMode m{};
    if (r.choice(j, "mode", path, kModeNames, m)) c.mode = m;
  }
  if (kf.allowed.count("enabled")) r.boolean(j, "enabled", path, c.enabled, req("enabled"));
  if (kf.allowed.count("sigma_mw")) r.number(j, "sigma_mw", path, c.sigma_mw, req("sigma_mw"));
  if (kf.allowed.count("tau_s")) r.number(j, "tau_s", path, c.tau_s);
  return c;
}

void read_governor(Reader& r, const ijson& j, const std::string& p, GovernorDef& g) {
  if (!r.object(j, p, {"mode", "droop", "deadband_hz", "deadband", "lag_s", "integral_s"})) return;
  r.choice(j, "mode", p, kModeNames, g.mode);
  r.number(j, "droop", p, g.droop);
  r.number(j, "deadband_hz", p, g.deadband_hz);
  r.choice(j, "deadband", p, kDeadbandNames, g.deadband);
  r.number(j, "lag_s", p, g.lag_s);
  r.number(j, "integral_s", p, g.integral_s);
}

void read_turbine(Reader& r, const ijson& j, const std::string& p, TurbineDef& t) {
  if (!j.is_object()) {
    r.error(p, std::string("must be an object, got ") + type_name(j));
    return;
  }
  if (!r.choice(j, "type", p, kTurbineNames, t.type, true)) return;
  static const std::vector<std::vector<std::string_view>> kAllowed = {
      {"type", "steam_chest_s"},
      {"type", "steam_chest_s", "reheat_s", "hp_fraction"},
      {"type", "water_s", "temporary_droop", "reset_s"},
      {"type", "fuel_s", "combustion_s", "load_limit_mw"},
      {"type", "response_s", "synthetic_inertia_s", "rocof_filter_s", "energy_mwh", "soc"}};
  const auto& allowed = kAllowed[static_cast<std::size_t>(t.type)];
  for (auto it = j.begin(); it != j.end(); ++it)
    if (std::find(allowed.begin(), allowed.end(), it.key()) == allowed.end())
      r.error(join(p, it.key()), "unknown field for a " + std::string(to_string(t.type)) + " turbine");
  r.number(j, "steam_chest_s", p, t.steam_chest_s);
  r.number(j, "reheat_s", p, t.reheat_s);
  r.number(j, "hp_fraction", p, t.hp_fraction);
  r.number(j, "water_s", p, t.water_s);
  r.number(j, "temporary_droop", p, t.temporary_droop);
  r.number(j, "reset_s", p, t.reset_s);
  r.number(j, "fuel_s", p, t.fuel_s);
  r.number(j, "combustion_s", p, t.combustion_s);
  r.number(j, "load_limit_mw", p, t.load_limit_mw);
  r.number(j, "response_s", p, t.response_s);
  r.number(j, "synthetic_inertia_s", p, t.synthetic_inertia_s);
  r.number(j, "rocof_filter_s", p, t.rocof_filter_s);
  r.number(j, "energy_mwh", p, t.energy_mwh);
  r.number(j, "soc", p, t.soc);
}

template <class F>
void each(Reader& r, const ijson& obj, const std::string& key, const std::string& path, bool required,
          F&& f) {
  if (const ijson* arr = r.array(obj, key, path, required))
    for (std::size_t i = 0; i < arr->size(); ++i) f((*arr)[i], join(path, key) + "[" + std::to_string(i) + "]");
}

SystemDef read_system(Reader& r, const ijson& j) {
  SystemDef d;
  if (!r.object(j, "", {"name", "nominal_hz", "step_s", "duration_s", "output_every_s", "seed",
                        "areas", "ties", "units", "events", "description"}))
    return d;
  r.string(j, "name", "", d.name);
  r.number(j, "nominal_hz", "", d.nominal_hz);
  r.number(j, "step_s", "", d.step_s);
  r.number(j, "duration_s", "", d.duration_s, true);
  r.number(j, "output_every_s", "", d.output_every_s);
  if (const ijson* seed = r.field(j, "seed", "", false)) {
    if (seed->is_number_unsigned() || (seed->is_number_integer() && seed->get<std::int64_t>() >= 0))
      d.seed = seed->get<std::uint64_t>();
    else
      r.error("seed", std::string("must be a whole number >= 0, got ") +
                          (seed->is_number() ? fmt_num(seed->get<double>()) : type_name(*seed)));
  }
  if (const ijson* desc = r.field(j, "description", "", false); desc && !desc->is_string())
    r.error("description", std::string("must be a string, got ") + type_name(*desc));

  each(r, j, "areas", "", true, [&](const ijson& a, const std::string& p) {
    AreaDef ad;
    if (r.object(a, p, {"id", "demand_mw", "load_damping", "agc", "shedding"})) {
      r.string(a, "id", p, ad.id, true);
      r.number(a, "demand_mw", p, ad.demand_mw, true);
      r.number(a, "load_damping", p, ad.load_damping);
      if (const ijson* agc = r.field(a, "agc", p, false)) {
        const std::string ap = join(p, "agc");
        if (r.object(*agc, ap, {"enabled", "bias_mw_per_hz", "kp", "ki_per_s", "period_s"})) {
          r.boolean(*agc, "enabled", ap, ad.agc.enabled);
          r.number(*agc, "bias_mw_per_hz", ap, ad.agc.bias_mw_per_hz);
          r.number(*agc, "kp", ap, ad.agc.kp);
          r.number(*agc, "ki_per_s", ap, ad.agc.ki_per_s);
          r.number(*agc, "period_s", ap, ad.agc.period_s);
        }
      }
      each(r, a, "shedding", p, false, [&](const ijson& s, const std::string& sp) {
        SheddingStageDef st;
        if (r.object(s, sp, {"below_hz", "delay_s", "shed_pct"})) {
          r.number(s, "below_hz", sp, st.below_hz, true);
          r.number(s, "delay_s", sp, st.delay_s, true);
          r.number(s, "shed_pct", sp, st.shed_pct, true);
        }
        ad.shedding.push_back(st);
      });
    }
    d.areas.push_back(std::move(ad));
  });

  each(r, j, "ties", "", false, [&](const ijson& t, const std::string& p) {
    TieDef td;
    if (r.object(t, p, {"id", "from", "to", "pmax_mw", "damping_mw_per_hz", "trip_angle_deg",
                        "in_service"})) {
      r.string(t, "id", p, td.id, true);
      r.string(t, "from", p, td.from, true);
      r.string(t, "to", p, td.to, true);
      r.number(t, "pmax_mw", p, td.pmax_mw, true);
      r.number(t, "damping_mw_per_hz", p, td.damping_mw_per_hz);
      r.number(t, "trip_angle_deg", p, td.trip_angle_deg);
      r.boolean(t, "in_service", p, td.in_service);
    }
    d.ties.push_back(std::move(td));
  });

  each(r, j, "units", "", true, [&](const ijson& u, const std::string& p) {
    UnitDef ud;
    if (r.object(u, p, {"id", "area", "rating_mw", "inertia_s", "setpoint_mw", "min_mw", "max_mw",
                        "ramp_mw_per_s", "agc_share", "online", "governor", "turbine"})) {
      r.string(u, "id", p, ud.id, true);
      r.string(u, "area", p, ud.area, true);
      r.number(u, "rating_mw", p, ud.rating_mw, true);
      r.number(u, "setpoint_mw", p, ud.setpoint_mw, true);
      r.number(u, "min_mw", p, ud.min_mw);
      r.number(u, "max_mw", p, ud.max_mw);
      r.number(u, "ramp_mw_per_s", p, ud.ramp_mw_per_s);
      r.number(u, "agc_share", p, ud.agc_share);
      r.boolean(u, "online", p, ud.online);
      if (const ijson* g = r.field(u, "governor", p, false)) read_governor(r, *g, join(p, "governor"), ud.governor);
      if (const ijson* t = r.field(u, "turbine", p, true)) read_turbine(r, *t, join(p, "turbine"), ud.turbine);
      const bool battery = ud.turbine.type == TurbineType::battery;
      if (!battery && !u.contains("inertia_s"))
        r.error(join(p, "inertia_s"), "required for a synchronous unit");
      r.number(u, "inertia_s", p, ud.inertia_s);
    }
    d.units.push_back(std::move(ud));
  });

  each(r, j, "events", "", false, [&](const ijson& e, const std::string& p) {
    EventDef ev;
    if (auto c = read_command(r, e, p, true, &ev.at_s)) {
      ev.command = *c;
      d.events.push_back(std::move(ev));
    }
  });
  return d;
}

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

// Appends a member whose key is known to be new (validated unique ids): operator[] on an ordered
// object searches its keys one by one, which costs O(n^2) over a 10,000-unit fleet.
void append_member(json& obj, const std::string& key, json value) {
  obj.get_ref<json::object_t&>().push_back({key, std::move(value)});
}

}  // namespace

LoadResult parse_scenario(std::string_view json_text) {
  LoadResult out;
  auto j = parse_untrusted_json(json_text, out.issues);
  if (!j) return out;
  Reader r(out.issues);
  SystemDef def = read_system(r, *j);
  if (!out.issues.empty()) return out;  // shape errors first: semantics would only echo them
  out.issues = validate(def);
  if (!has_errors(out.issues)) out.def = std::move(def);
  return out;
}

LoadResult load_scenario_file(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) {  // a folder would "open" and report a huge size
    LoadResult out;
    out.issues.push_back({"file", "\"" + path + "\" is not a readable file", false});
    return out;
  }
  std::ifstream in(path, std::ios::binary | std::ios::ate);
  std::string text;
  if (in) {
    text.resize(static_cast<std::size_t>(in.tellg()));
    in.seekg(0);
    in.read(text.data(), static_cast<std::streamsize>(text.size()));
  }
  if (!in) {
    LoadResult out;
    out.issues.push_back({"file", "cannot read \"" + path + "\"", false});
    return out;
  }
  return parse_scenario(text);
}

CommandParse parse_commands(std::string_view json_text) {
  CommandParse out;
  auto j = parse_untrusted_json(json_text, out.issues);
  if (!j) return out;
  Reader r(out.issues);
  if (j->is_array()) {
    if (j->empty()) out.issues.push_back({"commands", "must hold at least one command", false});
    for (std::size_t i = 0; i < j->size(); ++i)
      if (auto c = read_command(r, (*j)[i], "commands[" + std::to_string(i) + "]", false, nullptr))
        out.commands.push_back(*c);
  } else if (auto c = read_command(r, *j, "command", false, nullptr)) {
    out.commands.push_back(*c);
  }
  if (!out.issues.empty()) out.commands.clear();
  return out;
}

json command_to_json(const Command& c) {
  json j;
  j["kind"] = to_string(c.kind);
  const KindFields& kf = fields_of(c.kind);
  auto has = [&](const char* f) { return kf.allowed.count(f) > 0; };
  if (has("area")) j["area"] = c.area;
  if (has("unit")) j["unit"] = c.unit;
  if (has("tie")) j["tie"] = c.tie;
  if (has("mw")) j["mw"] = c.mw;
  if (has("over_s")) j["over_s"] = c.over_s;
  if (c.ramp_mw_per_s) j["ramp_mw_per_s"] = *c.ramp_mw_per_s;
  if (c.droop) j["droop"] = *c.droop;
  if (c.deadband_hz) j["deadband_hz"] = *c.deadband_hz;
  if (c.deadband) j["deadband"] = to_string(*c.deadband);
  if (c.mode) j["mode"] = to_string(*c.mode);
  if (has("enabled")) j["enabled"] = c.enabled;
  if (has("sigma_mw")) {
    j["sigma_mw"] = c.sigma_mw;
    j["tau_s"] = c.tau_s;
  }
  return j;
}

json scenario_to_json(const SystemDef& d) {
  json j;
  j["name"] = d.name;
  j["nominal_hz"] = d.nominal_hz;
  j["step_s"] = d.step_s;
  j["duration_s"] = d.duration_s;
  j["output_every_s"] = d.output_every_s;
  j["seed"] = d.seed;
  j["areas"] = json::array();
  for (std::size_t i = 0; i < d.areas.size(); ++i) {
    const AreaDef& a = d.areas[i];
    json ja{{"id", a.id}, {"demand_mw", a.demand_mw}, {"load_damping", a.load_damping}};
    json agc{{"enabled", a.agc.enabled}, {"kp", a.agc.kp}, {"ki_per_s", a.agc.ki_per_s},
             {"period_s", a.agc.period_s}};
    agc["bias_mw_per_hz"] =
        a.agc.bias_mw_per_hz ? *a.agc.bias_mw_per_hz : natural_response_mw_per_hz(d, i);
    ja["agc"] = agc;
    ja["shedding"] = json::array();
    for (const auto& s : a.shedding)
      ja["shedding"].push_back({{"below_hz", s.below_hz}, {"delay_s", s.delay_s}, {"shed_pct", s.shed_pct}});
    j["areas"].push_back(ja);
  }
  j["ties"] = json::array();
  for (const TieDef& t : d.ties) {
    json jt{{"id", t.id}, {"from", t.from}, {"to", t.to}, {"pmax_mw", t.pmax_mw},
            {"damping_mw_per_hz", t.damping_mw_per_hz}, {"in_service", t.in_service}};
    if (t.trip_angle_deg) jt["trip_angle_deg"] = *t.trip_angle_deg;
    j["ties"].push_back(jt);
  }
  j["units"] = json::array();
  for (const UnitDef& u : d.units) {
    json ju{{"id", u.id}, {"area", u.area}, {"rating_mw", u.rating_mw}, {"inertia_s", u.inertia_s},
            {"setpoint_mw", u.setpoint_mw}, {"min_mw", unit_min_mw(u)}, {"max_mw", unit_max_mw(u)},
            {"agc_share", u.agc_share}, {"online", u.online}};
    if (u.ramp_mw_per_s) ju["ramp_mw_per_s"] = *u.ramp_mw_per_s;
    const GovernorDef& g = u.governor;
    ju["governor"] = {{"mode", to_string(g.mode)}, {"droop", g.droop}, {"deadband_hz", g.deadband_hz},
                      {"deadband", to_string(g.deadband)}, {"lag_s", g.lag_s},
                      {"integral_s", g.integral_s}};
    const TurbineDef& t = u.turbine;
    json jt{{"type", to_string(t.type)}};
    switch (t.type) {
      case TurbineType::steam: jt["steam_chest_s"] = t.steam_chest_s; break;
      case TurbineType::reheat:
        jt["steam_chest_s"] = t.steam_chest_s;
        jt["reheat_s"] = t.reheat_s;
        jt["hp_fraction"] = t.hp_fraction;
        break;
      case TurbineType::hydro:
        jt["water_s"] = t.water_s;
        jt["temporary_droop"] = hydro_temporary_droop(u);
        jt["reset_s"] = hydro_reset_s(u);
        break;
      case TurbineType::gas:
        jt["fuel_s"] = t.fuel_s;
        jt["combustion_s"] = t.combustion_s;
        jt["load_limit_mw"] = t.load_limit_mw ? *t.load_limit_mw : u.rating_mw;
        break;
      case TurbineType::battery:
        jt["response_s"] = t.response_s;
        jt["synthetic_inertia_s"] = t.synthetic_inertia_s;
        jt["rocof_filter_s"] = t.rocof_filter_s;
        jt["energy_mwh"] = t.energy_mwh ? *t.energy_mwh : 0.0;
        jt["soc"] = t.soc;
        break;
    }
    ju["turbine"] = jt;
    j["units"].push_back(ju);
  }
  j["events"] = json::array();
  for (const EventDef& e : d.events) {
    json je = command_to_json(e.command);
    je["at_s"] = e.at_s;
    j["events"].push_back(je);
  }
  return j;
}

json disturbance_to_json(const Engine& engine, const Disturbance& d) {
  const SystemDef& def = engine.def();
  json j;
  j["kind"] = to_string(d.kind);
  j["cause"] = d.cause;
  j["at_s"] = d.at_s;
  j["island"] = json::array();
  for (auto a : d.areas) j["island"].push_back(def.areas[a].id);
  j["delta_mw"] = d.delta_mw;
  j["pre_hz"] = d.pre_hz;
  j["rocof_hz_per_s"] = opt(d.rocof_hz_per_s);
  j["extreme"] = d.zenith ? "zenith" : "nadir";
  j["nadir_hz"] = opt(d.nadir_hz);
  j["nadir_at_s"] = opt(d.nadir_at_s);
  j["nadir_after_s"] = d.nadir_at_s ? json(*d.nadir_at_s - d.at_s) : json(nullptr);
  j["settling_hz"] = opt(d.settling_hz);
  j["predicted_settling_hz"] = d.predicted_settling_hz;
  j["response_mw_per_0p1hz"] = opt(d.response_mw_per_0p1hz);
  j["open"] = d.open;
  j["units"] = json::array();
  for (const UnitResponse& u : d.units)
    j["units"].push_back({{"unit", def.units[u.unit].id},
                          {"p_at_start_mw", u.p_at_start_mw},
                          {"response_10s_mw", opt(u.response_10s_mw)},
                          {"response_30s_mw", opt(u.response_30s_mw)},
                          {"predicted_mw", u.predicted_mw}});
  return j;
}

json summary_to_json(const Engine& engine, const std::vector<Notice>& notices,
                     const std::vector<Issue>& warnings) {
  const SystemDef& def = engine.def();
  json j;
  j["scenario"] = def.name;
  j["nominal_hz"] = def.nominal_hz;
  j["step_s"] = def.step_s;
  j["t_s"] = engine.time_s();
  j["disturbances"] = json::array();
  for (const Disturbance& d : engine.disturbances()) j["disturbances"].push_back(disturbance_to_json(engine, d));
  json fin;
  fin["t_s"] = engine.time_s();
  fin["areas"] = json::object();
  for (std::size_t a = 0; a < def.areas.size(); ++a) {
    const AreaState s = engine.area(AreaId{static_cast<std::uint32_t>(a)});
    append_member(fin["areas"], def.areas[a].id, {{"f_hz", s.f_hz},           {"demand_mw", s.demand_mw},
                                     {"generation_mw", s.generation_mw},
                                     {"export_mw", s.export_mw},   {"ace_mw", s.ace_mw},
                                     {"shed_mw", s.shed_mw},       {"collapsed", s.collapsed}});
  }
  fin["units"] = json::object();
  for (std::size_t u = 0; u < def.units.size(); ++u) {
    const UnitState s = engine.unit(UnitId{static_cast<std::uint32_t>(u)});
    json ju{{"p_mw", s.p_mw}, {"setpoint_mw", s.setpoint_mw}, {"agc_mw", s.agc_mw},
            {"status", to_string(s.status)}};
    if (def.units[u].turbine.type == TurbineType::battery) ju["energy_mwh"] = s.energy_mwh;
    append_member(fin["units"], def.units[u].id, std::move(ju));
  }
  fin["ties"] = json::object();
  for (std::size_t t = 0; t < def.ties.size(); ++t) {
    const TieState s = engine.tie(TieId{static_cast<std::uint32_t>(t)});
    append_member(fin["ties"], def.ties[t].id,
                  {{"flow_mw", s.flow_mw}, {"angle_deg", s.angle_deg}, {"in_service", s.in_service}});
  }
  j["final"] = fin;
  j["notices"] = json::array();
  for (const Notice& n : notices) j["notices"].push_back({{"t_s", n.t_s}, {"kind", n.kind}, {"text", n.text}});
  j["warnings"] = json::array();
  for (const Issue& w : warnings) j["warnings"].push_back(w.text());
  return j;
}

namespace {

bool is_flat(const json& j) {
  if (!j.is_structured()) return true;
  for (const auto& v : j) if (v.is_structured()) return false;
  return true;
}

void write_text(const json& j, int indent, std::string& out) {
  if (is_flat(j)) {
    out += j.dump(-1, ' ', false, json::error_handler_t::replace);
    return;
  }
  const std::string pad(static_cast<std::size_t>(indent + 2), ' ');
  const bool obj = j.is_object();
  out += obj ? "{\n" : "[\n";
  bool first = true;
  for (auto it = j.begin(); it != j.end(); ++it) {
    if (!first) out += ",\n";
    first = false;
    out += pad;
    if (obj) {
      out += json(it.key()).dump();
      out += ": ";
    }
    write_text(*it, indent + 2, out);
  }
  out += '\n';
  out.append(static_cast<std::size_t>(indent), ' ');
  out += obj ? '}' : ']';
}

}  // namespace

std::string to_text(const json& doc) {
  std::string out;
  write_text(doc, 0, out);
  out += '\n';
  return out;
}

std::string SeriesCsv::header(const Engine& engine) {
  std::string out;
  const auto cols = engine.series_columns();
  for (std::size_t i = 0; i < cols.size(); ++i) {
    if (i) out += ',';
    out += cols[i];
  }
  out += '\n';
  return out;
}

void SeriesCsv::append_row(const Engine& engine, std::string& out) {
  row_.resize(engine.series_width());
  engine.sample(row_);
  for (std::size_t i = 0; i < row_.size(); ++i) {
    if (i) out += ',';
    append_exact(out, row_[i]);
  }
  out += '\n';
}

}  // namespace droopline
