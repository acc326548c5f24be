// Trajectories against an independent high-accuracy solution of the same equations: SciPy
// solve_ivp (DOP853, rtol 1e-9) in tests/reference/solve_reference.py, run by the ctest fixture
// `scipy_reference` with Debian's python3-scipy. Bar: max frequency difference 0.5 mHz at the
// default step (model notes sec. 10 F).
#include <fstream>
#include <sstream>

#include "support.hpp"

using namespace droopline;

namespace {

struct Table {
  std::vector<std::string> columns;
  std::vector<std::vector<double>> rows;
};

Table read_csv(const std::string& path) {
  std::ifstream in(path);
  INFO("reference file " << path << " (made by the scipy_reference test)");
  REQUIRE(in.good());
  Table t;
  std::string line;
  std::getline(in, line);
  std::stringstream hs(line);
  for (std::string c; std::getline(hs, c, ',');) t.columns.push_back(c);
  while (std::getline(in, line)) {
    std::stringstream ls(line);
    std::vector<double> row;
    for (std::string c; std::getline(ls, c, ',');) row.push_back(std::stod(c));
    t.rows.push_back(row);
  }
  return t;
}

void compare(const std::string& name) {
  const Table ref = read_csv(std::string(DROOPLINE_REFERENCE_DIR) + "/" + name + ".csv");
  const SystemDef def = test::load("tests/data/" + name + ".json");
  auto e = test::make(def);
  REQUIRE(ref.columns == e->series_columns());
  const auto every = std::llround(def.output_every_s / def.step_s);
  std::vector<double> row(e->series_width());
  double worst_f = 0.0, worst_p = 0.0;
  std::size_t checked = 0;
  for (const auto& r : ref.rows) {
    while (e->step_index() < std::llround(r[0] / def.step_s)) e->step();
    REQUIRE(e->step_index() % every == 0);
    e->sample(row);
    for (std::size_t i = 1; i < row.size(); ++i) {
      const double diff = std::fabs(row[i] - r[i]);
      if (i <= def.areas.size())
        worst_f = std::max(worst_f, diff);
      else
        worst_p = std::max(worst_p, diff);
    }
    ++checked;
  }
  INFO(name << ": " << checked << " rows, max |df| " << worst_f * 1e3 << " mHz, max |dP| " << worst_p << " MW");
  CHECK(checked == ref.rows.size());
  CHECK(checked > 100);
  CHECK(worst_f < 0.5e-3);
  CHECK(worst_p < 0.01);
}

}  // namespace

TEST_CASE("one area with every turbine type matches the SciPy solution") {
  compare("trajectory_single_area");
}

TEST_CASE("three areas in a ring match the SciPy solution") { compare("trajectory_three_areas"); }
