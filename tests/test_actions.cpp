// The operator actions: a unit's start-up time, a controlled stop, a ramped exchange schedule,
// shedding by hand and restoration (with the re-arming of stages), and the three modes of
// secondary control; each checked against the droop law or the balance it must settle to, and a
// clone taken while they are in progress.
#include <algorithm>
#include <string>
#include <vector>

#include "support.hpp"

using namespace droopline;

namespace {

using test::load_step;
using test::unit_cmd;

Command area_cmd(CommandKind kind, const char* area, double mw = 0.0) {
  Command c;
  c.kind = kind;
  c.area = area;
  c.mw = mw;
  return c;
}

Command restore_all(const char* area) {
  Command c = area_cmd(CommandKind::restore, area);
  c.all_shed = true;
  return c;
}

Command agc_mode(const char* area, AgcMode mode) {
  Command c = area_cmd(CommandKind::agc, area);
  c.enabled = true;
  c.agc_mode = mode;
  return c;
}

// One area: G1 500 MW at 300, G2 200 MW at 100, demand 400, D = 1: kd1 = 200, kd2 = 80, dmp = 8 MW/Hz.
SystemDef one_area_two_units() {
  SystemDef d = test::one_area(50.0, 500.0, 300.0);
  d.areas[0].demand_mw = 400.0;
  UnitDef g2 = d.units[0];
  g2.id = "G2";
  g2.rating_mw = 200.0;
  g2.setpoint_mw = 100.0;
  d.units.push_back(g2);
  return d;
}

// Two equal areas over one tie, secondary control tuned but off: kd = 400, dmp = 12 MW/Hz each.
SystemDef two_areas() {
  SystemDef d = test::two_areas(2000.0, 400.0);
  d.duration_s = 600.0;
  for (UnitDef& u : d.units) u.agc_share = 1.0;
  for (AreaDef& a : d.areas) {
    a.agc.ki_per_s = 0.1;
    a.agc.period_s = 1.0;
  }
  return d;
}

// One area, G1 500 MW at 300, and G2 200 MW offline with this start-up time.
SystemDef with_offline_g2(double start_up_s) {
  SystemDef d = test::one_area(50.0, 500.0, 300.0);
  UnitDef g2 = d.units[0];
  g2.id = "G2";
  g2.rating_mw = 200.0;
  g2.setpoint_mw = 0.0;
  g2.online = false;
  g2.start_up_s = start_up_s;
  d.units.push_back(g2);
  return d;
}

std::vector<Notice> notices_of(Engine& e, NoticeKind kind) {
  std::vector<Notice> out;
  for (Notice& n : e.take_notices())
    if (n.kind == kind) out.push_back(std::move(n));
  return out;
}

std::string texts(Engine& e) {
  std::string out;
  for (const Notice& n : e.take_notices()) out += describe(e.def(), n) + "\n";
  return out;
}

std::string issue_text(const ApplyResult& r) { return r.issues.empty() ? std::string() : r.issues[0].text(); }

}  // namespace

