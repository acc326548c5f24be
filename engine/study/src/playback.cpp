// Playback of a frequency into units of a scenario, and the comparison with their measured output.
#include "droopline/playback.hpp"

#include <algorithm>
#include <cmath>
#include <set>

#include "droopline/engine.hpp"
#include "droopline/format.hpp"
#include "droopline/plot_svg.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::study {

using json = nlohmann::ordered_json;

namespace {
constexpr std::size_t kEnoOrder = 3;
}  // namespace

RecordingOptions default_columns(const SystemDef& def, const std::vector<std::string>& unit_ids,
                                 RecordingOptions options) {
  if (options.frequency_column.empty())
    for (const UnitDef& u : def.units)
      if (!unit_ids.empty() && u.id == unit_ids[0]) options.frequency_column = u.area + ".f_hz";
  if (options.power_columns.empty())
    for (const std::string& u : unit_ids) options.power_columns.push_back(u + ".p_mw");
  return options;
}

FrequencyTrack::FrequencyTrack(std::vector<double> t_s, std::vector<double> f_hz)
    : t_(std::move(t_s)), f_(std::move(f_hz)) {
  const std::size_t n = t_.size();
  auto divided = [&](std::size_t from, std::size_t to) {  // f[t_from, ..., t_to]
    double d[kEnoOrder + 1];
    for (std::size_t k = from; k <= to; ++k) d[k - from] = f_[k];
    for (std::size_t order = 1; order <= to - from; ++order)
      for (std::size_t k = to - from; k >= order; --k) d[k] = (d[k] - d[k - 1]) / (t_[from + k] - t_[from + k - order]);
    return d[to - from];
  };
  // Per interval, a cubic through its two samples and two more, each added on the side where the
  // divided difference it brings is smaller (essentially non-oscillatory): a corner, such as a load
  // step landing on a sample, is not carried into the intervals on its other side. Kept in Newton
  // form: the first sample and the divided differences.
  for (std::size_t i = 0; i + 1 < n; ++i) {
    std::size_t lo = i, hi = i + 1;
    while (hi - lo < kEnoOrder && hi - lo + 1 < n) {
      if (lo == 0)
        ++hi;
      else if (hi == n - 1)
        --lo;
      else if (std::abs(divided(lo - 1, hi)) <= std::abs(divided(lo, hi + 1)))
        --lo;
      else
        ++hi;
    }
    Piece p{lo, hi - lo, {}};
    for (std::size_t k = 0; k <= hi - lo; ++k) p.c[k] = divided(lo, lo + k);
    pieces_.push_back(p);
  }
}

double FrequencyTrack::at(double t) const {
  const std::size_t n = t_.size();
  if (n == 0) return 0.0;
  if (t <= t_.front()) return f_.front();
  if (t >= t_.back()) return f_.back();
  const auto i = static_cast<std::size_t>(std::upper_bound(t_.begin(), t_.end(), t) - t_.begin()) - 1;
  const Piece& p = pieces_[std::min(i, pieces_.size() - 1)];
  double v = 0.0;
  for (std::size_t k = p.degree + 1; k-- > 0;) v = v * (t - t_[p.first + k]) + p.c[k];
  return v;
}

StagePoints FrequencyTrack::stages(double t0, double h) const {
  // RK4 of a unit driven by a known input: the input at each stage's own time.
  const double mid = at(t0 + 0.5 * h);
  return {{at(t0), mid, mid, at(t0 + h)}};
}

