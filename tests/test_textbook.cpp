// Published worked examples and facts of the trade, to the tolerances of the model notes (sec. 10).
#include <algorithm>
#include <numbers>

#include "support.hpp"

using namespace droopline;

namespace {

const Disturbance& first_disturbance(const Engine& e) {
  REQUIRE_FALSE(e.disturbances().empty());
  return e.disturbances().front();
}

// Largest |f - f_ref| over [t0, t1): the amplitude of an oscillation around f_ref.
double swing_amplitude(Engine& e, double t0, double t1, double f_ref) {
  test::run_until(e, t0);
  double amp = 0.0;
  while (e.time_s() < t1) {
    e.step();
    amp = std::max(amp, std::fabs(e.area(AreaId{0}).f_hz - f_ref));
  }
  return amp;
}

}  // namespace

// Source: H. Saadat, Power System Analysis, ch. 12 worked example (isolated station): 60 Hz,
// 250 MW unit, H 5 s, R 0.05, governor 0.2 s, turbine 0.5 s, D 0.8 pu, 0.2 pu load step.
TEST_CASE("isolated station: published steady-state frequency deviation -0.5769 Hz") {
  auto e = test::make(test::load("scenarios/textbook_isolated_station.json"));
  e->run();
  // Published: df = -0.2 / (20 + 0.8) pu = -0.009615 pu = -0.5769 Hz. Tolerance 1 mHz.
  CHECK(test::freq(*e, "station") - 60.0 == Approx(-0.5769).margin(0.001));
  const Disturbance& d = first_disturbance(*e);
  REQUIRE(d.settling_hz);
  CHECK(*d.settling_hz - 60.0 == Approx(-0.5769).margin(0.001));
  CHECK(d.predicted_settling_hz - 60.0 == Approx(-0.5769).margin(0.001));
}

// Regression values derived from the same linear model (model notes sec. 10 A; not published).
TEST_CASE("isolated station: nadir, its time and the 500 ms RoCoF") {
  auto e = test::make(test::load("scenarios/textbook_isolated_station.json"));
  e->run();
  e->close_disturbances();
  const Disturbance& d = first_disturbance(*e);
  REQUIRE(d.nadir_hz);
  CHECK(*d.nadir_hz - 60.0 == Approx(-0.893).margin(0.002));
  CHECK(*d.nadir_at_s - d.at_s == Approx(1.22).margin(0.02));
  REQUIRE(d.rocof_hz_per_s);
  CHECK(*d.rocof_hz_per_s == Approx(-1.111).margin(0.001));
  CHECK(d.delta_mw == Approx(50.0));
  REQUIRE(d.response_mw_per_0p1hz);
  // 50 MW over 0.5769 Hz: 8.67 MW per 0.1 Hz.
  CHECK(*d.response_mw_per_0p1hz == Approx(50.0 / 5.769).epsilon(0.002));
}

// Source: Saadat ch. 12 (Routh criterion on s^3 + 7.08 s^2 + 10.56 s + 0.8 + 1/R): stable only for
// 1/R < 73.965. R = 0.0125 (1/R = 80) must grow, R = 0.0145 (1/R = 69) must decay.
TEST_CASE("isolated station: stability limit of the droop gain") {
  auto with_droop = [](double r) {
    SystemDef d = test::load("scenarios/textbook_isolated_station.json");
    d.units[0].governor.droop = r;
    d.events[0].command.mw = 1.0;  // small, so no limit is reached while it swings
    d.duration_s = 80.0;
    return test::make(d);
  };
  auto unstable = with_droop(0.0125);
  const double f_end_u = 60.0 - 1.0 / (250.0 / (0.0125 * 60.0) + 200.0 / 60.0);
  const double early_u = swing_amplitude(*unstable, 5.0, 15.0, f_end_u);
  const double late_u = swing_amplitude(*unstable, 60.0, 70.0, f_end_u);
  CHECK(late_u > 1.5 * early_u);

  auto stable = with_droop(0.0145);
  const double f_end_s = 60.0 - 1.0 / (250.0 / (0.0145 * 60.0) + 200.0 / 60.0);
  const double early_s = swing_amplitude(*stable, 5.0, 15.0, f_end_s);
  const double late_s = swing_amplitude(*stable, 60.0, 70.0, f_end_s);
  CHECK(late_s < 0.67 * early_s);
}

// Source: Saadat ch. 12 (isolated station with integral control): the steady error is zero.
TEST_CASE("isolated station: integral (secondary) control removes the steady error") {
  SystemDef d = test::load("scenarios/textbook_isolated_station.json");
  d.areas[0].agc.enabled = true;
  d.areas[0].agc.ki_per_s = 0.1;
  d.areas[0].agc.period_s = 0.0;  // every step
  d.units[0].agc_share = 1.0;
  d.duration_s = 200.0;
  auto e = test::make(d);
  e->run();
  CHECK(test::freq(*e, "station") == Approx(60.0).margin(0.001));
  CHECK(test::power(*e, "unit1") == Approx(210.0).margin(0.5));
}

