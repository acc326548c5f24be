// Commands: the fields of each kind, reading one from JSON (scenario events and live commands),
// and writing one back.
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"
#include "json_fields.hpp"

namespace droopline {
namespace detail {

const KindFields& fields_of(CommandKind k) {
  static const std::vector<KindFields> table = [] {
    std::vector<KindFields> t(static_cast<std::size_t>(CommandKind::restore) + 1);
    t[static_cast<int>(CommandKind::load_step)] = {{"area", "mw"}, {"area", "mw"}};
    t[static_cast<int>(CommandKind::load_ramp)] = {{"area", "mw", "over_s"}, {"area", "mw", "over_s"}};
    t[static_cast<int>(CommandKind::unit_trip)] = {{"unit"}, {"unit"}};
    t[static_cast<int>(CommandKind::unit_start)] = {{"unit", "mw"}, {"unit", "mw"}};
    t[static_cast<int>(CommandKind::setpoint)] = {{"unit", "mw", "ramp_mw_per_s"}, {"unit", "mw"}};
    t[static_cast<int>(CommandKind::governor)] = {{"unit", "droop", "deadband_hz", "deadband", "mode"}, {"unit"}};
    t[static_cast<int>(CommandKind::tie_trip)] = {{"tie"}, {"tie"}};
    t[static_cast<int>(CommandKind::tie_close)] = {{"tie"}, {"tie"}};
    t[static_cast<int>(CommandKind::agc)] = {{"area", "enabled", "mode"}, {"area", "enabled"}};
    t[static_cast<int>(CommandKind::fluctuation)] = {{"area", "sigma_mw", "tau_s"}, {"area", "sigma_mw"}};
    t[static_cast<int>(CommandKind::unit_stop)] = {{"unit", "ramp_mw_per_s"}, {"unit"}};
    t[static_cast<int>(CommandKind::schedule)] = {{"area", "mw", "over_s"}, {"area", "mw"}};
    t[static_cast<int>(CommandKind::shed)] = {{"area", "mw"}, {"area", "mw"}};
    t[static_cast<int>(CommandKind::restore)] = {{"area", "mw"}, {"area"}};
    return t;
  }();
  return table[static_cast<int>(k)];
}

std::optional<Command> read_command(Reader& r, const ijson& j, const std::string& path, bool with_time, double* at_s) {
  if (!j.is_object()) {
    r.error(path, std::string("must be an object, got ") + type_name(j));
    return std::nullopt;
  }
  Command c;
  if (!r.choice(j, "kind", path, kCommandNames, c.kind, true)) return std::nullopt;
  const KindFields& kf = fields_of(c.kind);
  for (auto it = j.begin(); it != j.end(); ++it)
    if (!kf.allowed.count(it.key()) && it.key() != "kind" && !(with_time && it.key() == "at_s"))
      r.error(join(path, it.key()), it.key() == "at_s" ? "not allowed in a live command (it applies now)"
                                                       : "unknown field for " + std::string(to_string(c.kind)));
  if (with_time) r.number(j, "at_s", path, *at_s, true);
  auto req = [&](const char* f) { return kf.required.count(f) > 0; };
  if (kf.allowed.count("area")) r.string(j, "area", path, c.area, req("area"));
  if (kf.allowed.count("unit")) r.string(j, "unit", path, c.unit, req("unit"));
  if (kf.allowed.count("tie")) r.string(j, "tie", path, c.tie, req("tie"));
  if (kf.allowed.count("mw")) r.number(j, "mw", path, c.mw, req("mw"));
  c.all_shed = c.kind == CommandKind::restore && !j.contains("mw");
  if (kf.allowed.count("over_s")) r.number(j, "over_s", path, c.over_s, req("over_s"));
  if (kf.allowed.count("ramp_mw_per_s")) r.number(j, "ramp_mw_per_s", path, c.ramp_mw_per_s);
  if (kf.allowed.count("droop")) r.number(j, "droop", path, c.droop);
  if (kf.allowed.count("deadband_hz")) r.number(j, "deadband_hz", path, c.deadband_hz);
  if (kf.allowed.count("deadband")) {
    DeadbandKind k{};
    if (r.choice(j, "deadband", path, kDeadbandNames, k)) c.deadband = k;
  }
  if (kf.allowed.count("mode") && c.kind == CommandKind::agc) {
    AgcMode m{};
    if (r.choice(j, "mode", path, kAgcModeNames, m)) c.agc_mode = m;
  } else if (kf.allowed.count("mode")) {
    GovernorMode m{};
    if (r.choice(j, "mode", path, kModeNames, m)) c.mode = m;
  }
  if (kf.allowed.count("enabled")) r.boolean(j, "enabled", path, c.enabled, req("enabled"));
  if (kf.allowed.count("sigma_mw")) r.number(j, "sigma_mw", path, c.sigma_mw, req("sigma_mw"));
  if (kf.allowed.count("tau_s")) r.number(j, "tau_s", path, c.tau_s);
  return c;
}

}  // namespace detail

using namespace detail;  // the JSON reader (json_fields.hpp)

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
  if (has("mw") && !c.all_shed) j["mw"] = c.mw;
  if (has("over_s")) j["over_s"] = c.over_s;
  if (c.ramp_mw_per_s) j["ramp_mw_per_s"] = *c.ramp_mw_per_s;
  if (c.droop) j["droop"] = *c.droop;
  if (c.deadband_hz) j["deadband_hz"] = *c.deadband_hz;
  if (c.deadband) j["deadband"] = to_string(*c.deadband);
  if (c.mode) j["mode"] = to_string(*c.mode);
  if (has("enabled")) j["enabled"] = c.enabled;
  if (c.agc_mode) j["mode"] = to_string(*c.agc_mode);
  if (has("sigma_mw")) {
    j["sigma_mw"] = c.sigma_mw;
    j["tau_s"] = c.tau_s;
  }
  return j;
}

}  // namespace droopline
