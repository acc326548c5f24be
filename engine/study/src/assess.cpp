#include "droopline/assess.hpp"

#include <algorithm>
#include <cmath>
#include <map>

#include "droopline/batch.hpp"
#include "droopline/engine.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {
namespace {

using json = nlohmann::ordered_json;

struct LimitKind {
  const char* key;
  const char* label;
  const char* relation;
  const char* unit;
};
constexpr LimitKind kLimits[] = {
    {"lowest_hz_min", "lowest frequency", ">=", "Hz"},
    {"highest_hz_max", "highest frequency", "<=", "Hz"},
    {"settling_deviation_hz_max", "largest settling deviation |settling - nominal|", "<=", "Hz"},
    {"rocof_hz_per_s_max", "largest RoCoF |df/dt| over 500 ms", "<=", "Hz/s"},
};

}  // namespace

std::optional<Requirements> parse_requirements(std::string_view text, std::vector<Issue>& issues) {
  const auto parsed = parse_untrusted_json(text, issues);
  if (!parsed) return std::nullopt;
  const json& j = *parsed;
  if (!j.is_object()) {
    issues.push_back({"", "must be a JSON object with name, limits and unit_response", false});
    return std::nullopt;
  }
  Requirements r;
  auto err = [&](const std::string& path, const std::string& msg) { issues.push_back({path, msg, false}); };
  for (auto it = j.begin(); it != j.end(); ++it)
    if (it.key() != "name" && it.key() != "note" && it.key() != "limits" && it.key() != "unit_response")
      err(it.key(), "unknown field (expected name, note, limits, unit_response)");
  r.name = "requirements";
  if (j.contains("name")) {
    if (j["name"].is_string()) r.name = j["name"].get<std::string>();
    else err("name", "must be a string");
  }
  if (j.contains("note") && !j["note"].is_string()) err("note", "must be a string");
  auto number = [&](const json& o, const std::string& key, const std::string& path, double& out, double lo, double hi) {
    if (!o.contains(key)) return err(path + "." + key, "required");
    if (!o[key].is_number()) return err(path + "." + key, "must be a number");
    out = o[key].get<double>();
    if (!(out >= lo && out <= hi)) err(path + "." + key, "must lie within [" + fmt_num(lo) + ", " + fmt_num(hi) + "], got " + fmt_num(out));
  };
  auto source = [&](const json& o, const std::string& path, std::string& out) {
    if (!o.contains("source") || !o["source"].is_string() || o["source"].get<std::string>().empty())
      return err(path + ".source", "required: say where the figure comes from");
    out = o["source"].get<std::string>();
  };
  if (j.contains("limits")) {
    if (!j["limits"].is_object()) {
      err("limits", "must be an object");
    } else {
      for (auto it = j["limits"].begin(); it != j["limits"].end(); ++it) {
        const std::string path = "limits." + it.key();
        if (std::none_of(std::begin(kLimits), std::end(kLimits), [&](const LimitKind& k) { return it.key() == k.key; })) {
          err(path, "unknown limit (expected lowest_hz_min, highest_hz_max, settling_deviation_hz_max, rocof_hz_per_s_max)");
          continue;
        }
        if (!it.value().is_object()) {
          err(path, "must be an object {\"value\": ..., \"source\": ...}");
          continue;
        }
        Limit l;
        l.key = it.key();
        number(it.value(), "value", path, l.value, 0.0, 1000.0);
        source(it.value(), path, l.source);
        r.limits.push_back(l);
      }
    }
  }
  if (j.contains("unit_response")) {
    if (!j["unit_response"].is_array()) {
      err("unit_response", "must be a list");
    } else {
      for (std::size_t i = 0; i < j["unit_response"].size(); ++i) {
        const json& o = j["unit_response"][i];
        const std::string path = "unit_response[" + std::to_string(i) + "]";
        if (!o.is_object()) {
          err(path, "must be an object");
          continue;
        }
        ResponseRequirement q;
        if (o.contains("units")) {
          if (!o["units"].is_array()) err(path + ".units", "must be a list of unit ids");
          else
            for (const auto& u : o["units"])
              if (u.is_string()) q.units.push_back(u.get<std::string>());
              else err(path + ".units", "must be a list of unit ids");
        }
        double mhz = 0;
        number(o, "deviation_mhz", path, mhz, 1.0, 5000.0);
        q.deviation_hz = mhz / 1000.0;
        number(o, "within_s", path, q.within_s, 0.1, 3600.0);
        number(o, "share_min", path, q.share_min, 0.0, 2.0);
        source(o, path, q.source);
        r.responses.push_back(q);
      }
    }
  }
  // Not said when a limit or response given wrongly has its own message above.
  if (r.limits.empty() && r.responses.empty() && issues.empty())
    err("", "no limits and no unit_response: nothing to check");
  if (!issues.empty()) return std::nullopt;
  return r;
}

