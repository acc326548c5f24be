// Writing: the scenario in the file format, disturbance records and the run summary, the JSON
// text layout, and series CSV rows.
#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"
#include "json_fields.hpp"

namespace droopline {
namespace {

using detail::json;

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

// Appends a member whose key is known to be new (validated unique ids): operator[] on an ordered
// object searches its keys one by one, which costs O(n^2) over a 10,000-unit fleet.
void append_member(json& obj, const std::string& key, json value) {
  obj.get_ref<json::object_t&>().push_back({key, std::move(value)});
}

// An object of the given members in order, built without the initializer-list constructor,
// which wraps every member and checks the whole list's shape first (a tenth of a 10,000-unit
// run went into the summary's per-unit objects).
json members(std::initializer_list<std::pair<const char*, json>> list) {
  json j(json::value_t::object);
  auto& o = j.get_ref<json::object_t&>();
  o.reserve(list.size());
  for (const auto& [key, value] : list) o.emplace_back(key, value);
  return j;
}

}  // namespace

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
    json agc{{"enabled", a.agc.enabled},
             {"kp", a.agc.kp},
             {"ki_per_s", a.agc.ki_per_s},
             {"period_s", a.agc.period_s},
             {"mode", to_string(a.agc.mode)}};
    agc["bias_mw_per_hz"] = a.agc.bias_mw_per_hz ? *a.agc.bias_mw_per_hz : natural_response_mw_per_hz(d, i);
    ja["agc"] = agc;
    ja["shedding"] = json::array();
    for (const auto& s : a.shedding)
      ja["shedding"].push_back({{"below_hz", s.below_hz}, {"delay_s", s.delay_s}, {"shed_pct", s.shed_pct}});
    j["areas"].push_back(ja);
  }
  j["ties"] = json::array();
  for (const TieDef& t : d.ties) {
    json jt{{"id", t.id},
            {"from", t.from},
            {"to", t.to},
            {"pmax_mw", t.pmax_mw},
            {"damping_mw_per_hz", t.damping_mw_per_hz},
            {"in_service", t.in_service}};
    if (t.trip_angle_deg) jt["trip_angle_deg"] = *t.trip_angle_deg;
    j["ties"].push_back(jt);
  }
  j["units"] = json::array();
  for (const UnitDef& u : d.units) {
    json ju{{"id", u.id},
            {"area", u.area},
            {"rating_mw", u.rating_mw},
            {"inertia_s", u.inertia_s},
            {"setpoint_mw", u.setpoint_mw},
            {"min_mw", unit_min_mw(u)},
            {"max_mw", unit_max_mw(u)},
            {"agc_share", u.agc_share},
            {"online", u.online},
            {"start_up_s", u.start_up_s}};
    if (u.ramp_mw_per_s) ju["ramp_mw_per_s"] = *u.ramp_mw_per_s;
    const GovernorDef& g = u.governor;
    ju["governor"] = {{"mode", to_string(g.mode)},         {"droop", g.droop}, {"deadband_hz", g.deadband_hz},
                      {"deadband", to_string(g.deadband)}, {"lag_s", g.lag_s}, {"integral_s", g.integral_s}};
    const TurbineDef& t = u.turbine;
    json jt{{"type", to_string(t.type)}};
    switch (t.type) {
      case TurbineType::steam:
        jt["steam_chest_s"] = t.steam_chest_s;
        break;
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
  j["cause"] = describe_cause(def, d);
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
    j["units"].push_back(members({{"unit", def.units[u.unit].id},
                                  {"p_at_start_mw", u.p_at_start_mw},
                                  {"response_10s_mw", opt(u.response_10s_mw)},
                                  {"response_30s_mw", opt(u.response_30s_mw)},
                                  {"predicted_mw", u.predicted_mw}}));
  return j;
}

json summary_to_json(const Engine& engine, const std::vector<Notice>& notices, const std::vector<Issue>& warnings) {
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
    append_member(fin["areas"], def.areas[a].id,
                  {{"f_hz", s.f_hz},
                   {"demand_mw", s.demand_mw},
                   {"generation_mw", s.generation_mw},
                   {"export_mw", s.export_mw},
                   {"ace_mw", s.ace_mw},
                   {"shed_mw", s.shed_mw},
                   {"collapsed", s.collapsed}});
  }
  fin["units"] = json::object();
  for (std::size_t u = 0; u < def.units.size(); ++u) {
    const UnitState s = engine.unit(UnitId{static_cast<std::uint32_t>(u)});
    json ju = members({{"p_mw", s.p_mw}, {"setpoint_mw", s.setpoint_mw}, {"agc_mw", s.agc_mw}, {"status", to_string(s.status)}});
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
  for (const Notice& n : notices) j["notices"].push_back({{"t_s", n.t_s}, {"kind", to_string(n.kind)}, {"text", describe(def, n)}});
  j["warnings"] = json::array();
  for (const Issue& w : warnings) j["warnings"].push_back(w.text());
  return j;
}

namespace {

bool is_flat(const json& j) {
  if (!j.is_structured()) return true;
  for (const auto& v : j)
    if (v.is_structured()) return false;
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