std::optional<json> playback_scenario(const SystemDef& def, const std::vector<std::string>& unit_ids, double duration_s,
                                      std::string& error) {
  json doc = scenario_to_json(def);
  std::set<std::string> areas;
  json units = json::array();
  for (const std::string& id : unit_ids) {
    const auto it = std::find_if(def.units.begin(), def.units.end(), [&](const UnitDef& u) { return u.id == id; });
    if (it == def.units.end()) {
      std::string ids;
      for (const UnitDef& u : def.units) ids += (ids.empty() ? "" : ", ") + u.id;
      error = "no unit \"" + clip_text(id, 64) + "\" in the scenario (units: " + clip_text(ids) + ")";
      return std::nullopt;
    }
    if (!it->online) {
      error = "unit \"" + id + "\" is offline in the scenario: nothing to play back";
      return std::nullopt;
    }
    for (const json& u : doc["units"])
      if (u["id"] == id) units.push_back(u);
    areas.insert(it->area);
  }
  if (std::set<std::string>(unit_ids.begin(), unit_ids.end()).size() != unit_ids.size()) {
    error = "a unit is named twice";
    return std::nullopt;
  }
  json kept = json::array();
  for (json a : doc["areas"]) {
    if (!areas.count(a["id"].get<std::string>())) continue;
    if (a.contains("agc")) a["agc"]["enabled"] = false;
    a["shedding"] = json::array();
    // The checks want synchronous inertia in every area (a battery alone has none); with the
    // frequency imposed it does nothing, so an idle placeholder unit gives it.
    bool inertia = false;
    for (const json& u : units)
      if (u["area"] == a["id"] && u["inertia_s"].get<double>() > 0.0) inertia = true;
    if (!inertia) {
      SystemDef holder;
      UnitDef idle;
      idle.id = "playback_inertia_" + a["id"].get<std::string>();
      idle.area = a["id"].get<std::string>();
      idle.rating_mw = 1000.0;  // heavy enough for the checks' step-size rule
      idle.inertia_s = 10.0;
      idle.setpoint_mw = 10.0;  // gives the area a load to balance
      holder.units.push_back(idle);
      units.push_back(scenario_to_json(holder)["units"][0]);
    }
    // The load does not matter (the frequency is imposed) but must balance for the checks.
    double demand = 0.0;
    for (const json& u : units)
      if (u["area"] == a["id"]) demand += u["setpoint_mw"].get<double>();
    a["demand_mw"] = demand;
    kept.push_back(std::move(a));
  }
  doc["areas"] = std::move(kept);
  doc["units"] = std::move(units);
  doc["ties"] = json::array();
  doc["events"] = json::array();
  doc["duration_s"] = duration_s;
  return doc;
}

std::vector<std::vector<double>> play(const CheckedSystem& system, const std::vector<std::string>& unit_ids,
                                      const FrequencyAt& f_at, const std::vector<double>& sample_s,
                                      std::int64_t settle_steps) {
  const std::unique_ptr<Engine> engine = Engine::create(system);
  const SystemDef& def = system.def();
  const double h = def.step_s, f0 = def.nominal_hz;
  const std::size_t na = def.areas.size(), nu = unit_ids.size(), ns = sample_s.size();
  std::vector<UnitId> ids;
  for (const std::string& id : unit_ids) ids.push_back(*engine->find_unit(id));
  std::vector<std::vector<double>> out(nu, std::vector<double>(ns, 0.0));
  std::vector<double> prev(nu), now(nu), df(4 * na);
  if (settle_steps > 0) {  // held at the first frequency: every stage point sees the same value
    std::fill(df.begin(), df.end(), f_at(0.0, h).f_hz[0] - f0);
    for (std::int64_t n = 0; n < settle_steps; ++n) engine->step_imposed(df);
  }
  for (std::size_t u = 0; u < nu; ++u) prev[u] = engine->unit(ids[u]).p_mw;
  std::size_t k = 0;
  const double tol = 1e-9 * h;
  for (; k < ns && sample_s[k] <= tol; ++k)
    for (std::size_t u = 0; u < nu; ++u) out[u][k] = prev[u];
  const auto steps = static_cast<std::int64_t>(std::floor(def.duration_s / h + 1e-9)) - settle_steps;
  for (std::int64_t n = 1; n <= steps && k < ns; ++n) {
    const double t0 = static_cast<double>(n - 1) * h, t1 = static_cast<double>(n) * h;
    const StagePoints sp = f_at(t0, h);
    for (std::size_t a = 0; a < na; ++a)
      for (std::size_t st = 0; st < 4; ++st) df[4 * a + st] = sp.f_hz[st] - f0;
    engine->step_imposed(df);
    for (std::size_t u = 0; u < nu; ++u) now[u] = engine->unit(ids[u]).p_mw;
    for (; k < ns && sample_s[k] <= t1 + tol; ++k) {
      const double w = std::clamp((sample_s[k] - t0) / h, 0.0, 1.0);
      const bool on_step = std::abs(sample_s[k] - t1) <= tol;
      for (std::size_t u = 0; u < nu; ++u) out[u][k] = on_step ? now[u] : prev[u] + w * (now[u] - prev[u]);
    }
    prev.swap(now);
  }
  return out;
}