namespace {

// Every step's area frequencies and unit outputs of one run: responses are judged at exact times.
struct Trace {
  std::vector<double> t, f, p;  // p: output less the dispatch setpoint (MW)
  std::vector<double> raw;      // output (MW)
  std::vector<char> online;     // synchronised
  std::vector<Disturbance> disturbances;
  double lowest = INFINITY, highest = -INFINITY;
};

std::optional<Trace> simulate(const SystemDef& def) {
  const CheckResult checked = check(def);
  if (!checked.system) return std::nullopt;
  const std::unique_ptr<Engine> engine = Engine::create(*checked.system);
  Engine& e = *engine;
  Trace tr;
  BatchObservers obs;
  obs.row = [&](const Engine& at) {
    tr.t.push_back(at.time_s());
    for (std::uint32_t a = 0; a < def.areas.size(); ++a) {
      const double f = at.area(AreaId{a}).f_hz;
      tr.f.push_back(f);
      tr.lowest = std::min(tr.lowest, f);
      tr.highest = std::max(tr.highest, f);
    }
    for (std::uint32_t u = 0; u < def.units.size(); ++u) {
      const UnitState s = at.unit(UnitId{u});
      tr.p.push_back(s.p_mw - s.setpoint_mw);
      tr.raw.push_back(s.p_mw);
      tr.online.push_back(is_synchronised(s.status));
    }
  };
  BatchOptions every_step;
  every_step.every = 1;  // the checks look at every step, not only at output rows
  run_batch(e, every_step, obs);
  tr.disturbances = e.disturbances();
  return tr;
}

}  // namespace

Assessment assess(const SystemDef& def, const Requirements& req) {
  Assessment out;
  const auto run = simulate(def);
  if (!run) return out;
  const std::size_t na = def.areas.size(), nu = def.units.size();
  const double lowest = run->lowest, highest = run->highest;
  const auto& ds = run->disturbances;
  double settle_dev = -1, rocof = -1;
  std::string settle_at, rocof_at;
  for (const Disturbance& d : ds) {
    if (d.settling_hz && std::abs(*d.settling_hz - def.nominal_hz) > settle_dev) {
      settle_dev = std::abs(*d.settling_hz - def.nominal_hz);
      settle_at = describe_cause(def, d) + " at " + fmt_num(d.at_s) + " s";
    }
    if (d.rocof_hz_per_s && std::abs(*d.rocof_hz_per_s) > rocof) {
      rocof = std::abs(*d.rocof_hz_per_s);
      rocof_at = describe_cause(def, d) + " at " + fmt_num(d.at_s) + " s";
    }
  }
  for (const Limit& l : req.limits) {
    const LimitKind& k = *std::find_if(std::begin(kLimits), std::end(kLimits), [&](const LimitKind& x) { return l.key == x.key; });
    CheckRow row{k.label, k.relation, l.value, std::nullopt, 0.0, "not tested", k.unit, "", l.source};
    if (l.key == "lowest_hz_min") row.measured = lowest;
    if (l.key == "highest_hz_max") row.measured = highest;
    if (l.key == "settling_deviation_hz_max" && settle_dev >= 0) {
      row.measured = settle_dev;
      row.detail = settle_at;
    }
    if (l.key == "rocof_hz_per_s_max" && rocof >= 0) {
      row.measured = rocof;
      row.detail = rocof_at;
    }
    out.rows.push_back(row);
  }
  // Unit responses are judged on a second run with secondary control off (the same events), so
  // that only the governors' own response is counted.
  std::optional<Trace> primary;
  if (!req.responses.empty()) {
    SystemDef d2 = def;
    for (AreaDef& a : d2.areas) a.agc.enabled = false;
    std::erase_if(d2.events, [](const EventDef& ev) { return ev.command.kind == CommandKind::agc; });
    primary = simulate(d2);
  }
  for (const ResponseRequirement& q : req.responses) {
    if (!primary) break;
    const auto& t = primary->t;
    const auto& f = primary->f;
    const auto& p = primary->p;
    const auto& raw = primary->raw;
    const auto& online = primary->online;
    const auto& pds = primary->disturbances;
    for (std::uint32_t u = 0; u < nu; ++u) {
      const UnitDef& ud = def.units[u];
      const bool named = std::find(q.units.begin(), q.units.end(), ud.id) != q.units.end();
      if (q.units.empty() ? ud.governor.mode != GovernorMode::droop : !named) continue;
      CheckRow row{ud.id + " response " + fmt_num(q.within_s) + " s after " + fmt_num(q.deviation_hz * 1000) + " mHz",
                   ">=", q.share_min, std::nullopt, 0.0, "not tested", "share", "", q.source};
      const std::size_t a = static_cast<std::size_t>(
          std::find_if(def.areas.begin(), def.areas.end(), [&](const AreaDef& x) { return x.id == ud.area; }) - def.areas.begin());
      for (std::size_t di = 0; di < pds.size(); ++di) {
        const Disturbance& d = pds[di];
        if (std::find(d.areas.begin(), d.areas.end(), a) == d.areas.end()) continue;
        const double end = di + 1 < pds.size() ? pds[di + 1].at_s : t.back();
        // First step at which the deviation reached the requirement's.
        std::size_t i0 = static_cast<std::size_t>(std::lower_bound(t.begin(), t.end(), d.at_s - 1e-9) - t.begin());
        std::size_t ix = i0;
        while (ix < t.size() && t[ix] < end && std::abs(f[ix * na + a] - d.pre_hz) < q.deviation_hz) ++ix;
        if (ix >= t.size() || t[ix] >= end) continue;
        const std::size_t ie = static_cast<std::size_t>(std::lower_bound(t.begin(), t.end(), t[ix] + q.within_s - 1e-9) - t.begin());
        if (ie >= t.size() || t[ie] > end + 1e-9) continue;  // the window ran past this disturbance
        if (!online[i0 * nu + u] || !online[(i0 + 1) * nu + u] || !online[ie * nu + u]) continue;  // tripped
        const double dev = f[ie * na + a] - d.pre_hz;
        double asked = ud.rating_mw / (ud.governor.droop * def.nominal_hz) *
                       std::max(0.0, std::abs(dev) - (ud.governor.deadband == DeadbandKind::offset ? ud.governor.deadband_hz : 0.0));
        const double p0 = p[i0 * nu + u];
        const double base = raw[i0 * nu + u];  // output when the disturbance began: the headroom from there
        const double room = dev < 0 ? ud.max_mw.value_or(ud.rating_mw) - base : base - ud.min_mw.value_or(0.0);
        asked = std::min(asked, std::max(0.0, room));
        if (asked < 1e-6) continue;
        const double delivered = (p[ie * nu + u] - p0) * (dev < 0 ? 1.0 : -1.0);
        const double share = delivered / asked;
        if (!row.measured || share < *row.measured) {
          row.measured = share;
          row.detail = describe_cause(def, d) + ": " + fmt_fixed(delivered, 1) + " of " + fmt_fixed(asked, 1) + " MW at t = " + fmt_num(t[ie]) + " s";
        }
      }
      out.rows.push_back(row);
    }
  }
  for (CheckRow& r : out.rows) {
    if (!r.measured) {
      ++out.untested;
      continue;
    }
    r.margin = r.relation == ">=" ? *r.measured - r.limit : r.limit - *r.measured;
    r.result = r.margin >= 0 ? "pass" : "fail";
    if (r.result == "fail") ++out.failed;
  }
  out.passed = out.failed == 0 && out.untested == 0;
  return out;
}