TEST_CASE("start-up time: starting adds nothing until it synchronises, then the droop law holds") {
  SystemDef d = with_offline_g2(20.0);
  d.events.push_back({1.0, unit_cmd(CommandKind::unit_start, "G2", 100.0)});
  auto e = test::make(d);
  const double m0 = e->area(AreaId{0}).inertia_mws_per_hz;
  test::run_until(*e, 20.99);
  const UnitState starting = e->unit(*e->find_unit("G2"));
  CHECK(starting.status == UnitStatus::starting);
  CHECK(std::string(to_string(starting.status)) == "starting");
  CHECK_FALSE(is_synchronised(starting.status));
  CHECK(starting.p_mw == 0.0);
  CHECK(e->area(AreaId{0}).inertia_mws_per_hz == m0);  // offline for inertia
  CHECK(test::freq(*e, "A") == Approx(50.0).margin(1e-12));
  CHECK(e->disturbances().empty());
  CHECK(texts(*e) == "unit G2 starting: synchronises in 20 s, then loads to 100 MW\n");
  // Refused with words while it starts.
  CHECK(issue_text(test::apply(*e, {unit_cmd(CommandKind::unit_start, "G2", 50.0)})) ==
        "command.unit: unit \"G2\" is already starting (it synchronises at 21 s)");
  CHECK(issue_text(test::apply(*e, {unit_cmd(CommandKind::unit_trip, "G2")})) ==
        "command.unit: unit \"G2\" is starting, not yet online (it synchronises at 21 s)");
  CHECK(issue_text(test::apply(*e, {unit_cmd(CommandKind::unit_start, "G1", 50.0)})) ==
        "command.unit: unit \"G1\" is already online");
  e->step();  // t = 21.00: 20 s after the start
  CHECK(e->time_s() == 21.0);
  CHECK(is_synchronised(e->unit(*e->find_unit("G2")).status));
  CHECK(e->area(AreaId{0}).inertia_mws_per_hz == Approx(m0 * (1.0 + 200.0 / 500.0)));
  const std::vector<Notice> sync = notices_of(*e, NoticeKind::unit_synchronised);
  REQUIRE(sync.size() == 1);
  CHECK(sync[0].t_s == 21.0);
  REQUIRE(e->disturbances().size() == 1);
  CHECK(e->disturbances()[0].at_s == 21.0);
  CHECK(e->disturbances()[0].kind == CommandKind::unit_start);
  e->run();
  // 100 MW surplus shared by both droops and the load: df = 100 / (kd1 + kd2 + dmp).
  CHECK(test::freq(*e, "A") == Approx(50.0 + 100.0 / (200.0 + 80.0 + 6.0)).margin(1e-3));
}

TEST_CASE("start-up time 0 starts at once, as before") {
  auto e = test::make(with_offline_g2(0.0));
  REQUIRE(test::apply(*e, {unit_cmd(CommandKind::unit_start, "G2", 100.0)}).ok);
  CHECK(is_synchronised(e->unit(*e->find_unit("G2")).status));
  CHECK(e->disturbances().size() == 1);
}

TEST_CASE("controlled stop: the setpoint ramps to zero, the unit goes offline, no disturbance") {
  SystemDef d = one_area_two_units();
  d.duration_s = 200.0;
  Command stop = unit_cmd(CommandKind::unit_stop, "G2");
  stop.ramp_mw_per_s = 10.0;
  d.events.push_back({1.0, stop});
  auto e = test::make(d);
  test::run_until(*e, 6.0);
  const UnitState half = e->unit(*e->find_unit("G2"));
  CHECK(half.status == UnitStatus::stopping);
  CHECK(half.setpoint_mw == Approx(50.0).margin(1e-9));  // 100 MW - 5 s * 10 MW/s
  CHECK(texts(*e) == "unit G2 stopping: unloading at 10 MW/s, then offline\n");
  CHECK(issue_text(test::apply(*e, {stop})) == "command.unit: unit \"G2\" is already stopping");
  Command sp = unit_cmd(CommandKind::setpoint, "G2", 80.0);
  CHECK(issue_text(test::apply(*e, {sp})) == "command.unit: unit \"G2\" is stopping: its setpoint is ramping to zero");
  CHECK(issue_text(test::apply(*e, {unit_cmd(CommandKind::unit_start, "G2", 80.0)})) ==
        "command.unit: unit \"G2\" is stopping: start it again once it is offline");
  e->run();
  CHECK(e->unit(*e->find_unit("G2")).status == UnitStatus::offline);
  CHECK(e->unit(*e->find_unit("G2")).p_mw == 0.0);
  CHECK(e->disturbances().empty());
  const std::vector<Notice> off = notices_of(*e, NoticeKind::unit_stopped);
  REQUIRE(off.size() == 1);
  // Without secondary control the frequency stays low: at zero setpoint G2 still gives its droop
  // answer, kd2 * 100 / (kd1 + kd2 + dmp), when its breaker opens (the output has settled).
  CHECK(off[0].value == Approx(80.0 * 100.0 / 288.0).margin(0.3));
  // G1 alone then carries the 100 MW: df = -100 / (kd1 + dmp).
  CHECK(test::freq(*e, "A") == Approx(50.0 - 100.0 / 208.0).margin(1e-3));
  CHECK(issue_text(test::apply(*e, {stop})) == "command.unit: unit \"G2\" is not online");
}

