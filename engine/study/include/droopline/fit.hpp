#pragma once
/// Fitting a unit's model to a recording: the values of chosen parameters (paths as in sweeps,
/// relative to the unit) that minimise the squared error of the played-back output against the
/// measured one. Bounded derivative-free local searches (NLopt's BOBYQA on parameters scaled to
/// [0, 1]) from a seeded Latin hypercube of starting points; uncertainty from the sensitivity at
/// the optimum. A fitted model is a study result, not a plant setting.
#include <atomic>
#include <cstdint>
#include <functional>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "droopline/playback.hpp"

namespace droopline::study {

/// One fitted parameter: a path relative to the unit (`governor.droop`, `turbine.steam_chest_s`,
/// `ramp_mw_per_s`) and its bounds.
struct FitParam {
  std::string path;
  double lo = 0.0, hi = 0.0;
};

/// Parses `PATH=LO:HI` (LO < HI); nullopt with `error` set when malformed.
std::optional<FitParam> parse_fit_param(const std::string& spec, std::string& error);

/// One fit: a unit (the playback's single unit), its recording and the parameters.
struct FitSpec {
  PlaybackSpec playback;  ///< exactly one unit
  std::vector<FitParam> params;
  unsigned starts = 4;  ///< local searches, from a seeded Latin hypercube
  std::uint64_t seed = 1;
  unsigned max_evaluations = 150;  ///< per local search
};

/// What a fit found.
struct FitResult {
  std::string unit;
  std::vector<std::string> paths;
  std::vector<double> initial;  ///< the scenario's values (s)
  std::vector<double> values;   ///< fitted
  std::vector<double> sigma;    ///< 1-sigma uncertainty (NaN when the sensitivity is singular)
  std::vector<std::vector<double>> correlation;
  double rmse_before_mw = 0.0, rmse_after_mw = 0.0, r2_before = 0.0, r2_after = 0.0;
  std::size_t samples = 0, evaluations = 0;
  std::vector<std::string> warnings;
  std::vector<double> t_s, measured_mw, initial_mw, fitted_mw;  ///< the series compared
  nlohmann::ordered_json fragment;  ///< the unit as in a scenario file, with the fitted values
};

/// Checks a fit before anything runs: the unit, the recording's overlap with the scenario, each path
/// resolving to a number of the unit, LO < HI and both bounds accepted by the scenario's checks.
/// Every problem as one line of `error`.
bool check_fit(const FitSpec& spec, std::string& error);

/// Progress and cancellation of `run_fits`, both optional (the service's fit jobs use them).
struct FitControl {
  /// Called from the search threads after each model run with the runs done so far and the sum of
  /// the fits' `fit_budget`s (searches that converge early leave the count short of it).
  std::function<void(std::uint64_t done, std::uint64_t total)> progress;
  /// Checked before every model run of the searches; once it is true they stop, and every fit comes
  /// back as nullopt with the error "cancelled".
  const std::atomic<bool>* cancel = nullptr;
};

/// The model runs a fit may take: starts x max_evaluations and its 2 + 2 x params final runs.
std::uint64_t fit_budget(const FitSpec& spec);

/// Runs several fits, their local searches spread over `threads` (0: one per core). A fit that
/// cannot run comes back as nullopt with its reason in `errors` (same index).
std::vector<std::optional<FitResult>> run_fits(const std::vector<FitSpec>& specs, unsigned threads,
                                               std::vector<std::string>& errors, const FitControl& control = {});

/// The result as JSON: `{"unit", "params": {PATH: value}, "uncertainty": {PATH: sigma}, "initial",
/// "rmse_before", "rmse_after", "r2_before", "r2_after", "correlation", "warnings", ...}`.
nlohmann::ordered_json fit_to_json(const FitResult& r);
/// Measured, initial and fitted output against time.
std::string fit_svg(const FitResult& r);

}  // namespace droopline::study
