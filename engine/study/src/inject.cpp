// Frequency-injection tests on a unit model, played back through the engine's own kernels.
#include "droopline/inject.hpp"

#include <algorithm>
#include <cmath>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/playback.hpp"
#include "droopline/plot_svg.hpp"
#include "droopline/scenario_io.hpp"
#include "json_fields.hpp"

namespace droopline::study {

using json = nlohmann::ordered_json;
using namespace droopline::detail;  // the JSON field Reader (json_fields.hpp)

namespace {

constexpr double kMaxTimeS = 1e5;   // a test longer than a day is a mistake
constexpr double kMaxMhz = 5000.0;  // 5 Hz off nominal
constexpr std::size_t kMaxTests = 100, kMaxPieces = 100;

void bounded(Reader& r, const std::string& path, double v, double lo, double hi, bool lo_open) {
  if (lo_open ? !(v > lo) || v > hi : v < lo || v > hi)
    r.error(path, "must be " + std::string(lo_open ? "above " : "at least ") + fmt_num(lo) + " and at most " +
                      fmt_num(hi) + ", got " + fmt_num(v));
}

}  // namespace

std::optional<InjectProfile> parse_inject_profile(std::string_view text, std::vector<Issue>& issues) {
  const std::size_t before = issues.size();
  auto doc = parse_untrusted_json(text, issues);
  if (!doc) return std::nullopt;
  Reader r(issues);
  InjectProfile p;
  if (!r.object(*doc, "", {"name", "note", "tests"})) return std::nullopt;
  r.string(*doc, "name", "", p.name, true);
  r.string(*doc, "note", "", p.note);
  const json* tests = r.array(*doc, "tests", "", true);
  if (tests && (tests->empty() || tests->size() > kMaxTests))
    r.error("tests", "must hold 1 to " + std::to_string(kMaxTests) + " tests, got " + std::to_string(tests->size()));
  for (std::size_t i = 0; tests && i < tests->size() && i < kMaxTests; ++i) {
    const json& t = (*tests)[i];
    const std::string tp = "tests[" + std::to_string(i) + "]";
    InjectTest test;
    if (!r.object(t, tp, {"name", "lead_s", "pieces", "require"})) continue;
    r.string(t, "name", tp, test.name, true);
    r.number(t, "lead_s", tp, test.lead_s);
    bounded(r, tp + ".lead_s", test.lead_s, 0.0, kMaxTimeS, false);
    const json* pieces = r.array(t, "pieces", tp, true);
    if (pieces && (pieces->empty() || pieces->size() > kMaxPieces))
      r.error(tp + ".pieces",
              "must hold 1 to " + std::to_string(kMaxPieces) + " pieces, got " + std::to_string(pieces->size()));
    for (std::size_t k = 0; pieces && k < pieces->size() && k < kMaxPieces; ++k) {
      const json& pc = (*pieces)[k];
      const std::string pp = tp + ".pieces[" + std::to_string(k) + "]";
      InjectPiece piece;
      if (!r.object(pc, pp, {"to_mhz", "over_s", "hold_s"})) continue;
      r.number(pc, "to_mhz", pp, piece.to_mhz, true);
      r.number(pc, "over_s", pp, piece.over_s);
      r.number(pc, "hold_s", pp, piece.hold_s, true);
      bounded(r, pp + ".to_mhz", piece.to_mhz, -kMaxMhz, kMaxMhz, false);
      bounded(r, pp + ".over_s", piece.over_s, 0.0, kMaxTimeS, false);
      bounded(r, pp + ".hold_s", piece.hold_s, 0.0, kMaxTimeS, false);
      test.pieces.push_back(piece);
    }
    const json* req = r.field(t, "require", tp, true);
    const std::string rp = tp + ".require";
    if (req && r.object(*req, rp, {"share", "within_s", "hold_s", "max_delay_s", "started_share", "source"})) {
      InjectRequirement& q = test.require;
      r.number(*req, "share", rp, q.share, true);
      r.number(*req, "within_s", rp, q.within_s, true);
      r.number(*req, "hold_s", rp, q.hold_s);
      r.number(*req, "max_delay_s", rp, q.max_delay_s, true);
      r.number(*req, "started_share", rp, q.started_share);
      r.string(*req, "source", rp, q.source);
      bounded(r, rp + ".share", q.share, 0.0, 1.0, true);
      bounded(r, rp + ".within_s", q.within_s, 0.0, kMaxTimeS, true);
      bounded(r, rp + ".hold_s", q.hold_s, 0.0, kMaxTimeS, false);
      bounded(r, rp + ".max_delay_s", q.max_delay_s, 0.0, kMaxTimeS, false);
      bounded(r, rp + ".started_share", q.started_share, 0.0, q.share, true);
      // The delay is how long the response may take to start, within_s how long to reach `share`:
      // a start allowed later than the whole response would make the delay check say nothing.
      if (q.max_delay_s > q.within_s)
        r.error(rp + ".max_delay_s", "the response may start at most " + fmt_num(q.max_delay_s) +
                                         " s after the change but must be complete within " + fmt_num(q.within_s) +
                                         " s; max_delay_s must not exceed within_s");
    }
    if (!test.pieces.empty() && test.pieces.back().to_mhz == 0.0)
      r.error(tp + ".pieces", "the last piece must leave the frequency off nominal (its to_mhz is the level judged)");
    p.tests.push_back(std::move(test));
  }
  if (issues.size() > before) return std::nullopt;
  return p;
}

namespace {

// The injected deviation (mHz) at `t` (s from the run's start); `left` takes the value just before
// `t`, so a step landing on a step boundary acts from that boundary on, not half a step early.
double deviation_at(const InjectTest& test, double t, bool left) {
  double at = test.lead_s, level = 0.0;
  if (left ? t <= at : t < at) return 0.0;
  for (const InjectPiece& p : test.pieces) {
    if (p.over_s > 0.0 && (left ? t <= at + p.over_s : t < at + p.over_s))
      return level + (p.to_mhz - level) * (t - at) / p.over_s;
    at += p.over_s;
    level = p.to_mhz;
    at += p.hold_s;
    if (left ? t <= at : t < at) return level;
  }
  return level;
}

// Static droop response (MW) of `u` to a deviation of `df_hz`, limits ignored.
double droop_response(const UnitDef& u, double f0, double df_hz) {
  const double kd = u.rating_mw / (u.governor.droop * f0), a = std::abs(df_hz), db = u.governor.deadband_hz;
  const double e = u.governor.deadband == DeadbandKind::offset ? std::max(a - db, 0.0) : (a > db ? a : 0.0);
  return -kd * std::copysign(e, df_hz);
}

}  // namespace

std::optional<std::vector<InjectOutcome>> run_injection(const SystemDef& def, const std::string& unit_id,
                                                        const InjectProfile& profile, std::string& error) {
  const auto unit = std::find_if(def.units.begin(), def.units.end(), [&](const UnitDef& u) { return u.id == unit_id; });
  std::vector<InjectOutcome> out;
  if (unit == def.units.end()) {
    (void)playback_scenario(def, {unit_id}, 1.0, error);  // its message names the unit and lists the others
    return std::nullopt;
  }
  // A test that cannot be judged is refused before anything runs: its last level inside the
  // deadband (no response expected), or a droop answer beyond the unit's room from its setpoint.
  for (std::size_t k = 0; k < profile.tests.size(); ++k) {
    const InjectTest& test = profile.tests[k];
    const double level_mhz = test.pieces.empty() ? 0.0 : test.pieces.back().to_mhz;
    const double want = droop_response(*unit, def.nominal_hz, level_mhz / 1000.0);
    const double lo = unit->min_mw.value_or(unit->turbine.type == TurbineType::battery ? -unit->rating_mw : 0.0);
    const double hi = unit->max_mw.value_or(unit->rating_mw);
    const double room = want > 0 ? hi - unit->setpoint_mw : unit->setpoint_mw - lo;
    const std::string where = "profile test " + std::to_string(k + 1) + " \"" + test.name + "\": ";
    if (want == 0.0) {
      error = where + "its last level, " + fmt_num(level_mhz) + " mHz, is inside the deadband of " + unit_id + " (" +
              fmt_num(unit->governor.deadband_hz * 1000) + " mHz): no response is expected, so none can be judged";
      return std::nullopt;
    }
    if (std::abs(want) > room + 1e-9) {
      error = where + "the droop answer to " + fmt_num(level_mhz) + " mHz is " + fmt_num(want) + " MW, but " + unit_id +
              " has only " + fmt_num(room) + " MW of room " + (want > 0 ? "above" : "below") +
              " its setpoint of " + fmt_num(unit->setpoint_mw) + " MW: choose a smaller step (or the setpoint)";
      return std::nullopt;
    }
  }
  for (const InjectTest& test : profile.tests) {
    double end = test.lead_s;
    for (const InjectPiece& p : test.pieces) end += p.over_s + p.hold_s;
    end = std::max(end, test.lead_s + test.require.within_s + test.require.hold_s);  // the last level held
    auto doc = playback_scenario(def, {unit_id}, end, error);
    if (!doc) return std::nullopt;
    const LoadResult loaded = parse_scenario(doc->dump());
    if (!loaded.system) {
      for (const Issue& i : loaded.issues)
        if (!i.warning) error += (error.empty() ? "" : "; ") + i.text();
      return std::nullopt;
    }
    const double h = def.step_s, f0 = def.nominal_hz;
    InjectOutcome o;
    o.name = test.name;
    o.require = test.require;
    const auto steps = static_cast<std::size_t>(std::floor(end / h + 1e-9));
    for (std::size_t n = 0; n <= steps; ++n) {
      o.t_s.push_back(static_cast<double>(n) * h);
      o.deviation_mhz.push_back(deviation_at(test, o.t_s.back(), false));
    }
    const FrequencyAt f_at = [&](double t0, double step) {
      const double mid = f0 + deviation_at(test, t0 + 0.5 * step, false) / 1000.0;
      return StagePoints{
          {f0 + deviation_at(test, t0, false) / 1000.0, mid, mid, f0 + deviation_at(test, t0 + step, true) / 1000.0}};
    };
    std::vector<double> p = play(*loaded.system, {unit_id}, f_at, o.t_s)[0];
    const double p0 = p.front();
    for (double& v : p) v -= p0;
    o.response_mw = std::move(p);
    o.expected_mw = droop_response(*unit, f0, test.pieces.back().to_mhz / 1000.0);
    const InjectRequirement& q = test.require;
    // Shares of the expected response, in its direction.
    auto share = [&](std::size_t i) { return o.expected_mw != 0.0 ? o.response_mw[i] / o.expected_mw : 0.0; };
    for (std::size_t i = 0; i < o.t_s.size(); ++i) {
      const double since = o.t_s[i] - test.lead_s;
      if (since < 0.0) continue;
      if (!o.delay_s && share(i) >= q.started_share) o.delay_s = since;
      if (!o.reached_s && share(i) >= q.share) o.reached_s = since;
    }
    if (o.reached_s) {
      o.held_share = INFINITY;
      for (std::size_t i = 0; i < o.t_s.size(); ++i) {
        const double since = o.t_s[i] - test.lead_s;
        if (since >= *o.reached_s - 1e-9 && since <= *o.reached_s + q.hold_s + 1e-9)
          o.held_share = std::min(o.held_share, share(i));
      }
    }
    const double run_s = end - test.lead_s;
    o.delay_margin_s = q.max_delay_s - o.delay_s.value_or(run_s);
    o.within_margin_s = q.within_s - o.reached_s.value_or(run_s);
    o.hold_margin = o.held_share - q.share;
    o.passed = o.expected_mw != 0.0 && o.delay_margin_s >= 0.0 && o.within_margin_s >= 0.0 && o.hold_margin >= -1e-12;
    out.push_back(std::move(o));
  }
  return out;
}

std::string inject_table(const std::vector<InjectOutcome>& outcomes) {
  std::string s =
      "test                              expected MW  delay s (max)    reached s (within)  held share (min)  result\n";
  auto cell = [](std::string v, std::size_t w) {
    v.resize(std::max(w, v.size()), ' ');
    return v;
  };
  auto opt = [](const std::optional<double>& v) { return v ? fmt_fixed(*v, 2) : std::string("never"); };
  for (const InjectOutcome& o : outcomes) {
    s += cell(clip_text(o.name, 32), 34) + cell(fmt_fixed(o.expected_mw, 2), 13) +
         cell(opt(o.delay_s) + " (" + fmt_num(o.require.max_delay_s) + ")", 17) +
         cell(opt(o.reached_s) + " (" + fmt_num(o.require.within_s) + ")", 20) +
         cell(fmt_fixed(o.held_share, 3) + " (" + fmt_num(o.require.share) + ")", 18) + (o.passed ? "pass" : "FAIL") +
         "\n";
    s += "    margins: delay " + fmt_fixed(o.delay_margin_s, 2) + " s, reach " + fmt_fixed(o.within_margin_s, 2) +
         " s, share held " + fmt_fixed(o.hold_margin, 3) + (o.require.source.empty() ? "" : "; " + o.require.source) +
         "\n";
  }
  return s;
}

json inject_to_json(const std::vector<InjectOutcome>& outcomes) {
  json tests = json::array();
  auto opt = [](const std::optional<double>& v) { return v ? json(*v) : json(nullptr); };
  for (const InjectOutcome& o : outcomes)
    tests.push_back(
        {{"name", o.name},
         {"passed", o.passed},
         {"expected_mw", o.expected_mw},
         {"delay_s", opt(o.delay_s)},
         {"reached_s", opt(o.reached_s)},
         {"held_share", std::isfinite(o.held_share) ? json(o.held_share) : json(nullptr)},
         {"margins", {{"delay_s", o.delay_margin_s}, {"reach_s", o.within_margin_s}, {"share", o.hold_margin}}},
         {"require",
          {{"share", o.require.share},
           {"within_s", o.require.within_s},
           {"hold_s", o.require.hold_s},
           {"max_delay_s", o.require.max_delay_s},
           {"source", o.require.source}}}});
  return {{"tests", std::move(tests)}};
}

std::string inject_svg(const InjectOutcome& o) {
  const std::vector<double> required(o.t_s.size(), o.require.share * o.expected_mw);
  return line_plot_svg("Injection test: " + o.name, "time (s)", "output change (MW)",
                       {{"response", "#1d5f8a", o.t_s, o.response_mw, false},
                        {"required share of droop response", "#aa3a28", o.t_s, required, true}});
}

}  // namespace droopline::study