TEST_CASE("controlled stop: shallower than a trip of the same unit, and clean under secondary control") {
  SystemDef d = one_area_two_units();
  d.duration_s = 150.0;
  d.areas[0].agc.enabled = true;
  d.areas[0].agc.ki_per_s = 0.1;
  d.areas[0].agc.period_s = 1.0;
  d.units[0].agc_share = 1.0;
  d.units[1].agc_share = 1.0;
  SystemDef trip = d;
  Command stop = unit_cmd(CommandKind::unit_stop, "G2");
  stop.ramp_mw_per_s = 5.0;
  d.events.push_back({1.0, stop});
  trip.events.push_back({1.0, unit_cmd(CommandKind::unit_trip, "G2")});
  auto lowest = [](const SystemDef& def) {
    auto e = test::make(def);
    double low = 1e9;
    while (!e->finished()) {
      e->step();
      low = std::min(low, test::freq(*e, "A"));
    }
    return std::pair{low, std::move(e)};
  };
  auto [stop_low, e] = lowest(d);
  auto [trip_low, t] = lowest(trip);
  CHECK(trip_low < 49.75);
  CHECK(stop_low > trip_low + 0.1);
  CHECK(e->unit(*e->find_unit("G2")).status == UnitStatus::offline);
  CHECK(test::freq(*e, "A") == Approx(50.0).margin(2e-3));
  CHECK(test::power(*e, "G1") == Approx(400.0).margin(0.5));
  const std::vector<Notice> off = notices_of(*e, NoticeKind::unit_stopped);
  REQUIRE(off.size() == 1);
  CHECK(off[0].value == Approx(0.0).margin(2.0));  // within 1 % of rating: no step at the breaker
  CHECK(e->disturbances().empty());
}

TEST_CASE("controlled stop: the last synchronous unit of an area is refused, the default rate is 1 % of rating") {
  SystemDef d = test::one_area(50.0, 500.0, 300.0);
  auto e = test::make(d);
  CHECK(
      issue_text(test::apply(*e, {unit_cmd(CommandKind::unit_stop, "G1")})) ==
      "command.unit: unit \"G1\" is the last synchronous unit running in area \"A\": stopping it would leave the area "
      "without inertia");
  auto f = test::make(one_area_two_units());
  REQUIRE(test::apply(*f, {unit_cmd(CommandKind::unit_stop, "G2")}).ok);
  CHECK(texts(*f) == "unit G2 stopping: unloading at 2 MW/s, then offline\n");  // 1 % of 200 MW per second
  // Both units stopping in one batch would leave none.
  auto g = test::make(one_area_two_units());
  CHECK(issue_text(test::apply(*g, {unit_cmd(CommandKind::unit_stop, "G2"), unit_cmd(CommandKind::unit_stop, "G1")})) ==
        "commands[1].unit: unit \"G1\" is the last synchronous unit running in area \"A\": stopping it would leave "
        "the area without inertia");
}

TEST_CASE("schedule: a ramped change on both sides moves the tie, frequency returns") {
  SystemDef d = two_areas();
  for (AreaDef& a : d.areas) a.agc.enabled = true;
  Command west = area_cmd(CommandKind::schedule, "west", 100.0);
  west.over_s = 20.0;
  Command east = area_cmd(CommandKind::schedule, "east", -100.0);
  east.over_s = 20.0;
  d.events.push_back({10.0, west});
  d.events.push_back({10.0, east});
  auto e = test::make(d);
  test::run_until(*e, 20.0);
  CHECK(e->area(*e->find_area("west")).scheduled_export_mw == Approx(50.0).margin(1e-9));  // half way
  CHECK(texts(*e) ==
        "scheduled export of area west from 0.0 to 100 MW over 20 s\n"
        "scheduled export of area east from 0.0 to -100 MW over 20 s\n");
  test::run_until(*e, 30.0);
  CHECK(e->area(*e->find_area("west")).scheduled_export_mw == 100.0);
  e->run();
  CHECK(test::flow(*e, "link") == Approx(100.0).margin(0.5));
  CHECK(test::freq(*e, "west") == Approx(50.0).margin(1e-3));
  CHECK(test::power(*e, "Gw") == Approx(700.0).margin(0.5));
}

