// The initial operating point: islands over the ties in service, and the tie flows and angles
// that the per-area surplus implies (Newton-Raphson from the linear estimate).
#include <algorithm>
#include <cmath>
#include <map>
#include <numbers>

#include "droopline/format.hpp"
#include "droopline/validate.hpp"

namespace droopline {
namespace {

constexpr double kBalanceToleranceMw = 0.1;

std::string island_names(const SystemDef& def, const std::vector<int>& island, int which) {
  std::string names;
  for (std::size_t a = 0; a < def.areas.size(); ++a)
    if (island[a] == which) names += (names.empty() ? "" : ", ") + def.areas[a].id;
  return names;
}

struct Topology {
  std::vector<int> from, to;
  std::vector<bool> in_service;
};

Topology topology_of(const SystemDef& def, const std::map<std::string, std::size_t>& areas) {
  Topology t;
  for (const TieDef& tie : def.ties) {
    auto f = areas.find(tie.from), e = areas.find(tie.to);
    const bool ok = f != areas.end() && e != areas.end() && f->second != e->second;
    t.from.push_back(ok ? static_cast<int>(f->second) : 0);
    t.to.push_back(ok ? static_cast<int>(e->second) : 0);
    t.in_service.push_back(ok && tie.in_service);
  }
  return t;
}

std::map<std::string, std::size_t> plain_index(const SystemDef& def) {
  std::map<std::string, std::size_t> m;
  for (std::size_t i = 0; i < def.areas.size(); ++i) m.emplace(def.areas[i].id, i);
  return m;
}

// Dense Gaussian elimination with partial pivoting; returns false when singular.
bool solve_dense(std::vector<double>& a, std::vector<double>& b, std::size_t n) {
  for (std::size_t c = 0; c < n; ++c) {
    std::size_t piv = c;
    for (std::size_t r = c + 1; r < n; ++r)
      if (std::fabs(a[r * n + c]) > std::fabs(a[piv * n + c])) piv = r;
    if (std::fabs(a[piv * n + c]) < 1e-12) return false;
    if (piv != c) {
      for (std::size_t k = 0; k < n; ++k) std::swap(a[c * n + k], a[piv * n + k]);
      std::swap(b[c], b[piv]);
    }
    for (std::size_t r = c + 1; r < n; ++r) {
      const double f = a[r * n + c] / a[c * n + c];
      for (std::size_t k = c; k < n; ++k) a[r * n + k] -= f * a[c * n + k];
      b[r] -= f * b[c];
    }
  }
  for (std::size_t c = n; c-- > 0;) {
    double s = b[c];
    for (std::size_t k = c + 1; k < n; ++k) s -= a[c * n + k] * b[k];
    b[c] = s / a[c * n + c];
  }
  return true;
}

}  // namespace

std::vector<int> islands_of(std::size_t area_count, const std::vector<int>& tie_from, const std::vector<int>& tie_to,
                            const std::vector<bool>& in_service) {
  std::vector<int> parent(area_count);
  for (std::size_t i = 0; i < area_count; ++i) parent[i] = static_cast<int>(i);
  auto find = [&](int x) {
    while (parent[x] != x) x = parent[x] = parent[parent[x]];
    return x;
  };
  for (std::size_t t = 0; t < tie_from.size(); ++t)
    if (in_service[t]) parent[find(tie_from[t])] = find(tie_to[t]);
  // Number islands densely in order of their first area.
  std::vector<int> label(area_count, -1), island(area_count);
  int next = 0;
  for (std::size_t a = 0; a < area_count; ++a) {
    const int root = find(static_cast<int>(a));
    if (label[root] < 0) label[root] = next++;
    island[a] = label[root];
  }
  return island;
}

std::optional<InitialFlows> solve_initial_flows(const SystemDef& def, std::vector<Issue>& issues) {
  const std::size_t na = def.areas.size();
  const auto areas = plain_index(def);
  const Topology topo = topology_of(def, areas);
  const std::vector<int> island = islands_of(na, topo.from, topo.to, topo.in_service);

  std::vector<double> surplus(na, 0.0);
  for (std::size_t a = 0; a < na; ++a) surplus[a] = -def.areas[a].demand_mw;
  for (const UnitDef& u : def.units) {
    auto it = areas.find(u.area);
    if (it != areas.end() && u.online) surplus[it->second] += u.setpoint_mw;
  }

  InitialFlows out;
  out.angle_rad.assign(na, 0.0);
  out.flow_mw.assign(def.ties.size(), 0.0);
  const int n_islands = na ? *std::max_element(island.begin(), island.end()) + 1 : 0;
  bool ok = true;
  for (int isl = 0; isl < n_islands; ++isl) {
    std::vector<std::size_t> members;
    for (std::size_t a = 0; a < na; ++a)
      if (island[a] == isl) members.push_back(a);
    double gen = 0.0, dem = 0.0;
    for (std::size_t a : members) {
      dem += def.areas[a].demand_mw;
      gen += surplus[a] + def.areas[a].demand_mw;
    }
    if (std::fabs(gen - dem) > kBalanceToleranceMw) {
      const std::string where = members.size() == 1 ? "areas[" + std::to_string(members[0]) + "]" : "areas";
      issues.push_back({where,
                        "generation " + fmt_fixed(gen, 1) + " MW does not balance demand " + fmt_fixed(dem, 1) +
                            " MW in the island {" + island_names(def, island, isl) + "} (allowed difference " +
                            fmt_num(kBalanceToleranceMw) + " MW)",
                        false});
      ok = false;
      continue;
    }
    if (members.size() < 2) continue;
    // Newton-Raphson on the non-reference angles, from the linear (DC) estimate.
    const std::size_t n = members.size() - 1;
    std::vector<int> pos(na, -1);
    for (std::size_t k = 1; k < members.size(); ++k) pos[members[k]] = static_cast<int>(k - 1);
    std::vector<double> theta(na, 0.0);
    auto mismatch = [&](std::vector<double>& f, std::vector<double>* jac, bool linear) {
      f.assign(n, 0.0);
      if (jac) jac->assign(n * n, 0.0);
      for (std::size_t k = 1; k < members.size(); ++k) f[k - 1] = -surplus[members[k]];
      for (std::size_t t = 0; t < def.ties.size(); ++t) {
        if (!topo.in_service[t] || island[topo.from[t]] != isl) continue;
        const int a = topo.from[t], b = topo.to[t];
        const double d = theta[a] - theta[b], pm = def.ties[t].pmax_mw;
        const double flow = linear ? pm * d : pm * std::sin(d);
        const double slope = linear ? pm : pm * std::cos(d);
        if (pos[a] >= 0) f[pos[a]] += flow;
        if (pos[b] >= 0) f[pos[b]] -= flow;
        if (!jac) continue;
        auto add = [&](int r, int c, double v) {
          if (r >= 0 && c >= 0) (*jac)[r * n + c] += v;
        };
        add(pos[a], pos[a], slope);
        add(pos[a], pos[b], -slope);
        add(pos[b], pos[a], -slope);
        add(pos[b], pos[b], slope);
      }
    };
    std::vector<double> f, jac;
    bool converged = false;
    for (int iter = 0; iter < 60; ++iter) {
      mismatch(f, &jac, iter == 0);
      double worst = 0.0;
      for (double v : f) worst = std::max(worst, std::fabs(v));
      if (iter > 0 && worst < 1e-9) {
        converged = true;
        break;
      }
      std::vector<double> rhs(n);
      for (std::size_t k = 0; k < n; ++k) rhs[k] = -f[k];
      if (!solve_dense(jac, rhs, n)) break;
      for (std::size_t k = 1; k < members.size(); ++k) {
        double step = rhs[k - 1];
        step = std::clamp(step, -0.5, 0.5);  // damped: stay on the stable side of pull-out
        theta[members[k]] += step;
      }
    }
    bool stable = converged;
    for (std::size_t t = 0; t < def.ties.size() && stable; ++t)
      if (topo.in_service[t] && island[topo.from[t]] == isl &&
          std::fabs(theta[topo.from[t]] - theta[topo.to[t]]) >= std::numbers::pi / 2)
        stable = false;
    if (!stable) {
      double largest = 0.0;
      std::string which;
      for (std::size_t a : members)
        if (std::fabs(surplus[a]) > largest) {
          largest = std::fabs(surplus[a]);
          which = def.areas[a].id;
        }
      issues.push_back({"ties",
                        "the scheduled exchanges of the island {" + island_names(def, island, isl) +
                            "} exceed what its ties can carry below the 90 degree "
                            "pull-out angle (largest area surplus " +
                            fmt_fixed(largest, 1) + " MW in \"" + which + "\")",
                        false});
      ok = false;
      continue;
    }
    for (std::size_t a : members) out.angle_rad[a] = theta[a];
  }
  if (!ok) return std::nullopt;
  for (std::size_t t = 0; t < def.ties.size(); ++t)
    if (topo.in_service[t])
      out.flow_mw[t] = def.ties[t].pmax_mw * std::sin(out.angle_rad[topo.from[t]] - out.angle_rad[topo.to[t]]);
  return out;
}

}  // namespace droopline
