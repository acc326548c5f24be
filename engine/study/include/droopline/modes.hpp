#pragma once
/// Small-signal stability: the scenario linearized around its initial operating point,
/// numerically from the engine's own step, and the eigenvalues of that linear model with the
/// states that take part in each mode.
#include <complex>
#include <string>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "droopline/defs.hpp"

namespace droopline::study {

struct ModesOptions {
  double damping_threshold = 0.05;  ///< oscillatory modes below this damping ratio are flagged
  double perturbation = 1e-6;       ///< relative finite-difference step
  std::size_t top_states = 4;       ///< participating states listed per mode
  std::size_t max_states = 2000;    ///< larger models are refused (dense eigen-analysis is O(n^3))
};

struct Mode {
  std::complex<double> lambda;  ///< eigenvalue (1/s); oscillatory pairs listed once (Im > 0)
  std::string kind;             ///< `oscillatory`, `real` or `zero` (an integrator or the angle reference)
  double frequency_hz = 0.0;    ///< Im / 2 pi
  double damping_ratio = 1.0;   ///< -Re / |lambda|
  double time_constant_s = 0.0; ///< -1 / Re for real modes (negative: grows)
  bool flagged = false;         ///< unstable, or oscillatory below the damping threshold
  std::vector<std::pair<std::string, double>> participation;  ///< (state, share), largest first
};

struct ModesResult {
  std::vector<Mode> modes;          ///< least damped first
  std::vector<std::string> states;  ///< the states of the linear model
  double equilibrium_rate = 0.0;    ///< largest |dx/dt| at the operating point (0 at equilibrium)
  std::vector<std::string> notes;   ///< what the linear model leaves out
  std::string error;                ///< set when nothing could be computed
};

/// Linearizes a validated definition at t = 0 (deadbands, events, noise and discrete controls
/// left out: see notes) and computes its modes with Eigen.
ModesResult small_signal(const SystemDef& def, const ModesOptions& options = {});

nlohmann::ordered_json modes_to_json(const ModesResult& result, const ModesOptions& options);

}  // namespace droopline::study