namespace {

// Steps for a unit to settle at a held frequency: twenty times its slowest time constant (hydro's
// reset time taken as five water starting times when not given), within 30 .. 600 s.
std::int64_t settle_steps_for(const UnitDef& d, double h) {
  const TurbineDef& t = d.turbine;
  const double slowest = std::max({d.governor.lag_s, t.steam_chest_s, t.type == TurbineType::reheat ? t.reheat_s : 0.0,
                                   t.type == TurbineType::hydro ? t.reset_s.value_or(5.0 * t.water_s) : 0.0,
                                   t.fuel_s, t.combustion_s, t.response_s, t.rocof_filter_s});
  return static_cast<std::int64_t>(std::ceil(std::clamp(20.0 * slowest, 30.0, 600.0) / h));
}

// Finite is not yet sensible: a frequency more than 10 % off nominal, or an output beyond ten
// times the unit's rating, is a recorder's glitch or a wrong column or base, not a grid event.
// The first such sample is named so it can be cut out or marked missing.
bool plausible(const PlaybackSpec& spec, std::string& error) {
  const Recording& rec = spec.recording;
  const double f0 = spec.def.nominal_hz;
  auto at = [&](std::size_t i) { return "sample " + std::to_string(i + 1) + " (t = " + fmt_num(rec.t_s[i]) + " s)"; };
  for (std::size_t i = 0; i < rec.frequency_hz.size() && i < rec.t_s.size(); ++i)
    if (!(std::abs(rec.frequency_hz[i] - f0) <= 0.1 * f0)) {
      error = "the recording's " + at(i) + " has frequency " + fmt_num(rec.frequency_hz[i]) + " Hz, outside " +
              fmt_num(0.9 * f0) + " .. " + fmt_num(1.1 * f0) +
              " Hz (nominal +- 10 %): a recorder glitch or the wrong column or base? Cut it out or leave the field "
              "empty (a missing sample)";
      return false;
    }
  for (std::size_t u = 0; u < rec.power_mw.size() && u < spec.units.size(); ++u) {
    double rating = 0.0;
    for (const UnitDef& d : spec.def.units)
      if (d.id == spec.units[u]) rating = d.rating_mw;
    const auto& p = rec.power_mw[u].second;
    for (std::size_t i = 0; i < p.size() && i < rec.t_s.size(); ++i)
      if (!(std::abs(p[i]) <= 10.0 * rating)) {
        error = "the recording's " + at(i) + " has output " + fmt_num(p[i]) + " MW in \"" + rec.power_mw[u].first +
                "\", beyond ten times the rating of " + spec.units[u] + " (" + fmt_num(rating) +
                " MW): the wrong column or base?";
        return false;
      }
  }
  return true;
}

}  // namespace

