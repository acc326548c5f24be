// Small-signal modes against the Routh stability limit of the isolated station and against the
// oscillation the engine itself simulates.
#include <algorithm>
#include <numbers>

#include "droopline/modes.hpp"
#include "support.hpp"

using namespace droopline;
using namespace droopline::study;

namespace {

SystemDef station_with_gain(double k) {  // k = 1/R on the unit's rating
  SystemDef d = test::load("scenarios/textbook_isolated_station.json");
  d.units[0].governor.droop = 1.0 / k;
  return d;
}

const Mode& least_damped(const ModesResult& r) {
  REQUIRE_FALSE(r.modes.empty());
  REQUIRE(r.modes.front().kind == "oscillatory");
  return r.modes.front();
}

}  // namespace

// Source: the model notes' check A (H. Saadat, Power System Analysis, ch. 12): characteristic
// polynomial s^3 + 7.08 s^2 + 10.56 s + 0.8 + 1/R, stable only for 1/R < 73.965 (Routh); at the
// limit the pair sits on the imaginary axis at w = sqrt(10.56) rad/s.
TEST_CASE("isolated station: the least-damped pair crosses zero at 1/R = 73.965") {
  const ModesResult stable = small_signal(station_with_gain(73.0));
  const ModesResult unstable = small_signal(station_with_gain(75.0));
  CHECK(least_damped(stable).lambda.real() < 0);
  CHECK(least_damped(stable).flagged);  // below 5 % damping
  CHECK(least_damped(unstable).lambda.real() > 0);
  CHECK(least_damped(unstable).flagged);
  double lo = 60, hi = 90;
  for (int i = 0; i < 40; ++i) {
    const double mid = 0.5 * (lo + hi);
    (least_damped(small_signal(station_with_gain(mid))).lambda.real() < 0 ? lo : hi) = mid;
  }
  CHECK(lo == Approx(73.965).margin(0.02));
  CHECK(least_damped(small_signal(station_with_gain(lo))).lambda.imag() == Approx(std::sqrt(10.56)).epsilon(0.002));
  // The three states of the loop take part; the angle is the reference (a zero mode).
  const auto& p = least_damped(stable).participation;
  CHECK(p.size() >= 3);
  CHECK(stable.modes.back().kind == "zero");
  CHECK(stable.modes.back().participation.front().first == "station.angle_rad");
}

// The modes must describe what the engine does: a small step on the lightly damped station,
// simulated, rings at the pair's frequency and decays at its rate.
TEST_CASE("a lightly damped case: the simulated ringing matches the least-damped pair") {
  SystemDef d = station_with_gain(68.0);
  d.events[0].command.mw = 2.0;  // small: stays linear, no limit near
  d.duration_s = 40.0;
  const Mode m = least_damped(small_signal(d));
  INFO("lambda = " << m.lambda.real() << " +/- j" << m.lambda.imag());
  CHECK(m.damping_ratio < 0.05);

  auto e = test::make(d);
  const double f_final = 60.0 - 60.0 * (2.0 / 250.0) / (68.0 + 0.8);
  std::vector<std::pair<double, double>> peaks;  // (t, deviation) at local maxima after the step
  double a = 0, b = 0;
  while (!e->finished()) {
    e->step();
    const double c = e->area(AreaId{0}).f_hz - f_final;
    if (e->time_s() > 4.0 && b > a && b >= c && b > 0) peaks.emplace_back(e->time_s() - d.step_s, b);
    a = b;
    b = c;
  }
  REQUIRE(peaks.size() >= 6);
  const double period = (peaks[5].first - peaks[0].first) / 5.0;
  const double decay = std::log(peaks[0].second / peaks[5].second) / (peaks[5].first - peaks[0].first);
  CHECK(2 * std::numbers::pi / period == Approx(m.lambda.imag()).epsilon(0.01));
  CHECK(decay == Approx(-m.lambda.real()).epsilon(0.03));
}

TEST_CASE("modes of the shipped scenarios: finite, sorted, with notes") {
  for (const char* f : {"scenarios/demo_three_areas.json", "scenarios/textbook_two_areas.json",
                        "scenarios/demo_island.json", "scenarios/demo_unit_trip_shedding.json"}) {
    INFO(f);
    const ModesResult r = small_signal(test::load(f));
    REQUIRE(r.error.empty());
    REQUIRE_FALSE(r.modes.empty());
    for (const Mode& m : r.modes) {
      CHECK(std::isfinite(m.lambda.real()));
      CHECK(std::isfinite(m.lambda.imag()));
      CHECK(m.lambda.real() < 1e-6);  // the shipped cases are stable
    }
    CHECK_FALSE(r.notes.empty());
  }
  // The two-area tie: an inter-area pair with both areas' angles taking part.
  const ModesResult two = small_signal(test::load("scenarios/textbook_two_areas.json"));
  const Mode& inter = two.modes.front();
  CHECK(inter.kind == "oscillatory");
  bool both = false;
  for (const auto& [s, share] : inter.participation) both = both || s == "area2.angle_rad";
  CHECK(both);
}

TEST_CASE("a unit on its limit: no mode that does not exist, and a note naming the state") {
  // The isolated station's unit dispatched at its maximum: its valve is held there for a rise in
  // demand and free for a fall. A central difference across that kink averages the two into a
  // fast real mode near ln(1/2)/step (about -69 1/s at 0.01 s) that the system does not have.
  SystemDef d = test::load("scenarios/textbook_isolated_station.json");
  d.units[0].max_mw = d.units[0].setpoint_mw;
  const ModesResult at_max = small_signal(d);
  REQUIRE(at_max.error.empty());
  for (const Mode& m : at_max.modes) CHECK(m.lambda.real() > -20.0);  // the fastest lag is 0.2 s: -5 1/s
  CHECK(std::any_of(at_max.notes.begin(), at_max.notes.end(),
                    [](const std::string& n) { return n.rfind("on a limit at the operating point: ", 0) == 0; }));
  // Off the limit the modes are the same as on its free side, and no such note is given.
  d.units[0].max_mw = d.units[0].setpoint_mw + 50.0;
  const ModesResult free = small_signal(d);
  CHECK(std::none_of(free.notes.begin(), free.notes.end(),
                     [](const std::string& n) { return n.rfind("on a limit", 0) == 0; }));
  REQUIRE(free.modes.size() == at_max.modes.size());
  for (std::size_t i = 0; i < free.modes.size(); ++i)
    CHECK(std::abs(free.modes[i].lambda - at_max.modes[i].lambda) < 1e-4 * std::abs(free.modes[i].lambda) + 1e-6);
}