// Source: Saadat ch. 12 two-area worked example: df = -0.005 pu = -0.3 Hz; area 1 generation
// +100 MW, area 2 +80 MW; tie flow 1->2 changes by -84.5 MW; load relief 3 and 4.5 MW.
TEST_CASE("two areas: published steady state after 187.5 MW in area 1") {
  auto e = test::make(test::load("scenarios/textbook_two_areas.json"));
  e->run();
  CHECK(test::freq(*e, "area1") - 60.0 == Approx(-0.3).margin(0.001));
  CHECK(test::freq(*e, "area2") - 60.0 == Approx(-0.3).margin(0.001));
  CHECK(test::power(*e, "gen1") - 800.0 == Approx(100.0).margin(0.5));
  CHECK(test::power(*e, "gen2") - 800.0 == Approx(80.0).margin(0.5));
  CHECK(test::flow(*e, "tie12") == Approx(-84.5).margin(0.5));
  const AreaState a1 = e->area(*e->find_area("area1"));
  const AreaState a2 = e->area(*e->find_area("area2"));
  CHECK(800.0 + 187.5 - a1.demand_mw == Approx(3.0).margin(0.5));
  CHECK(800.0 - a2.demand_mw == Approx(4.5).margin(0.5));
}

// Source: Saadat ch. 12 two-area example with tie-line-bias control: frequency and tie flow return
// to schedule and area 1 carries the whole 187.5 MW. Tolerance 1 mHz, 0.5 MW.
TEST_CASE("two areas: tie-line bias control returns frequency and exchange to schedule") {
  auto e = test::make(test::load("scenarios/textbook_two_areas_agc.json"));
  e->run();
  CHECK(test::freq(*e, "area1") == Approx(60.0).margin(0.001));
  CHECK(test::freq(*e, "area2") == Approx(60.0).margin(0.001));
  CHECK(test::flow(*e, "tie12") == Approx(0.0).margin(0.5));
  CHECK(test::power(*e, "gen1") - 800.0 == Approx(187.5).margin(0.5));
  CHECK(test::power(*e, "gen2") - 800.0 == Approx(0.0).margin(0.5));
}

// Source: J. D. Glover, M. S. Sarma, T. J. Overbye, Power System Analysis and Design, 5th ed.,
// problem 12.5: df = +0.4 Hz; outputs change by -44.4, -50.0, -55.6 MW.
TEST_CASE("droop sharing of a 150 MW load drop among three units") {
  auto e = test::make(test::load("scenarios/textbook_droop_sharing.json"));
  e->run();
  CHECK(test::freq(*e, "system") - 60.0 == Approx(0.4).margin(0.001));
  CHECK(test::power(*e, "u200") - 150.0 == Approx(-44.4).margin(0.1));
  CHECK(test::power(*e, "u300") - 200.0 == Approx(-50.0).margin(0.1));
  CHECK(test::power(*e, "u500") - 350.0 == Approx(-55.6).margin(0.1));
  e->close_disturbances();
  const Disturbance& d = first_disturbance(*e);
  CHECK(d.zenith);
  CHECK(d.predicted_settling_hz == Approx(60.4).margin(0.001));
  REQUIRE(d.units.size() == 3);
  CHECK(d.units[0].predicted_mw == Approx(-44.44).margin(0.05));
}

// Common practice (swing equation): right after a step imbalance dP,
// df/dt = -dP * f0 / (2 * sum(H*S)); tolerance 1 % on the first step's slope.
TEST_CASE("initial RoCoF follows the swing equation, and more inertia falls slower") {
  for (double h_s : {2.0, 5.0, 9.0}) {
    SystemDef d = test::one_area(50.0, 500.0, 300.0);
    d.units[0].inertia_s = h_s;
    d.events.push_back({1.0, test::load_step("A", 30.0)});
    auto e = test::make(d);
    test::run_until(*e, 1.0);
    const double f_before = test::freq(*e, "A");
    e->step();
    const double slope = (test::freq(*e, "A") - f_before) / d.step_s;
    const double expected = -30.0 * 50.0 / (2.0 * h_s * 500.0);
    INFO("H = " << h_s);
    CHECK(slope == Approx(expected).epsilon(0.01));
  }
}

// Common practice (power transfer): P = (E V / X) sin(delta), largest at 90 degrees; raising the
// sending end's mechanical power moves the operating angle up until the transfer matches it.
TEST_CASE("power transfer: operating angle from the exchange, pull-out at 90 degrees") {
  auto two = [](double export_mw) {
    SystemDef d = test::load("scenarios/textbook_two_areas.json");
    d.events.clear();
    d.units[0].rating_mw = d.units[1].rating_mw = 3000.0;
    d.units[0].setpoint_mw = 800.0 + export_mw;  // area 1 makes the exchange ...
    d.areas[1].demand_mw = 800.0 + export_mw;    // ... that area 2 consumes
    return d;
  };
  double last_angle = -1.0;
  for (double p : {0.0, 500.0, 1000.0, 1500.0, 1900.0}) {
    auto e = test::make(two(p));
    const TieState t = e->tie(*e->find_tie("tie12"));
    CHECK(t.flow_mw == Approx(p).margin(1e-6));
    CHECK(t.angle_deg == Approx(std::asin(p / 2000.0) * 180.0 / std::numbers::pi).margin(1e-6));
    CHECK(t.angle_deg > last_angle);
    last_angle = t.angle_deg;
  }
  // Above the pull-out power there is no operating point.
  CHECK_FALSE(check(two(2050.0)).system);

  // Raise area 1's setpoint by 300 MW against area 2: the angle moves up and settles where the
  // transfer matches the extra power that area 2's droop no longer has to make.
  SystemDef d = two(500.0);
  d.events.push_back({1.0, test::unit_cmd(CommandKind::setpoint, "gen1", 1600.0)});
  auto e = test::make(d);
  const double a0 = e->tie(*e->find_tie("tie12")).angle_deg;
  e->run();
  const TieState t = e->tie(*e->find_tie("tie12"));
  CHECK(t.angle_deg > a0);
  CHECK(t.flow_mw == Approx(2000.0 * std::sin(t.angle_deg * std::numbers::pi / 180.0)).margin(0.5));
  CHECK(t.flow_mw > 500.0);
}