std::optional<PreparedPlayback> prepare_playback(const PlaybackSpec& spec, std::string& error) {
  const Recording& rec = spec.recording;
  if (spec.units.empty()) {
    error = "no unit to play back";
    return std::nullopt;
  }
  if (rec.power_mw.size() != spec.units.size()) {
    error = "the recording has " + std::to_string(rec.power_mw.size()) + " power series for " +
            std::to_string(spec.units.size()) + " unit(s): give one power column per unit, in the same order";
    return std::nullopt;
  }
  const double h = spec.def.step_s;
  const double first = rec.t_s.empty() ? 0.0 : rec.t_s.front();
  const double last = rec.t_s.empty() ? 0.0 : std::min(rec.t_s.back(), spec.def.duration_s);
  if (rec.t_s.size() < 2 || last - first < h) {
    error = "the recording (" +
            (rec.t_s.empty() ? std::string("no samples") : fmt_num(first) + " .. " + fmt_num(rec.t_s.back()) + " s") +
            ") and the scenario (0 .. " + fmt_num(spec.def.duration_s) + " s) have less than one step (" + fmt_num(h) +
            " s) in common";
    return std::nullopt;
  }
  if (!plausible(spec, error)) return std::nullopt;
  SystemDef def = spec.def;
  PreparedPlayback prep{json(), spec.units, FrequencyTrack({}, {}), {}, {}, {}, 0, {}};
  prep.warnings = rec.warnings;  // what the reader repaired or assumed comes first
  for (std::size_t u = 0; u < spec.units.size(); ++u)
    for (UnitDef& d : def.units)
      if (d.id == spec.units[u]) {
        // At rest where the plant was: its mean output before the first excursion (noise on one
        // sample would otherwise shift the whole response), or the first sample without a rest.
        // Off nominal beyond the deadband at the start, the rest is around that first frequency.
        const double f_start = rec.frequency_hz.front();
        const bool off = std::abs(f_start - def.nominal_hz) > d.governor.deadband_hz + 1e-3;
        const double around = off ? f_start : def.nominal_hz;
        const double threshold = spec.threshold_hz.value_or(d.governor.deadband_hz + 0.01);
        double sum = 0.0;
        std::size_t count = 0;
        // Off nominal the unit may still be moving (slow units elsewhere in its grid): its first second only.
        for (std::size_t i = 0; i < rec.t_s.size() && std::abs(rec.frequency_hz[i] - around) <= threshold &&
                                (!off || rec.t_s[i] - rec.t_s.front() < 1.0);
             ++i, ++count)
          sum += rec.power_mw[u].second[i];
        d.setpoint_mw = count ? sum / static_cast<double>(count) : rec.power_mw[u].second.front();
        prep.start_mw.push_back(d.setpoint_mw);
        if (!off) continue;
        if (d.governor.mode == GovernorMode::isochronous) {
          prep.warnings.push_back("the recording starts " + fmt_num(std::abs(f_start - def.nominal_hz) * 1000) +
                                  " mHz off nominal and " + d.id +
                                  " is isochronous (no steady state off nominal): it starts steady at nominal");
          continue;
        }
        prep.settle_steps = std::max(prep.settle_steps, settle_steps_for(d, h));
      }
  if (prep.settle_steps > 0)
    prep.warnings.push_back("the recording starts " + fmt_num((rec.frequency_hz.front() - def.nominal_hz) * 1000) +
                            " mHz off nominal: the units settle there for " +
                            fmt_num(static_cast<double>(prep.settle_steps) * h) +
                            " s first, their setpoints moved so they start at the measured output");
  auto doc = playback_scenario(def, spec.units, last - first + static_cast<double>(prep.settle_steps) * h, error);
  if (!doc) return std::nullopt;
  prep.scenario = std::move(*doc);
  std::vector<double> t;
  for (std::size_t i = 0; i < rec.t_s.size() && rec.t_s[i] <= last + 1e-9 * h; ++i) {
    prep.rows.push_back(i);
    prep.sample_s.push_back(rec.t_s[i] - first);
  }
  for (double v : rec.t_s) t.push_back(v - first);
  prep.track = FrequencyTrack(std::move(t), rec.frequency_hz);
  if (rec.t_s.back() > last + 1e-9 * h)
    prep.warnings.push_back("the recording runs to " + fmt_num(rec.t_s.back()) + " s, past the scenario's duration " +
                            fmt_num(spec.def.duration_s) + " s: compared up to " + fmt_num(last) + " s");
  return prep;
}