std::vector<Issue> requirement_issues(const SystemDef& def, const Requirements& req) {
  std::vector<Issue> issues;
  for (std::size_t i = 0; i < req.responses.size(); ++i)
    for (std::size_t k = 0; k < req.responses[i].units.size(); ++k) {
      const std::string& id = req.responses[i].units[k];
      if (std::none_of(def.units.begin(), def.units.end(), [&](const UnitDef& u) { return u.id == id; }))
        issues.push_back({"unit_response[" + std::to_string(i) + "].units[" + std::to_string(k) + "]",
                          "no unit \"" + id + "\" in the scenario (unit ids are case-sensitive)", false});
    }
  return issues;
}

std::string verdict_text(const Assessment& a) {
  if (a.failed > 0) return "requirements NOT met: " + std::to_string(a.failed) + " failed";
  if (a.untested > 0)
    return "not shown met: " + std::to_string(a.untested) + " of " + std::to_string(a.rows.size()) +
           " not tested (the run never reached their case)";
  return "all requirements met";
}

json assessment_to_json(const Assessment& a, const Requirements& req) {
  json j{{"requirements", req.name}, {"passed", a.passed},   {"failed", a.failed},
         {"untested", a.untested},   {"verdict", verdict_text(a)}, {"checks", json::array()}};
  for (const CheckRow& r : a.rows) {
    json c{{"requirement", r.requirement}, {"relation", r.relation}, {"limit", r.limit}, {"unit", r.unit},
           {"measured", r.measured ? json(*r.measured) : json(nullptr)}, {"margin", r.measured ? json(r.margin) : json(nullptr)},
           {"result", r.result}, {"detail", r.detail}, {"source", r.source}};
    j["checks"].push_back(std::move(c));
  }
  return j;
}

}  // namespace droopline::study