TEST_CASE("schedule: an inconsistent island settles off nominal by the sum of schedules over the biases") {
  // ACE_w = P - s_w + B df = 0 and ACE_e = -P - s_e + B df = 0 give df = (s_w + s_e) / (2B) and
  // P = s_w - B df: with s_w = 60, s_e = 0 and B = 412 MW/Hz, df = 0.0728 Hz and P = 30 MW.
  SystemDef d = two_areas();
  for (AreaDef& a : d.areas) {
    a.agc.enabled = true;
    a.agc.bias_mw_per_hz = 412.0;
  }
  d.events.push_back({10.0, area_cmd(CommandKind::schedule, "west", 60.0)});
  auto e = test::make(d);
  e->run();
  CHECK(test::freq(*e, "west") == Approx(50.0 + 60.0 / 824.0).margin(1e-3));
  CHECK(test::flow(*e, "link") == Approx(30.0).margin(0.5));
  CHECK(e->area(*e->find_area("west")).ace_mw == Approx(0.0).margin(0.5));
  CHECK(e->area(*e->find_area("east")).ace_mw == Approx(0.0).margin(0.5));
}

TEST_CASE("secondary-control modes: constant frequency and constant interchange") {
  SystemDef d = two_areas();
  d.areas[0].agc.enabled = true;  // west only
  d.events.push_back({1.0, load_step("east", 100.0)});
  SECTION("constant frequency: west restores 50 Hz and carries the step over the tie") {
    d.areas[0].agc.mode = AgcMode::constant_frequency;
    auto e = test::make(d);
    e->run();
    CHECK(test::freq(*e, "east") == Approx(50.0).margin(2e-3));
    CHECK(test::flow(*e, "link") == Approx(100.0).margin(0.5));
    CHECK(e->area(*e->find_area("west")).agc_mode == AgcMode::constant_frequency);
  }
  SECTION("constant interchange: west holds the tie, east alone answers by its droop") {
    d.areas[0].agc.mode = AgcMode::constant_interchange;
    auto e = test::make(d);
    e->run();
    CHECK(test::flow(*e, "link") == Approx(0.0).margin(0.5));
    CHECK(test::freq(*e, "east") == Approx(50.0 - 100.0 / 412.0).margin(1e-3));
  }
  SECTION("switched live: the agc command's mode") {
    auto e = test::make(d);
    test::run_until(*e, 5.0);
    CHECK(e->area(*e->find_area("west")).agc_mode == AgcMode::tie_line_bias);
    REQUIRE(test::apply(*e, {agc_mode("west", AgcMode::constant_frequency)}).ok);
    CHECK(e->area(*e->find_area("west")).agc_mode == AgcMode::constant_frequency);
    e->take_notices();
    e->run();
    CHECK(test::freq(*e, "east") == Approx(50.0).margin(2e-3));
  }
}

TEST_CASE("shed and restore by hand: the droop law, and refusals in words") {
  SystemDef d = test::one_area(50.0, 500.0, 300.0);  // kd 200, dmp 6 MW/Hz
  auto e = test::make(d);
  CHECK(issue_text(test::apply(*e, {restore_all("A")})) == "command.area: area \"A\" has no shed load to restore");
  CHECK(issue_text(test::apply(*e, {area_cmd(CommandKind::shed, "A", 400.0)})) ==
        "command.mw: cannot shed 400 MW: area \"A\" has 300 MW of load connected");
  REQUIRE(test::apply(*e, {area_cmd(CommandKind::shed, "A", 30.0)}).ok);
  test::run_until(*e, 60.0);
  CHECK(e->area(AreaId{0}).shed_mw == 30.0);
  CHECK(test::freq(*e, "A") == Approx(50.0 + 30.0 / 206.0).margin(1e-3));
  CHECK(issue_text(test::apply(*e, {area_cmd(CommandKind::restore, "A", 50.0)})) ==
        "command.mw: cannot restore 50 MW: area \"A\" has 30 MW of shed load");
  REQUIRE(test::apply(*e, {area_cmd(CommandKind::restore, "A", 10.0)}).ok);
  test::run_until(*e, 120.0);
  CHECK(e->area(AreaId{0}).shed_mw == Approx(20.0));
  CHECK(test::freq(*e, "A") == Approx(50.0 + 20.0 / 206.0).margin(1e-3));
  REQUIRE(test::apply(*e, {restore_all("A")}).ok);
  CHECK(e->area(AreaId{0}).shed_mw == 0.0);
  CHECK(texts(*e) ==
        "load shed by hand: 30 MW in area A\nshed load restored: 10.0 MW in area A\n"
        "shed load restored: 20.0 MW in area A\n");
}

