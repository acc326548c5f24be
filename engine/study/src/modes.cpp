#include "droopline/modes.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <Eigen/Dense>

#include "droopline/engine.hpp"
#include "droopline/format.hpp"

namespace droopline::study {

ModesResult small_signal(const SystemDef& base, const ModesOptions& opt) {
  ModesResult out;
  SystemDef def = base;
  def.events.clear();
  bool had_deadband = false, had_agc = false;
  for (UnitDef& u : def.units) {
    had_deadband = had_deadband || u.governor.deadband_hz > 0.0;
    u.governor.deadband_hz = 0.0;
  }
  for (const AreaDef& a : def.areas) had_agc = had_agc || a.agc.enabled;
  CheckResult checked = check(def);  // the events and deadbands changed: check again
  if (!checked.system) {
    for (const Issue& i : checked.issues)
      if (!i.warning) out.error += (out.error.empty() ? "" : "; ") + i.text();
    return out;
  }
  std::unique_ptr<Engine> engine = Engine::create(*checked.system);
  // A unit dispatched on a limit has a kink there: held for a push further, free for one back. A
  // central difference across it averages the two into a mode that does not exist (near
  // ln(1/2)/step), so the limit is moved 1 % of the rating away (the operating point stays) and
  // the modes are those of the free side; a note names the units.
  std::string limited;
  for (std::uint32_t u = 0; u < def.units.size(); ++u) {
    const UnitStatus st = engine->unit(UnitId{u}).status;
    if (st != UnitStatus::at_max && st != UnitStatus::at_min) continue;
    UnitDef& ud = def.units[u];
    const double margin = 0.01 * ud.rating_mw;
    if (st == UnitStatus::at_max) {
      ud.max_mw = ud.max_mw.value_or(ud.rating_mw) + margin;
      if (ud.turbine.type == TurbineType::gas)
        ud.turbine.load_limit_mw = ud.turbine.load_limit_mw.value_or(ud.rating_mw) + margin;
    } else {
      ud.min_mw = ud.min_mw.value_or(ud.turbine.type == TurbineType::battery ? -ud.rating_mw : 0.0) - margin;
    }
    limited += (limited.empty() ? "" : ", ") + ud.id + (st == UnitStatus::at_max ? " (upper)" : " (lower)");
  }
  if (!limited.empty()) {
    if (CheckResult widened = check(def); widened.system) {
      checked = std::move(widened);
      engine = Engine::create(*checked.system);
      out.notes.push_back("on a limit at the operating point: " + limited +
                          "; the modes are those of a disturbance that moves these units off it (one that pushes "
                          "them further holds them there: they then take no part)");
    }
  }
  Engine& e = *engine;
  const double h = def.step_s;
  const std::vector<double> x0 = e.state();
  const std::vector<std::string> names = e.state_names();
  const std::size_t n = x0.size();
  if (n > opt.max_states) {
    out.error = "the linear model would have " + std::to_string(n) + " states; at most " + std::to_string(opt.max_states) +
                " are analysed (a dense eigen-analysis grows with the cube of the states)";
    return out;
  }
  std::vector<double> xp(n), xm(n), fp(n), fm(n);
  e.step_state(x0, fp);
  for (std::size_t i = 0; i < n; ++i) out.equilibrium_rate = std::max(out.equilibrium_rate, std::abs(fp[i] - x0[i]) / h);

  // The one-step map's Jacobian by central differences: the engine's own equations and RK4.
  Eigen::MatrixXd ad(n, n);
  for (std::size_t j = 0; j < n; ++j) {
    const double eps = opt.perturbation * std::max(1.0, std::abs(x0[j]));
    xp = x0;
    xm = x0;
    xp[j] += eps;
    xm[j] -= eps;
    e.step_state(xp, fp);
    e.step_state(xm, fm);
    for (std::size_t i = 0; i < n; ++i) ad(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = (fp[i] - fm[i]) / (2 * eps);
  }
  // States that neither move nor move anything (unused integrators, units offline) leave.
  std::vector<Eigen::Index> keep;
  for (std::size_t j = 0; j < n; ++j) {
    const auto J = static_cast<Eigen::Index>(j);
    bool idle = true;
    for (Eigen::Index i = 0; i < static_cast<Eigen::Index>(n) && idle; ++i) {
      const double id = i == J ? 1.0 : 0.0;
      idle = std::abs(ad(i, J) - id) < 1e-13 && std::abs(ad(J, i) - id) < 1e-13;
    }
    if (!idle) keep.push_back(J);
  }
  const auto m = static_cast<Eigen::Index>(keep.size());
  Eigen::MatrixXd a(m, m);
  for (Eigen::Index i = 0; i < m; ++i)
    for (Eigen::Index j = 0; j < m; ++j) a(i, j) = ad(keep[static_cast<std::size_t>(i)], keep[static_cast<std::size_t>(j)]);
  for (Eigen::Index i : keep) out.states.push_back(names[static_cast<std::size_t>(i)]);

  Eigen::EigenSolver<Eigen::MatrixXd> es(a);
  if (es.info() != Eigen::Success) {
    out.error = "the eigenvalue solver did not converge";
    return out;
  }
  const Eigen::MatrixXcd v = es.eigenvectors();
  const Eigen::MatrixXcd w = v.inverse();  // rows: left eigenvectors
  for (Eigen::Index k = 0; k < m; ++k) {
    const std::complex<double> z = es.eigenvalues()(k);
    if (z.imag() < -1e-12) continue;  // the conjugate of a pair listed once
    Mode md;
    // Discrete to continuous: z = exp(lambda h) (RK4's amplification matches it to O((lambda h)^5)).
    md.lambda = std::log(z) / h;
    // Repeated real eigenvalues come out of the solver with a tiny imaginary part: not an oscillation.
    if (std::abs(md.lambda.imag()) < 1e-6 + 1e-3 * std::abs(md.lambda)) md.lambda = {md.lambda.real(), 0.0};
    const double mag = std::abs(md.lambda);
    if (mag < 1e-5) {  // slower than a day's time constant: an integrator or the angle reference
      md.kind = "zero";
    } else if (md.lambda.imag() > 0) {
      md.kind = "oscillatory";
      md.frequency_hz = md.lambda.imag() / (2 * std::numbers::pi);
      md.damping_ratio = -md.lambda.real() / mag;
      md.flagged = md.damping_ratio < opt.damping_threshold;
    } else {
      md.kind = "real";
      md.damping_ratio = md.lambda.real() < 0 ? 1.0 : -1.0;
      md.time_constant_s = -1.0 / md.lambda.real();
      md.flagged = md.lambda.real() > 1e-9;
    }
    // Participation factors p_ik = |v_ik w_ki|, as shares of the mode.
    std::vector<std::pair<std::string, double>> p;
    double total = 0.0;
    for (Eigen::Index i = 0; i < m; ++i) {
      const double pi = std::abs(v(i, k) * w(k, i));
      total += pi;
      p.emplace_back(out.states[static_cast<std::size_t>(i)], pi);
    }
    std::sort(p.begin(), p.end(), [](const auto& x, const auto& y) { return x.second > y.second; });
    for (std::size_t i = 0; i < std::min(opt.top_states, p.size()); ++i)
      md.participation.emplace_back(p[i].first, total > 0 ? p[i].second / total : 0.0);
    out.modes.push_back(std::move(md));
  }
  auto rank = [](const Mode& md) {
    if (md.kind == "zero") return 2.0;  // last
    return md.kind == "oscillatory" ? md.damping_ratio : 1.0 + std::tanh(-md.lambda.real());
  };
  std::stable_sort(out.modes.begin(), out.modes.end(), [&](const Mode& x, const Mode& y) { return rank(x) < rank(y); });
  out.notes.push_back("linearized at t = 0 around the initial operating point, from the engine's own step (RK4, h = " +
                      fmt_num(h) + " s); scheduled events left out");
  if (had_deadband) out.notes.push_back("deadbands taken out: the modes are those of the loops once the deviation is outside them");
  if (had_agc) out.notes.push_back("secondary control (discrete, every AGC period) is not part of the linear model");
  if (out.equilibrium_rate > 1e-6)
    out.notes.push_back("the initial point is not an equilibrium (largest rate " + fmt_num(out.equilibrium_rate) +
                        " per s): the modes describe motion about a drifting point");
  return out;
}

nlohmann::ordered_json modes_to_json(const ModesResult& r, const ModesOptions& opt) {
  nlohmann::ordered_json j;
  j["damping_threshold"] = opt.damping_threshold;
  j["states"] = r.states;
  j["equilibrium_rate"] = r.equilibrium_rate;
  j["notes"] = r.notes;
  j["modes"] = nlohmann::ordered_json::array();
  for (const Mode& m : r.modes) {
    nlohmann::ordered_json jm{{"kind", m.kind}, {"real_per_s", m.lambda.real()}, {"imag_rad_per_s", m.lambda.imag()}};
    if (m.kind == "oscillatory") {
      jm["frequency_hz"] = m.frequency_hz;
      jm["damping_ratio"] = m.damping_ratio;
    } else if (m.kind == "real") {
      jm["time_constant_s"] = m.time_constant_s;
    }
    jm["flagged"] = m.flagged;
    jm["participation"] = nlohmann::ordered_json::array();
    for (const auto& [s, p] : m.participation) jm["participation"].push_back({{"state", s}, {"share", p}});
    j["modes"].push_back(std::move(jm));
  }
  return j;
}

}  // namespace droopline::study