std::optional<std::vector<std::vector<double>>> simulate(const PreparedPlayback& prep, const json& scenario,
                                                         std::string& error) {
  const LoadResult loaded = parse_scenario(scenario.dump());
  if (!loaded.system) {
    for (const Issue& i : loaded.issues)
      if (!i.warning) error += (error.empty() ? "" : "; ") + i.text();
    return std::nullopt;
  }
  const FrequencyTrack& track = prep.track;
  const FrequencyAt f_at = [&track](double t0, double h) { return track.stages(t0, h); };
  if (prep.settle_steps == 0) return play(*loaded.system, prep.units, f_at, prep.sample_s);
  // Settled at the first frequency with the scenario's setpoints, each unit is off its measured
  // start by its droop's answer to the offset; moving the setpoint by that much starts it there
  // (exactly, while no limit is reached: the steady answer does not depend on the setpoint).
  const std::vector<std::vector<double>> settled = play(*loaded.system, prep.units, f_at, {0.0}, prep.settle_steps);
  json moved = scenario;
  for (std::size_t u = 0; u < prep.units.size(); ++u) {
    const double shift = prep.start_mw[u] - settled[u][0];
    for (json& unit : moved["units"])
      if (unit["id"] == prep.units[u]) {
        unit["setpoint_mw"] = unit["setpoint_mw"].get<double>() + shift;
        for (json& area : moved["areas"])  // the checks want each area balanced at the start
          if (area["id"] == unit["area"]) area["demand_mw"] = area["demand_mw"].get<double>() + shift;
      }
  }
  const LoadResult moved_loaded = parse_scenario(moved.dump());
  if (!moved_loaded.system) {
    for (const Issue& i : moved_loaded.issues)
      if (!i.warning) error += (error.empty() ? "" : "; ") + i.text();
    return std::nullopt;
  }
  return play(*moved_loaded.system, prep.units, f_at, prep.sample_s, prep.settle_steps);
}

SeriesError series_error(const std::vector<double>& a, const std::vector<double>& b) {
  SeriesError e;
  const std::size_t n = std::min(a.size(), b.size());
  double sse = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    const double d = a[i] - b[i];
    sse += d * d;
    if (std::abs(d) > e.max_abs) {
      e.max_abs = std::abs(d);
      e.max_at = i;
    }
  }
  e.rmse = n ? std::sqrt(sse / static_cast<double>(n)) : 0.0;
  return e;
}

namespace {

// A series' value at `at` (linear between samples); nothing past its end.
std::optional<double> value_at(const std::vector<double>& t, const std::vector<double>& v, double at) {
  if (t.empty() || at > t.back() + 1e-9 || at < t.front()) return std::nullopt;
  const auto it = std::lower_bound(t.begin(), t.end(), at);
  if (it == t.end()) return v.back();
  const std::size_t i = static_cast<std::size_t>(it - t.begin());
  if (i == 0 || *it == at) return v[i];
  const double w = (at - t[i - 1]) / (t[i] - t[i - 1]);
  return v[i - 1] + w * (v[i] - v[i - 1]);
}

std::optional<double> change(const std::vector<double>& t, const std::vector<double>& v, std::size_t k,
                             double after_s) {
  const auto later = value_at(t, v, t[k] + after_s);
  if (!later) return std::nullopt;
  return *later - v[k];
}

const char* const kColours[] = {"#1d5f8a", "#aa3a28", "#2e7d32", "#6a4c93"};

}  // namespace

std::optional<PlaybackResult> run_playback(const PlaybackSpec& spec, std::string& error) {
  auto prep = prepare_playback(spec, error);
  if (!prep) return std::nullopt;
  auto sim = simulate(*prep, prep->scenario, error);
  if (!sim) return std::nullopt;
  PlaybackResult r;
  r.nominal_hz = spec.def.nominal_hz;
  r.warnings = prep->warnings;
  double widest_db = 0.0;
  for (const UnitDef& u : spec.def.units)
    if (std::find(spec.units.begin(), spec.units.end(), u.id) != spec.units.end())
      widest_db = std::max(widest_db, u.governor.deadband_hz);
  r.threshold_hz = spec.threshold_hz.value_or(widest_db + 0.01);
  for (std::size_t i : prep->rows) {
    r.t_s.push_back(spec.recording.t_s[i]);
    r.f_hz.push_back(spec.recording.frequency_hz[i]);
  }
  // Excursions: the first sample beyond the threshold after one within it, around nominal, or
  // around the first frequency when the units settled there.
  const double around = prep->settle_steps > 0 ? r.f_hz.front() : r.nominal_hz;
  std::vector<std::size_t> starts;
  bool beyond = true;  // an offset already there at the start is not an excursion seen to begin
  for (std::size_t k = 0; k < r.f_hz.size(); ++k) {
    const bool now = std::abs(r.f_hz[k] - around) > r.threshold_hz;
    if (now && !beyond) starts.push_back(k);
    beyond = now;
  }
  for (std::size_t u = 0; u < spec.units.size(); ++u) {
    std::vector<double> measured;
    for (std::size_t i : prep->rows) measured.push_back(spec.recording.power_mw[u].second[i]);
    UnitFit fit;
    fit.unit = spec.units[u];
    const SeriesError e = series_error((*sim)[u], measured);
    fit.rmse_mw = e.rmse;
    fit.max_error_mw = e.max_abs;
    fit.max_error_at_s = r.t_s.empty() ? 0.0 : r.t_s[e.max_at];
    for (std::size_t k : starts) {
      Excursion x;
      x.at_s = r.t_s[k];
      x.df_hz = r.f_hz[k] - r.nominal_hz;
      x.measured_10s_mw = change(r.t_s, measured, k, 10.0);
      x.simulated_10s_mw = change(r.t_s, (*sim)[u], k, 10.0);
      x.measured_30s_mw = change(r.t_s, measured, k, 30.0);
      x.simulated_30s_mw = change(r.t_s, (*sim)[u], k, 30.0);
      fit.excursions.push_back(x);
    }
    r.units.push_back(std::move(fit));
    r.measured_mw.push_back(std::move(measured));
    r.simulated_mw.push_back(std::move((*sim)[u]));
  }
  return r;
}