TEST_CASE("restore: hand-shed load first, then stages, a stage all restored is re-armed and trips again") {
  // Demand 300, kd 200, dmp 6: a step of 80 MW settles at -0.388 Hz, below the 49.7 Hz stage,
  // which sheds 10 % (30 MW) and leaves -0.243 Hz.
  SystemDef d = test::one_area(50.0, 500.0, 300.0);
  d.duration_s = 200.0;
  d.areas[0].shedding.push_back({49.7, 0.1, 10.0});
  d.events.push_back({1.0, load_step("A", 80.0)});
  auto e = test::make(d);
  test::run_until(*e, 30.0);
  CHECK(notices_of(*e, NoticeKind::shedding).size() == 1);
  CHECK(e->area(AreaId{0}).shed_mw == Approx(30.0));
  CHECK(test::freq(*e, "A") == Approx(50.0 - 50.0 / 206.0).margin(1e-3));
  REQUIRE(test::apply(*e, {area_cmd(CommandKind::shed, "A", 20.0)}).ok);
  REQUIRE(test::apply(*e, {area_cmd(CommandKind::restore, "A", 20.0)}).ok);  // the hand-shed 20 MW
  REQUIRE(test::apply(*e, {area_cmd(CommandKind::restore, "A", 10.0)}).ok);  // a third of the stage
  CHECK(texts(*e) ==
        "load shed by hand: 20 MW in area A\nshed load restored: 20.0 MW in area A\n"
        "shed load restored: 10.0 MW in area A\n");
  test::run_until(*e, 60.0);  // -0.291 Hz, below 49.7, but the stage is still partly out: no trip
  CHECK(notices_of(*e, NoticeKind::shedding).empty());
  REQUIRE(test::apply(*e, {restore_all("A")}).ok);
  CHECK(texts(*e) == "shed load restored: 20.0 MW in area A (1 stage re-armed)\n");
  test::run_until(*e, 90.0);
  CHECK(notices_of(*e, NoticeKind::shedding).size() == 1);  // re-armed: it picked up again
  CHECK(e->area(AreaId{0}).shed_mw == Approx(30.0));
}

TEST_CASE("a clone taken during a start-up, a stop and a schedule ramp steps bit-identically") {
  auto loaded = load_scenario_file(test::source_path("tests/data/operator_actions.json"));
  REQUIRE(loaded.system);
  auto e = Engine::create(*loaded.system);
  // 30 s: HG3 starting; 150 s: HH2 stopping, schedules past their ramp; 245 s: after the restore.
  for (double at : {20.0, 50.0, 100.0, 162.0}) {
    test::run_until(*e, at);
    auto c = e->clone();
    std::vector<double> ra(e->series_width()), rb(e->series_width());
    for (int i = 0; i < 3000; ++i) {
      e->step();
      c->step();
    }
    e->sample(ra);
    c->sample(rb);
    CHECK(ra == rb);
    CHECK(e->state() == c->state());
    for (std::uint32_t u = 0; u < e->def().units.size(); ++u)
      CHECK(e->unit(UnitId{u}).status == c->unit(UnitId{u}).status);
    for (std::uint32_t a = 0; a < e->def().areas.size(); ++a) {
      CHECK(e->area(AreaId{a}).scheduled_export_mw == c->area(AreaId{a}).scheduled_export_mw);
      CHECK(e->area(AreaId{a}).shed_mw == c->area(AreaId{a}).shed_mw);
    }
    e = std::move(c);  // go on from the clone
  }
}
