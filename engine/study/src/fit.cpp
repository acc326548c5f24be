// Fitting a unit's parameters to a recording: NLopt BOBYQA from a seeded Latin hypercube, the
// uncertainty from a finite-difference Jacobian of the residuals at the optimum.
#include "droopline/fit.hpp"

#include <Eigen/Dense>
#include <algorithm>
#include <atomic>
#include <cmath>
#include <limits>
#include <nlopt.hpp>
#include <random>
#include <thread>

#include "droopline/format.hpp"
#include "droopline/plot_svg.hpp"
#include "droopline/recording.hpp"
#include "droopline/scenario_io.hpp"
#include "droopline/sweep.hpp"
#include "droopline/task_pool.hpp"

namespace droopline::study {

using json = nlohmann::ordered_json;

std::optional<FitParam> parse_fit_param(const std::string& spec, std::string& error) {
  const std::size_t eq = spec.find('=');
  const std::size_t colon = spec.find(':', eq == std::string::npos ? 0 : eq);
  FitParam p;
  if (eq == std::string::npos || eq == 0 || colon == std::string::npos) {
    error = "--param \"" + clip_text(spec, 80) + "\": takes PATH=LO:HI, e.g. governor.droop=0.03:0.08";
    return std::nullopt;
  }
  p.path = spec.substr(0, eq);
  // Decimal numbers as everywhere else (no hex, NaN or infinity).
  if (!detail::parse_number(spec.substr(eq + 1, colon - eq - 1), p.lo) ||
      !detail::parse_number(spec.substr(colon + 1), p.hi)) {
    error = "--param \"" + clip_text(spec, 80) + "\": LO and HI must be numbers (PATH=LO:HI)";
    return std::nullopt;
  }
  if (!(p.lo < p.hi)) {
    error = "--param " + p.path + ": LO (" + fmt_num(p.lo) + ") must be below HI (" + fmt_num(p.hi) + ")";
    return std::nullopt;
  }
  return p;
}

namespace {

// The value a path relative to a unit names in the unit's JSON, if it is a number there.
std::optional<double> unit_value(const json& unit, const std::string& path) {
  const json* node = &unit;
  std::size_t i = 0;
  while (i <= path.size()) {
    const std::size_t dot = path.find('.', i);
    const std::string key = path.substr(i, dot == std::string::npos ? std::string::npos : dot - i);
    if (!node->is_object() || !node->contains(key)) return std::nullopt;
    node = &(*node)[key];
    if (dot == std::string::npos) break;
    i = dot + 1;
  }
  return node->is_number() ? std::optional<double>(node->get<double>()) : std::nullopt;
}

std::string unit_path(const std::string& unit, const std::string& path) { return "units[" + unit + "]." + path; }

// The runs of every fit counted against their budget, and the caller's cancel flag.
struct Tally {
  const FitControl* control = nullptr;
  std::atomic<std::uint64_t> done{0};
  std::uint64_t total = 0;
  bool cancelled() const { return control->cancel && control->cancel->load(std::memory_order_relaxed); }
};

// Everything one fit needs while it runs; shared read-only by its local searches.
struct Job {
  const FitSpec* spec = nullptr;
  Tally* tally = nullptr;
  std::optional<PreparedPlayback> prep;
  std::vector<double> measured;
  std::string error;
  // Filled by the local searches, one slot each.
  std::vector<std::vector<double>> best_x;
  std::vector<double> best_sse;
  std::vector<std::size_t> evaluations;
};

// The scenario with the parameters at physical values `v`; false when a path does not resolve.
bool with_values(const Job& job, const std::vector<double>& v, json& doc) {
  doc = job.prep->scenario;
  std::string err;
  for (std::size_t k = 0; k < v.size(); ++k)
    if (!set_path(doc, unit_path(job.prep->units[0], job.spec->params[k].path), v[k], err)) return false;
  return true;
}

// Simulated output at physical values `v`, or nothing when the scenario refuses them.
std::optional<std::vector<double>> output_at(const Job& job, const std::vector<double>& v) {
  if (job.tally && job.tally->control->progress)
    job.tally->control->progress(job.tally->done.fetch_add(1) + 1, job.tally->total);
  json doc;
  if (!with_values(job, v, doc)) return std::nullopt;
  std::string err;
  auto sim = simulate(*job.prep, doc, err);
  if (!sim) return std::nullopt;
  return std::move((*sim)[0]);
}

double sse_of(const std::vector<double>& a, const std::vector<double>& b) {
  double s = 0.0;
  for (std::size_t i = 0; i < std::min(a.size(), b.size()); ++i) s += (a[i] - b[i]) * (a[i] - b[i]);
  return s;
}

std::vector<double> physical(const FitSpec& spec, const std::vector<double>& x) {
  std::vector<double> v(x.size());
  for (std::size_t k = 0; k < x.size(); ++k) v[k] = spec.params[k].lo + x[k] * (spec.params[k].hi - spec.params[k].lo);
  return v;
}

// A Latin hypercube in [0, 1]^p: each parameter's range cut into `n` strata, one start in each,
// the strata paired at random; drawn from std::mt19937_64 (fixed by the standard) with `seed`.
std::vector<std::vector<double>> latin_hypercube(std::size_t n, std::size_t p, std::uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::vector<std::vector<double>> pts(n, std::vector<double>(p));
  for (std::size_t k = 0; k < p; ++k) {
    std::vector<std::size_t> strata(n);
    for (std::size_t i = 0; i < n; ++i) strata[i] = i;
    for (std::size_t i = n; i > 1; --i) std::swap(strata[i - 1], strata[rng() % i]);  // Fisher-Yates
    for (std::size_t i = 0; i < n; ++i) {
      const double u = static_cast<double>(rng() >> 11) * 0x1.0p-53;
      pts[i][k] = (static_cast<double>(strata[i]) + u) / static_cast<double>(n);
    }
  }
  return pts;
}

struct SearchCtx {
  const Job* job;
  std::size_t evaluations = 0;
};

double objective(const std::vector<double>& x, std::vector<double>& /*grad*/, void* data) {
  auto* c = static_cast<SearchCtx*>(data);
  // NLopt's C++ wrapper turns this into a forced stop of the search (caught in local_search).
  if (c->job->tally->cancelled()) throw nlopt::forced_stop();
  ++c->evaluations;
  const auto out = output_at(*c->job, physical(*c->job->spec, x));
  // Values the scenario's checks refuse cannot be the answer: far worse than any real fit.
  return out ? sse_of(*out, c->job->measured) : std::numeric_limits<double>::max() / 4;
}

void local_search(Job& job, std::size_t start, const std::vector<double>& x0) {
  if (job.tally->cancelled()) return;
  const std::size_t p = x0.size();
  nlopt::opt opt(nlopt::LN_BOBYQA, static_cast<unsigned>(p));
  opt.set_lower_bounds(std::vector<double>(p, 0.0));
  opt.set_upper_bounds(std::vector<double>(p, 1.0));
  SearchCtx ctx{&job};
  opt.set_min_objective(objective, &ctx);
  opt.set_xtol_rel(1e-6);
  opt.set_ftol_rel(1e-10);
  opt.set_maxeval(static_cast<int>(job.spec->max_evaluations));
  opt.set_initial_step(std::vector<double>(p, 0.1));
  std::vector<double> x = x0;
  double f = std::numeric_limits<double>::max();
  try {
    opt.optimize(x, f);
  } catch (const std::exception&) {
    f = opt.last_optimum_value();  // a roundoff stop keeps the best point found
  }
  job.best_x[start] = x;
  job.best_sse[start] = f;
  job.evaluations[start] = ctx.evaluations;
}

double r_squared(double sse, const std::vector<double>& measured) {
  double mean = 0.0;
  for (double v : measured) mean += v;
  mean /= static_cast<double>(std::max<std::size_t>(1, measured.size()));
  double sst = 0.0;
  for (double v : measured) sst += (v - mean) * (v - mean);
  return sst > 0.0 ? 1.0 - sse / sst : 0.0;
}

// The best search's point, its uncertainty and the report.
FitResult finish(Job& job) {
  const FitSpec& spec = *job.spec;
  const std::size_t p = spec.params.size(), n = job.measured.size();
  FitResult r;
  r.unit = job.prep->units[0];
  const std::size_t best =
      static_cast<std::size_t>(std::min_element(job.best_sse.begin(), job.best_sse.end()) - job.best_sse.begin());
  for (std::size_t e : job.evaluations) r.evaluations += e;
  const std::vector<double> x = job.best_x[best];
  r.values = physical(spec, x);
  const json base_unit = [&] {
    for (const json& u : job.prep->scenario["units"])
      if (u["id"] == r.unit) return u;
    return json::object();
  }();
  for (const FitParam& fp : spec.params) {
    r.paths.push_back(fp.path);
    r.initial.push_back(unit_value(base_unit, fp.path).value_or(NAN));
  }
  r.samples = n;
  r.t_s.assign(job.prep->sample_s.begin(), job.prep->sample_s.end());
  for (std::size_t i = 0; i < n; ++i) r.t_s[i] = spec.playback.recording.t_s[job.prep->rows[i]];
  r.measured_mw = job.measured;
  r.initial_mw = output_at(job, r.initial).value_or(std::vector<double>{});
  r.fitted_mw = output_at(job, r.values).value_or(std::vector<double>{});
  const double sse_before = sse_of(r.initial_mw, job.measured), sse_after = sse_of(r.fitted_mw, job.measured);
  r.rmse_before_mw = std::sqrt(sse_before / static_cast<double>(n));
  r.rmse_after_mw = std::sqrt(sse_after / static_cast<double>(n));
  r.r2_before = r_squared(sse_before, job.measured);
  r.r2_after = r_squared(sse_after, job.measured);

  // Jacobian of the residuals by central differences (one-sided against a bound), in physical units.
  Eigen::MatrixXd J(static_cast<Eigen::Index>(n), static_cast<Eigen::Index>(p));
  bool ok = true;
  for (std::size_t k = 0; k < p; ++k) {
    const double span = spec.params[k].hi - spec.params[k].lo, d = 1e-4 * span;
    std::vector<double> up = r.values, down = r.values;
    up[k] = std::min(r.values[k] + d, spec.params[k].hi);
    down[k] = std::max(r.values[k] - d, spec.params[k].lo);
    const auto a = output_at(job, up), b = output_at(job, down);
    if (!a || !b || up[k] == down[k]) {
      ok = false;
      continue;
    }
    for (std::size_t i = 0; i < n; ++i)
      J(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(k)) = ((*a)[i] - (*b)[i]) / (up[k] - down[k]);
  }
  r.sigma.assign(p, NAN);
  r.correlation.assign(p, std::vector<double>(p, NAN));
  if (ok && n > p) {
    const Eigen::MatrixXd jtj = J.transpose() * J;
    Eigen::FullPivLU<Eigen::MatrixXd> lu(jtj);
    if (lu.isInvertible()) {
      const Eigen::MatrixXd cov = (sse_after / static_cast<double>(n - p)) * lu.inverse();
      for (std::size_t a = 0; a < p; ++a) {
        const auto ia = static_cast<Eigen::Index>(a);
        r.sigma[a] = std::sqrt(std::max(0.0, cov(ia, ia)));
        for (std::size_t b = 0; b < p; ++b) {
          const auto ib = static_cast<Eigen::Index>(b);
          r.correlation[a][b] = cov(ia, ib) / std::sqrt(cov(ia, ia) * cov(ib, ib));
        }
      }
    } else {
      r.warnings.push_back(
          "the recording does not move the output with every parameter (singular sensitivity): no "
          "uncertainty can be given");
    }
  }
  for (std::size_t a = 0; a < p; ++a)
    for (std::size_t b = a + 1; b < p; ++b)
      if (std::abs(r.correlation[a][b]) > 0.95)
        r.warnings.push_back(r.paths[a] + " and " + r.paths[b] +
                             " cannot be told apart by this recording (correlation " +
                             fmt_fixed(r.correlation[a][b], 3) + ")");
  for (std::size_t k = 0; k < p; ++k)
    if (x[k] < 1e-3 || x[k] > 1.0 - 1e-3)
      r.warnings.push_back(r.paths[k] + " = " + fmt_num(r.values[k]) + " sits on its " +
                           (x[k] < 0.5 ? "lower" : "upper") + " bound: widen the range or question the model");
  r.warnings.insert(r.warnings.end(), job.prep->warnings.begin(), job.prep->warnings.end());
  // The unit as the scenario file had it, with the fitted values.
  const json scenario = scenario_to_json(spec.playback.def);
  for (const json& u : scenario["units"])
    if (u["id"] == r.unit) r.fragment = u;
  json wrapper = json::object();
  wrapper["units"] = json::array();
  wrapper["units"].push_back(r.fragment);
  std::string err;
  for (std::size_t k = 0; k < p; ++k) set_path(wrapper, unit_path(r.unit, r.paths[k]), r.values[k], err);
  r.fragment = wrapper["units"][0];
  return r;
}

}  // namespace

bool check_fit(const FitSpec& spec, std::string& error) {
  std::vector<std::string> problems;
  if (spec.playback.units.size() != 1) problems.push_back("a fit takes exactly one unit");
  if (spec.params.empty()) problems.push_back("no --param to fit");
  if (spec.starts < 1) problems.push_back("--starts must be at least 1");
  std::string perr;
  std::optional<PreparedPlayback> prep;
  if (problems.empty()) {
    prep = prepare_playback(spec.playback, perr);
    if (!prep) problems.push_back(perr);
  }
  if (prep) {
    // A handful of samples cannot pin parameters down: the search would report whatever value it
    // stopped at as "fitted".
    const std::size_t need = std::max<std::size_t>(20, 10 * spec.params.size());
    if (prep->sample_s.size() < need)
      problems.push_back("the recording has " + std::to_string(prep->sample_s.size()) +
                         " sample(s) within the scenario's run; a fit of " + std::to_string(spec.params.size()) +
                         " parameter(s) needs at least " + std::to_string(need));
    // The unit as the recording starts it, before any parameter is tried: a start the scenario
    // refuses (an output above the rating, say) is the recording's fault, not a bound's.
    const LoadResult as_recorded = parse_scenario(prep->scenario.dump());
    if (!as_recorded.system) {
      std::string why;
      for (const Issue& i : as_recorded.issues)
        if (!i.warning) why += (why.empty() ? "" : "; ") + i.text();
      problems.push_back("the recording starts " + prep->units[0] +
                         " where the scenario cannot (" + why + "): the wrong column, unit or base?");
      prep.reset();
    }
  }
  for (const FitParam& fp : spec.params) {
    if (!(fp.lo < fp.hi)) {
      problems.push_back("--param " + fp.path + ": LO (" + fmt_num(fp.lo) + ") must be below HI (" + fmt_num(fp.hi) +
                         ")");
      continue;
    }
    if (!prep) continue;
    const std::string unit = prep->units[0];
    json doc = prep->scenario;
    std::string err;
    const json* u = nullptr;
    for (const json& x : doc["units"])
      if (x["id"] == unit) u = &x;
    if (!u || !unit_value(*u, fp.path) || !set_path(doc, unit_path(unit, fp.path), fp.lo, err)) {
      problems.push_back("--param " + fp.path + ": no number \"" + fp.path + "\" in unit " + unit +
                         " (paths as in sweeps, e.g. governor.droop, governor.lag_s, turbine.steam_chest_s)");
      continue;
    }
    // The scenario's own checks say what range is physical.
    for (double v : {fp.lo, fp.hi}) {
      json probe = prep->scenario;
      set_path(probe, unit_path(unit, fp.path), v, err);
      const LoadResult loaded = parse_scenario(probe.dump());
      if (!loaded.system) {
        std::string why;
        for (const Issue& i : loaded.issues)
          if (!i.warning) why += (why.empty() ? "" : "; ") + i.text();
        problems.push_back("--param " + fp.path + ": bound " + fmt_num(v) + " is outside what the model accepts (" +
                           why + ")");
      }
    }
  }
  for (const std::string& p : problems) error += (error.empty() ? "" : "\n") + p;
  return problems.empty();
}

std::uint64_t fit_budget(const FitSpec& spec) {
  return std::uint64_t{spec.starts} * spec.max_evaluations + 2 + 2 * spec.params.size();
}

std::vector<std::optional<FitResult>> run_fits(const std::vector<FitSpec>& specs, unsigned threads,
                                               std::vector<std::string>& errors, const FitControl& control) {
  std::vector<Job> jobs(specs.size());
  Tally tally;
  tally.control = &control;
  errors.assign(specs.size(), std::string());
  std::vector<std::pair<std::size_t, std::size_t>> searches;  // (job, start)
  std::vector<std::vector<std::vector<double>>> starts(specs.size());
  for (std::size_t j = 0; j < specs.size(); ++j) {
    Job& job = jobs[j];
    job.spec = &specs[j];
    job.tally = &tally;
    if (!check_fit(specs[j], job.error)) continue;
    tally.total += fit_budget(specs[j]);
    job.prep = prepare_playback(specs[j].playback, job.error);
    for (std::size_t i : job.prep->rows) job.measured.push_back(specs[j].playback.recording.power_mw[0].second[i]);
    starts[j] = latin_hypercube(specs[j].starts, specs[j].params.size(), specs[j].seed);
    job.best_x.assign(specs[j].starts, {});
    job.best_sse.assign(specs[j].starts, std::numeric_limits<double>::infinity());
    job.evaluations.assign(specs[j].starts, 0);
    for (std::size_t s = 0; s < specs[j].starts; ++s) searches.emplace_back(j, s);
  }
  const std::size_t want = threads ? threads : std::max(1u, std::thread::hardware_concurrency());
  TaskPool pool(std::max<std::size_t>(1, std::min(want, std::max<std::size_t>(1, searches.size()))));
  struct Ctx {
    std::vector<Job>* jobs;
    std::vector<std::pair<std::size_t, std::size_t>>* searches;
    std::vector<std::vector<std::vector<double>>>* starts;
    std::vector<std::optional<FitResult>>* results;
    std::vector<std::size_t> ready;  // jobs that can run
  };
  std::vector<std::optional<FitResult>> results(specs.size());
  Ctx ctx{&jobs, &searches, &starts, &results, {}};
  pool.run(
      pool.concurrency(),
      [](void* c, std::size_t task, std::size_t tasks) {
        auto* x = static_cast<Ctx*>(c);
        for (std::size_t i = task; i < x->searches->size(); i += tasks) {
          auto [j, s] = (*x->searches)[i];
          local_search((*x->jobs)[j], s, (*x->starts)[j][s]);
        }
      },
      &ctx);
  for (std::size_t j = 0; j < jobs.size(); ++j)
    if (jobs[j].prep && !tally.cancelled()) ctx.ready.push_back(j);
  pool.run(
      pool.concurrency(),
      [](void* c, std::size_t task, std::size_t tasks) {
        auto* x = static_cast<Ctx*>(c);
        for (std::size_t i = task; i < x->ready.size(); i += tasks)
          (*x->results)[x->ready[i]] = finish((*x->jobs)[x->ready[i]]);
      },
      &ctx);
  for (std::size_t j = 0; j < jobs.size(); ++j) {
    errors[j] = jobs[j].error;
    // A search stopped half-way is no answer: nothing of a cancelled run is returned.
    if (tally.cancelled() && jobs[j].prep) {
      results[j].reset();
      errors[j] = "cancelled";
    }
  }
  return results;
}

json fit_to_json(const FitResult& r) {
  json params = json::object(), sigma = json::object(), initial = json::object(), corr = json::object();
  auto number = [](double v) { return std::isfinite(v) ? json(v) : json(nullptr); };
  for (std::size_t k = 0; k < r.paths.size(); ++k) {
    params[r.paths[k]] = r.values[k];
    sigma[r.paths[k]] = number(r.sigma[k]);
    initial[r.paths[k]] = number(r.initial[k]);
    json row = json::object();
    for (std::size_t b = 0; b < r.paths.size(); ++b) row[r.paths[b]] = number(r.correlation[k][b]);
    corr[r.paths[k]] = std::move(row);
  }
  return {{"unit", r.unit},
          {"params", std::move(params)},
          {"uncertainty", std::move(sigma)},
          {"initial", std::move(initial)},
          {"rmse_before", r.rmse_before_mw},
          {"rmse_after", r.rmse_after_mw},
          {"r2_before", r.r2_before},
          {"r2_after", r.r2_after},
          {"correlation", std::move(corr)},
          {"samples", r.samples},
          {"evaluations", r.evaluations},
          {"warnings", r.warnings},
          {"fragment", r.fragment}};
}

std::string fit_svg(const FitResult& r) {
  return line_plot_svg("Fit of " + r.unit + ": measured, initial and fitted output", "time (s)", "output (MW)",
                       {{"measured", "#222222", r.t_s, r.measured_mw, false},
                        {"initial (scenario values)", "#aa3a28", r.t_s, r.initial_mw, true},
                        {"fitted", "#1d5f8a", r.t_s, r.fitted_mw, false}});
}

}  // namespace droopline::study