std::string playback_csv(const PlaybackResult& r, const std::vector<std::string>& unit_ids) {
  std::string s = "t_s,f_hz";
  for (const std::string& id : unit_ids) s += "," + id + ".measured_mw," + id + ".simulated_mw";
  s += '\n';
  for (std::size_t k = 0; k < r.t_s.size(); ++k) {
    append_exact(s, r.t_s[k]);
    s += ',';
    append_exact(s, r.f_hz[k]);
    for (std::size_t u = 0; u < r.measured_mw.size(); ++u) {
      s += ',';
      append_exact(s, r.measured_mw[u][k]);
      s += ',';
      append_exact(s, r.simulated_mw[u][k]);
    }
    s += '\n';
  }
  return s;
}

namespace {

std::string plot_units(const PlaybackResult& r, const std::vector<double>* x, const std::string& title,
                       const std::string& xlabel) {
  std::vector<PlotLine> lines;
  for (std::size_t u = 0; u < r.units.size(); ++u) {
    const std::string colour = kColours[u % 4];
    const std::vector<double>& xs = x ? *x : r.t_s;
    lines.push_back({r.units[u].unit + " measured", colour, xs, r.measured_mw[u], false});
    lines.push_back({r.units[u].unit + " simulated", colour, xs, r.simulated_mw[u], true});
  }
  return line_plot_svg(title, xlabel, "output (MW)", lines);
}

json opt(const std::optional<double>& v) { return v ? json(*v) : json(nullptr); }

}  // namespace

std::string playback_time_svg(const PlaybackResult& r) {
  return plot_units(r, nullptr, "Playback: measured and simulated output", "time (s)");
}

std::string playback_droop_svg(const PlaybackResult& r) {
  return plot_units(r, &r.f_hz, "Playback: output over frequency", "frequency (Hz)");
}

json playback_to_json(const PlaybackResult& r) {
  json units = json::array();
  for (const UnitFit& u : r.units) {
    json xs = json::array();
    for (const Excursion& x : u.excursions)
      xs.push_back({{"at_s", x.at_s},
                    {"df_hz", x.df_hz},
                    {"measured_10s_mw", opt(x.measured_10s_mw)},
                    {"simulated_10s_mw", opt(x.simulated_10s_mw)},
                    {"measured_30s_mw", opt(x.measured_30s_mw)},
                    {"simulated_30s_mw", opt(x.simulated_30s_mw)}});
    units.push_back({{"unit", u.unit},
                     {"rmse_mw", u.rmse_mw},
                     {"max_error_mw", u.max_error_mw},
                     {"max_error_at_s", u.max_error_at_s},
                     {"excursions", std::move(xs)}});
  }
  return {{"samples", r.t_s.size()},
          {"threshold_hz", r.threshold_hz},
          {"units", std::move(units)},
          {"warnings", r.warnings}};
}

}  // namespace droopline::study
