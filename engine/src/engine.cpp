#include "droopline/engine.hpp"

#include <algorithm>
#include <atomic>
#include <cmath>
#include <limits>
#include <numbers>
#include <numeric>
#include <stdexcept>

#include "droopline/format.hpp"
#include "kernels.hpp"
#include "noise.hpp"

namespace droopline {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;
constexpr double kNoRamp = 1e300;
constexpr double kPreWindowS = 16.0;     // mean before the event (BAL-003 "Value A" window)
constexpr double kSettleBeginS = 20.0;   // "Value B" window start after the event
constexpr double kSettleEndS = 52.0;     // "Value B" window end
constexpr double kRocofWindowS = 0.5;    // common practice: 500 ms RoCoF window
constexpr double kExtremeWindowS = 60.0; // nadir search ends here or at the next disturbance

constexpr TurbineType kTypes[] = {TurbineType::steam, TurbineType::reheat, TurbineType::hydro,
                                  TurbineType::gas, TurbineType::battery};

std::size_t state_count(TurbineType t) { return t == TurbineType::steam ? 3 : 4; }
// Index, within a block, of the state that is the valve (battery: output power).
std::size_t valve_state(TurbineType t) {
  return (t == TurbineType::hydro || t == TurbineType::battery) ? 1 : 0;
}

}  // namespace

const char* to_string(UnitStatus s) {
  switch (s) {
    case UnitStatus::online: return "online";
    case UnitStatus::at_max: return "at_max";
    case UnitStatus::at_min: return "at_min";
    case UnitStatus::tripped: return "tripped";
  }
  return "?";
}

struct Engine::Impl {
  struct Segment {
    std::size_t area, begin, end;  // [begin, end) within the block
    bool iso;                      // isochronous units: the kernel runs their integrator too
  };
  struct Block {
    TurbineType type = TurbineType::steam;
    std::size_t first_slot = 0, n = 0, off = 0, nstate = 0;
    std::vector<Segment> segments;
    std::vector<double> p1, p2, p3, p4;  // type parameters, see fill_type_params()
  };
  struct Ramp {
    double start_s, over_s, mw;
  };
  struct Stage {
    double timer_s = 0.0;  // time spent below the threshold since it was first seen below
    bool below = false;
    bool done = false;
  };
  struct AreaRt {
    double pd0 = 0.0, dmp = 0.0;  // initial demand (MW), damping D*Pd0/f0 (MW/Hz)
    double steps_mw = 0.0;        // accumulated load steps and finished ramps
    std::vector<Ramp> ramps;
    double shed_mw = 0.0;
    std::vector<Stage> stages;
    double noise_sigma = 0.0, noise_tau = 1.0, noise_mw = 0.0, noise_next = 0.0;
    detail::NormalSource rng;
    double m = 0.0;  // 2*sum(H S)/f0 (MW s/Hz)
    bool collapsed = false;
    int island = 0;
    bool agc_on = false;
    double bias = 0.0, kp = 0.0, ki = 0.0;
    std::int64_t period_steps = 1;
    double integral = 0.0, agc_total = 0.0, sched_export = 0.0;
    std::vector<std::size_t> participants;  // slots
  };
  struct UnitRt {
    std::size_t slot = 0, block = 0, j = 0, area = 0;
    bool online = true, tripped = false;
    double droop = 0.05, deadband_hz = 0.0;
    DeadbandKind deadband = DeadbandKind::offset;
    GovernorMode mode = GovernorMode::droop;
    double target_mw = 0.0, target_rate = 0.0;  // setpoint ramp in progress when rate > 0
  };
  struct TieRt {
    std::size_t from = 0, to = 0;
    double pmax = 0.0, dt = 0.0, trip_rad = std::numeric_limits<double>::infinity();
    double scheduled = 0.0, flow = 0.0;
    bool in_service = true;
  };
  struct Tracker {
    std::size_t record = 0;
    std::int64_t n0 = 0;
    double f_start = 0.0, settle_sum = 0.0;
    std::int64_t settle_count = 0;
    std::vector<std::size_t> slots;  // parallel to Disturbance::units
  };

  SystemDef def;
  double f0 = 50.0, h = 0.01;
  std::int64_t n = 0, n_total = 0;
  std::size_t na = 0, nt = 0, nu = 0;
  std::vector<AreaRt> areas;
  std::vector<TieRt> ties;
  std::vector<UnitRt> units;
  std::vector<Block> blocks;
  std::vector<std::size_t> unit_of_slot;
  std::vector<int> active_ties;

  // Hot per-slot data
  std::vector<double> pref0, kd, kiso, dbs, inv_lag, ramp, pmin, pmax;
  // Per-slot data read outside the stage loop
  std::vector<double> pset, pagc, pm;
  // Saved definition limits and gains to restore on unit start
  std::vector<double> def_pmin, def_pmax, def_ramp;
  // State and RK4 work arrays (k holds the latest stage's slope)
  std::vector<double> y, k, acc, pm_stage;
  // Hot per-area data
  std::vector<double> dfv, thv, gen, net_out, lc0, lc1, inv_m;
  // Derived outputs after the last step (see ensure_outputs)
  std::vector<double> out_gen, out_net, rocof;
  bool outputs_valid = false;
  std::vector<std::size_t> ramping;  // units whose setpoint is moving

  // Events and metrics
  std::vector<std::pair<std::int64_t, Command>> schedule;
  std::size_t next_event = 0;
  std::vector<Disturbance> records;
  std::vector<Tracker> trackers;  // open ones
  std::vector<Notice> notices;
  std::vector<double> ring;  // per-area frequency history for the pre-event mean
  std::size_t ring_len = 0;
  std::int64_t k_rocof = 0, k_settle_begin = 0, k_settle_end = 0, k10 = 0, k30 = 0, k_close = 0;

  // ---------------------------------------------------------------- construction
  explicit Impl(const SystemDef& d, const InitialFlows& flows) : def(d) {
    f0 = def.nominal_hz;
    h = def.step_s;
    n_total = std::llround(def.duration_s / h);
    if (const double r = std::round(1.0 / h); std::fabs(1.0 / h - r) < 1e-9 * r) steps_per_s = r;
    na = def.areas.size();
    nt = def.ties.size();
    nu = def.units.size();
    auto steps_of = [&](double s) { return std::max<std::int64_t>(1, std::llround(s / h)); };
    k_rocof = steps_of(kRocofWindowS);
    k_settle_begin = std::llround(kSettleBeginS / h);
    k_settle_end = std::llround(kSettleEndS / h);
    k10 = std::llround(10.0 / h);
    k30 = std::llround(30.0 / h);
    k_close = std::llround(kExtremeWindowS / h);

    areas.resize(na);
    for (std::size_t a = 0; a < na; ++a) {
      const AreaDef& ad = def.areas[a];
      AreaRt& ar = areas[a];
      ar.pd0 = ad.demand_mw;
      ar.dmp = ad.load_damping * ad.demand_mw / f0;
      ar.stages.resize(ad.shedding.size());
      ar.rng = detail::NormalSource(def.seed * 0x100000001b3ULL + a + 1);
      ar.agc_on = ad.agc.enabled;
      ar.bias = ad.agc.bias_mw_per_hz ? *ad.agc.bias_mw_per_hz : natural_response_mw_per_hz(def, a);
      ar.kp = ad.agc.kp;
      ar.ki = ad.agc.ki_per_s;
      ar.period_steps = ad.agc.period_s > 0.0 ? steps_of(ad.agc.period_s) : 1;
    }
    auto area_index = [&](const std::string& id) {
      for (std::size_t a = 0; a < na; ++a)
        if (def.areas[a].id == id) return a;
      return std::size_t{0};
    };
    ties.resize(nt);
    for (std::size_t t = 0; t < nt; ++t) {
      const TieDef& td = def.ties[t];
      TieRt& tr = ties[t];
      tr.from = area_index(td.from);
      tr.to = area_index(td.to);
      tr.pmax = td.pmax_mw;
      tr.dt = td.damping_mw_per_hz;
      if (td.trip_angle_deg) tr.trip_rad = *td.trip_angle_deg * std::numbers::pi / 180.0;
      tr.in_service = td.in_service;
      tr.scheduled = flows.flow_mw[t];
    }

    // Slots: units sorted by (type, area, file order) so each segment is contiguous.
    units.resize(nu);
    std::vector<std::size_t> order(nu);
    std::iota(order.begin(), order.end(), 0);
    auto type_rank = [](TurbineType t) { return static_cast<int>(t); };
    std::stable_sort(order.begin(), order.end(), [&](std::size_t x, std::size_t z) {
      const UnitDef &ux = def.units[x], &uz = def.units[z];
      if (ux.turbine.type != uz.turbine.type)
        return type_rank(ux.turbine.type) < type_rank(uz.turbine.type);
      if (ux.area != uz.area) return area_index(ux.area) < area_index(uz.area);
      return ux.governor.mode < uz.governor.mode;
    });
    unit_of_slot = order;
    for (auto* v : {&pref0, &pset, &pagc, &kd, &kiso, &dbs, &inv_lag, &ramp, &pmin, &pmax, &pm,
                    &def_pmin, &def_pmax, &def_ramp, &pm_stage})
      v->assign(nu, 0.0);

    std::size_t off = 2 * na;
    std::size_t slot = 0;
    for (TurbineType type : kTypes) {
      Block b;
      b.type = type;
      b.first_slot = slot;
      b.nstate = state_count(type);
      while (slot < nu && def.units[order[slot]].turbine.type == type) ++slot;
      b.n = slot - b.first_slot;
      if (b.n == 0) continue;
      b.off = off;
      off += b.n * b.nstate;
      for (auto* v : {&b.p1, &b.p2, &b.p3, &b.p4}) v->assign(b.n, 0.0);
      blocks.push_back(std::move(b));
    }
    y.assign(off, 0.0);
    k.assign(off, 0.0);
    acc.assign(off, 0.0);
    for (std::size_t a = 0; a < na; ++a) y[na + a] = flows.angle_rad[a];

    for (std::size_t bi = 0; bi < blocks.size(); ++bi) {
      Block& b = blocks[bi];
      for (std::size_t j = 0; j < b.n; ++j) {
        const std::size_t s = b.first_slot + j, u = order[s];
        const UnitDef& ud = def.units[u];
        UnitRt& ur = units[u];
        ur.slot = s;
        ur.block = bi;
        ur.j = j;
        ur.area = area_index(ud.area);
        ur.online = ud.online;
        ur.droop = ud.governor.droop;
        ur.deadband_hz = ud.governor.deadband_hz;
        ur.deadband = ud.governor.deadband;
        ur.mode = ud.governor.mode;
        ur.target_mw = ud.setpoint_mw;
        def_pmin[s] = unit_min_mw(ud);
        def_pmax[s] = unit_max_mw(ud);
        def_ramp[s] = ud.ramp_mw_per_s ? *ud.ramp_mw_per_s : kNoRamp;
        inv_lag[s] = 1.0 / ud.governor.lag_s;
        if (ud.online) {
          bring_online(u, ud.setpoint_mw, true);
        } else {
          take_offline(u);
          if (b.type == TurbineType::battery)
            state(u, 2) = ud.turbine.soc * *ud.turbine.energy_mwh;
        }
      }
    }
    for (std::size_t u = 0; u < nu; ++u) fill_type_params(u);
    rebuild_segments();
    update_inertia();
    update_topology();
    for (std::size_t a = 0; a < na; ++a) refresh_participants(a);

    dfv.assign(na, 0.0);
    thv.assign(na, 0.0);
    gen.assign(na, 0.0);
    net_out.assign(na, 0.0);
    out_gen.assign(na, 0.0);
    out_net.assign(na, 0.0);
    lc0.assign(na, 0.0);
    lc1.assign(na, 0.0);
    rocof.assign(na, 0.0);
    ring_len = static_cast<std::size_t>(std::llround(kPreWindowS / h)) + 1;
    ring.assign(ring_len * na, 0.0);

    for (std::size_t i = 0; i < def.events.size(); ++i)
      schedule.emplace_back(std::llround(def.events[i].at_s / h), def.events[i].command);
    std::stable_sort(schedule.begin(), schedule.end(),
                     [](const auto& a, const auto& b) { return a.first < b.first; });
    post_step();
  }

  // Type parameters that depend on the current droop (hydro) and on the definition.
  void fill_type_params(std::size_t u) {
    const UnitDef& ud = def.units[u];
    const UnitRt& ur = units[u];
    Block& b = blocks[ur.block];
    const std::size_t j = ur.j;
    const TurbineDef& t = ud.turbine;
    switch (b.type) {
      case TurbineType::steam:
        b.p1[j] = 1.0 / t.steam_chest_s;
        break;
      case TurbineType::reheat:
        b.p1[j] = 1.0 / t.steam_chest_s;
        b.p2[j] = 1.0 / t.reheat_s;
        b.p3[j] = t.hp_fraction;
        break;
      case TurbineType::hydro: {
        const double rt = hydro_temporary_droop(ud), tr = hydro_reset_s(ud);
        b.p1[j] = ur.droop / (tr * rt);  // 1 / (TR RT / R)
        b.p2[j] = ur.droop / rt;         // high-frequency gain R/RT
        b.p3[j] = 2.0 / t.water_s;
        break;
      }
      case TurbineType::gas:
        b.p1[j] = 1.0 / t.fuel_s;
        b.p2[j] = 1.0 / t.combustion_s;
        b.p3[j] = t.load_limit_mw ? *t.load_limit_mw : ud.rating_mw;
        break;
      case TurbineType::battery:
        b.p1[j] = 1.0 / t.rocof_filter_s;
        b.p2[j] = 1.0 / t.response_s;
        b.p3[j] = 2.0 * t.synthetic_inertia_s * ud.rating_mw / f0;
        b.p4[j] = *t.energy_mwh;
        break;
    }
  }

  // Segments: maximal runs of units of one block sharing area and governor mode.
  void rebuild_segments() {
    for (Block& b : blocks) {
      b.segments.clear();
      for (std::size_t j = 0; j < b.n; ++j) {
        const UnitRt& ur = units[unit_of_slot[b.first_slot + j]];
        const bool iso = ur.mode == GovernorMode::isochronous;
        if (b.segments.empty() || b.segments.back().area != ur.area || b.segments.back().iso != iso)
          b.segments.push_back({ur.area, j, j, iso});
        b.segments.back().end = j + 1;
      }
    }
    rebuild_pieces();
  }

  double& state(std::size_t u, std::size_t which) {
    const UnitRt& ur = units[u];
    const Block& b = blocks[ur.block];
    return y[b.off + which * b.n + ur.j];
  }

  void set_governor_gains(std::size_t u) {
    const UnitDef& ud = def.units[u];
    const UnitRt& ur = units[u];
    const std::size_t s = ur.slot;
    if (!ur.online) return;
    kd[s] = ud.rating_mw / (ur.droop * f0);
    kiso[s] = ur.mode == GovernorMode::isochronous ? kd[s] / ud.governor.integral_s : 0.0;
    dbs[s] = ur.deadband == DeadbandKind::step ? -ur.deadband_hz : ur.deadband_hz;
  }

  // Puts a unit in service with all states at `mw` (steady), or, when starting during a run, at
  // its minimum stable output with the setpoint at `mw`: the governor then loads it.
  void bring_online(std::size_t u, double mw, bool steady) {
    UnitRt& ur = units[u];
    const std::size_t s = ur.slot;
    const Block& b = blocks[ur.block];
    const double energy = b.type == TurbineType::battery ? state(u, 2) : 0.0;
    ur.online = true;
    ur.tripped = false;
    ur.target_mw = mw;
    ur.target_rate = 0.0;
    pset[s] = mw;
    pagc[s] = 0.0;
    pref0[s] = mw;
    pmin[s] = def_pmin[s];
    pmax[s] = def_pmax[s];
    ramp[s] = def_ramp[s];
    set_governor_gains(u);
    const double start = steady ? mw : std::max(def_pmin[s], 0.0);
    for (std::size_t i = 0; i < b.nstate; ++i) state(u, i) = start;
    state(u, b.nstate - 1) = 0.0;  // isochronous integrator
    if (b.type == TurbineType::battery) {
      state(u, 0) = y[ur.area];  // washout starts settled
      // A battery keeps its charge across a trip; at t = 0 it holds soc * capacity.
      state(u, 2) = steady ? def.units[u].turbine.soc * *def.units[u].turbine.energy_mwh : energy;
    }
    pm[s] = start;
  }

  // Zero every gain, limit and state: the unit's derivatives are then identically zero.
  void take_offline(std::size_t u) {
    UnitRt& ur = units[u];
    const std::size_t s = ur.slot;
    const Block& b = blocks[ur.block];
    ur.online = false;
    ur.target_rate = 0.0;
    pset[s] = pagc[s] = pref0[s] = kd[s] = kiso[s] = pmin[s] = pmax[s] = dbs[s] = 0.0;
    ramp[s] = kNoRamp;
    const double energy = b.type == TurbineType::battery ? state(u, 2) : 0.0;
    for (std::size_t i = 0; i < b.nstate; ++i) state(u, i) = 0.0;
    if (b.type == TurbineType::battery) state(u, 2) = energy;  // a tripped battery keeps its charge
    pm[s] = 0.0;
  }

  void update_inertia() {
    std::vector<double> hs(na, 0.0);
    for (std::size_t u = 0; u < nu; ++u)
      if (units[u].online && is_synchronous(def.units[u]))
        hs[units[u].area] += def.units[u].inertia_s * def.units[u].rating_mw;
    inv_m.assign(na, 0.0);
    for (std::size_t a = 0; a < na; ++a) {
      areas[a].m = 2.0 * hs[a] / f0;
      inv_m[a] = areas[a].m > 0.0 ? 1.0 / areas[a].m : 0.0;
    }
  }

  void update_topology() {
    std::vector<int> from(nt), to(nt);
    std::vector<bool> in(nt);
    active_ties.clear();
    for (std::size_t t = 0; t < nt; ++t) {
      from[t] = static_cast<int>(ties[t].from);
      to[t] = static_cast<int>(ties[t].to);
      in[t] = ties[t].in_service;
      if (in[t]) active_ties.push_back(static_cast<int>(t));
    }
    const std::vector<int> isl = islands_of(na, from, to, in);
    for (std::size_t a = 0; a < na; ++a) {
      areas[a].island = isl[a];
      areas[a].sched_export = 0.0;
    }
    for (int t : active_ties) {
      areas[ties[t].from].sched_export += ties[t].scheduled;
      areas[ties[t].to].sched_export -= ties[t].scheduled;
    }
  }

  void refresh_participants(std::size_t a) {
    areas[a].participants.clear();
    for (std::size_t s = 0; s < nu; ++s) {
      const std::size_t u = unit_of_slot[s];
      if (units[u].area == a && units[u].online && def.units[u].agc_share > 0.0)
        areas[a].participants.push_back(s);
    }
  }

  // ---------------------------------------------------------------- work pieces
  // A piece is at most kPieceUnits units of one segment. The split depends only on the layout,
  // never on the number of threads, so sums over pieces come out the same with any runner.
  static constexpr std::size_t kPieceUnits = 1024;
  static constexpr std::size_t kParallelMinUnits = 4096;
  struct Piece {
    std::size_t block, area, begin, end;  // [begin, end) within the block
    bool iso;
  };
  std::vector<Piece> pieces;
  std::vector<double> piece_gen;
  TaskRunner* runner = nullptr;
  int stage_now = 1;
  double stage_c = 0.0;

  void rebuild_pieces() {
    pieces.clear();
    for (std::size_t bi = 0; bi < blocks.size(); ++bi)
      for (const Segment& sg : blocks[bi].segments)
        for (std::size_t j = sg.begin; j < sg.end; j += kPieceUnits)
          pieces.push_back({bi, sg.area, j, std::min(sg.end, j + kPieceUnits), sg.iso});
    piece_gen.assign(pieces.size(), 0.0);
  }

  static void run_task(void* self, std::size_t task, std::size_t tasks) {
    auto* m = static_cast<Impl*>(self);
    for (std::size_t p = task; p < m->pieces.size(); p += tasks) m->run_piece(p);
  }

  void run_piece(std::size_t p) {
    const Piece& pc = pieces[p];
    Block& b = blocks[pc.block];
    const detail::StageInfo info{stage_now, stage_c, h / 6.0, pc.iso};
    const std::size_t s0 = b.first_slot + pc.begin, len = pc.end - pc.begin, j = pc.begin;
    const detail::GovernorParams g{&pref0[s0], &kd[s0], &kiso[s0], &dbs[s0],
                                   &inv_lag[s0], &ramp[s0], &pmin[s0], &pmax[s0]};
    const detail::TypeParams tp{&b.p1[j], &b.p2[j], &b.p3[j], &b.p4[j]};
    detail::SegmentArrays arr{};
    for (std::size_t i = 0; i < b.nstate; ++i) {
      const std::size_t o = b.off + i * b.n + j;
      arr.y[i] = &y[o];
      arr.k[i] = &k[o];
      arr.acc[i] = &acc[o];
    }
    double* out = &pm_stage[s0];
    const double df = dfv[pc.area];
    switch (b.type) {
      case TurbineType::steam: detail::steam_stage(len, df, g, tp, arr, info, out); break;
      case TurbineType::reheat: detail::reheat_stage(len, df, g, tp, arr, info, out); break;
      case TurbineType::hydro: detail::hydro_stage(len, df, g, tp, arr, info, out); break;
      case TurbineType::gas: detail::gas_stage(len, df, g, tp, arr, info, out); break;
      case TurbineType::battery: detail::battery_stage(len, df, g, tp, arr, info, out); break;
    }
    piece_gen[p] = detail::ordered_sum(len, out);
  }

  // ---------------------------------------------------------------- one RK4 stage
  // Stage 1 reads y; stages 2-4 read y + c * (previous slope). Areas are done here in scalar
  // code, units by the per-type kernels (which also write the new unit state in stage 4).
  void stage(int st) {
    const double c = st == 1 ? 0.0 : (st == 4 ? h : 0.5 * h);
    const double frac = st == 1 ? 0.0 : (st == 4 ? 1.0 : 0.5);
    for (std::size_t a = 0; a < na; ++a) {
      dfv[a] = st == 1 ? y[a] : y[a] + c * k[a];
      thv[a] = st == 1 ? y[na + a] : y[na + a] + c * k[na + a];
      net_out[a] = 0.0;
      gen[a] = 0.0;
    }
    for (int t : active_ties) {
      const TieRt& tr = ties[t];
      const double f = tr.pmax * std::sin(thv[tr.from] - thv[tr.to]) +
                       tr.dt * (dfv[tr.from] - dfv[tr.to]);
      net_out[tr.from] += f;
      net_out[tr.to] -= f;
    }
    stage_now = st;
    stage_c = c;
    const std::size_t tasks = runner && nu >= kParallelMinUnits
                                  ? std::min(runner->concurrency(), pieces.size())
                                  : 1;
    if (tasks > 1) {
      runner->run(tasks, &Impl::run_task, this);
    } else {
      for (std::size_t p = 0; p < pieces.size(); ++p) run_piece(p);
    }
    // Pieces are summed in a fixed order: the result does not depend on how many ran in parallel.
    for (std::size_t p = 0; p < pieces.size(); ++p) gen[pieces[p].area] += piece_gen[p];
    for (std::size_t a = 0; a < na; ++a) {
      double d_df = 0.0, d_th = 0.0;
      if (!areas[a].collapsed) {
        const double load = lc0[a] + (lc1[a] - lc0[a]) * frac + areas[a].dmp * dfv[a];
        d_df = (gen[a] - load - net_out[a]) * inv_m[a];
        d_th = kTwoPi * dfv[a];
      }
      for (auto [i, d] : {std::pair{a, d_df}, std::pair{na + a, d_th}}) {
        if (st == 1) {
          k[i] = d;
          acc[i] = d;
        } else if (st < 4) {
          k[i] = d;
          acc[i] = acc[i] + 2.0 * d;
        } else {
          y[i] = y[i] + (h / 6.0) * (acc[i] + d);
        }
      }
    }
  }

  // ---------------------------------------------------------------- stepping
  double extra_load(const AreaRt& ar, double t) const {
    double mw = ar.steps_mw;
    for (const Ramp& r : ar.ramps) mw += r.mw * std::clamp((t - r.start_s) / r.over_s, 0.0, 1.0);
    return mw;
  }

  void step() {
    while (next_event < schedule.size() && schedule[next_event].first <= n) {
      const Command& c = schedule[next_event].second;
      ApplyResult r = apply_checked(std::span<const Command>(&c, 1));
      if (!r.ok) notices.push_back({time(), "command_refused", r.error});
      ++next_event;
    }
    const double t0 = time();
    for (std::size_t a = 0; a < na; ++a) {
      AreaRt& ar = areas[a];
      // Fold finished ramps into the constant part.
      for (std::size_t i = 0; i < ar.ramps.size();) {
        if (t0 >= ar.ramps[i].start_s + ar.ramps[i].over_s) {
          ar.steps_mw += ar.ramps[i].mw;
          ar.ramps.erase(ar.ramps.begin() + static_cast<std::ptrdiff_t>(i));
        } else {
          ++i;
        }
      }
      if (ar.noise_sigma > 0.0) {
        const double phi = std::exp(-h / ar.noise_tau);
        ar.noise_next =
            phi * ar.noise_mw + ar.noise_sigma * std::sqrt(1.0 - phi * phi) * ar.rng.next();
      } else {
        ar.noise_next = 0.0;
      }
      const double base = ar.pd0 - ar.shed_mw;
      lc0[a] = base + extra_load(ar, t0) + ar.noise_mw;
      lc1[a] = base + extra_load(ar, t0 + h) + ar.noise_next;
    }
    for (int st = 1; st <= 4; ++st) stage(st);
    ++n;
    for (AreaRt& ar : areas) ar.noise_mw = ar.noise_next;
    post_step();
  }

  void step_state(std::span<const double> x, std::span<double> next) {
    const std::vector<double> saved = y;
    std::copy(x.begin(), x.end(), y.begin());
    const double t0 = time();
    for (std::size_t a = 0; a < na; ++a) {
      const AreaRt& ar = areas[a];
      lc0[a] = lc1[a] = ar.pd0 - ar.shed_mw + extra_load(ar, t0);
    }
    for (int st = 1; st <= 4; ++st) stage(st);
    std::copy(y.begin(), y.end(), next.begin());
    y = saved;
    invalidate_outputs();
  }

  std::vector<std::string> state_names() const {
    std::vector<std::string> out(y.size());
    for (std::size_t a = 0; a < na; ++a) {
      out[a] = def.areas[a].id + ".df_hz";
      out[na + a] = def.areas[a].id + ".angle_rad";
    }
    for (const Block& b : blocks) {
      static const char* const steam[] = {"valve", "power", "iso_integral"};
      static const char* const reheat[] = {"valve", "hp_power", "reheat_power", "iso_integral"};
      static const char* const hydro[] = {"water_power", "gate", "transient_droop", "iso_integral"};
      static const char* const gas[] = {"valve", "fuel", "power", "iso_integral"};
      static const char* const battery[] = {"df_filter", "power", "energy", "iso_integral"};
      const char* const* names = b.type == TurbineType::steam    ? steam
                                 : b.type == TurbineType::reheat ? reheat
                                 : b.type == TurbineType::hydro  ? hydro
                                 : b.type == TurbineType::gas    ? gas
                                                                 : battery;
      for (std::size_t which = 0; which < b.nstate; ++which)
        for (std::size_t j = 0; j < b.n; ++j)
          out[b.off + which * b.n + j] = def.units[unit_of_slot[b.first_slot + j]].id + "." + names[which];
    }
    return out;
  }

  // n / (steps per second) when that is a whole number: 278 steps of 0.01 s print as 2.78, not
  // as 2.7800000000000002.
  double steps_per_s = 0.0;
  double time() const {
    return steps_per_s > 0.0 ? static_cast<double>(n) / steps_per_s : static_cast<double>(n) * h;
  }

  void post_step() {
    invalidate_outputs();
    const double t = time();
    for (std::size_t a = 0; a < na; ++a) ring[(static_cast<std::size_t>(n) % ring_len) * na + a] = y[a];

    // Out-of-step: the unwrapped angle passed the trip setting.
    for (bool tripped = true; tripped;) {
      tripped = false;
      for (int t_idx : active_ties) {
        const TieRt& tr = ties[t_idx];
        const double ang = y[na + tr.from] - y[na + tr.to];
        if (std::fabs(ang) <= tr.trip_rad) continue;
        notices.push_back({t, "out_of_step",
                           "tie " + def.ties[t_idx].id + " tripped out of step at " +
                               fmt_fixed(ang * 180.0 / std::numbers::pi, 1) + " deg"});
        trip_tie(static_cast<std::size_t>(t_idx), "out-of-step trip of tie " + def.ties[t_idx].id);
        tripped = true;  // active_ties changed: scan again
        break;
      }
    }

    for (std::size_t a = 0; a < na; ++a) {
      AreaRt& ar = areas[a];
      if (ar.collapsed) continue;
      const double f = f0 + y[a];
      const auto& stages = def.areas[a].shedding;
      for (std::size_t s = 0; s < stages.size(); ++s) {
        Stage& st = ar.stages[s];
        if (st.done) continue;
        if (f < stages[s].below_hz) {
          if (st.below) st.timer_s += h;
          st.below = true;
          if (st.timer_s >= stages[s].delay_s - 1e-9) {
            st.done = true;
            const double mw = stages[s].shed_pct / 100.0 * ar.pd0;
            ar.shed_mw += mw;
            notices.push_back({t, "shedding",
                               "area " + def.areas[a].id + " shed stage " + std::to_string(s + 1) +
                                   ": " + fmt_fixed(mw, 1) + " MW below " +
                                   fmt_num(stages[s].below_hz) + " Hz"});
          }
        } else {
          st.timer_s = 0.0;
          st.below = false;
        }
      }
      if (ar.agc_on && n % ar.period_steps == 0) run_agc(a);
    }

    for (std::size_t i = 0; i < ramping.size();) {
      UnitRt& ur = units[ramping[i]];
      const std::size_t s = ur.slot;
      const double dmax = ur.target_rate * h;
      if (ur.target_rate <= 0.0 || std::fabs(ur.target_mw - pset[s]) <= dmax) {
        if (ur.target_rate > 0.0) pset[s] = ur.target_mw;
        ur.target_rate = 0.0;
        ramping.erase(ramping.begin() + static_cast<std::ptrdiff_t>(i));
      } else {
        pset[s] += ur.target_mw > pset[s] ? dmax : -dmax;
        ++i;
      }
      pref0[s] = pset[s] + pagc[s];
    }
    update_metrics();
  }

  // Outputs (unit powers, tie flows, area balances) are derived from the state; they are worked
  // out when something reads them, not after every step.
  void invalidate_outputs() { outputs_valid = false; }
  void ensure_outputs() {
    if (outputs_valid) return;
    outputs_valid = true;
    std::fill(out_gen.begin(), out_gen.end(), 0.0);
    for (Block& b : blocks) {
      const double* x1 = &y[b.off + b.n];
      const double* x2 = &y[b.off + 2 * b.n];
      double* out = &pm[b.first_slot];
      switch (b.type) {
        case TurbineType::steam:
          for (std::size_t j = 0; j < b.n; ++j) out[j] = x1[j];
          break;
        case TurbineType::reheat:
          for (std::size_t j = 0; j < b.n; ++j) out[j] = b.p3[j] * x1[j] + (1.0 - b.p3[j]) * x2[j];
          break;
        case TurbineType::hydro:
          for (std::size_t j = 0; j < b.n; ++j) out[j] = 3.0 * x2[j] - 2.0 * x1[j];
          break;
        case TurbineType::gas:
          for (std::size_t j = 0; j < b.n; ++j) out[j] = x2[j];
          break;
        case TurbineType::battery:
          for (std::size_t j = 0; j < b.n; ++j) out[j] = x1[j];
          break;
      }
      for (const Segment& sg : b.segments)
        out_gen[sg.area] += detail::ordered_sum(sg.end - sg.begin, out + sg.begin);
    }
    std::fill(out_net.begin(), out_net.end(), 0.0);
    for (std::size_t t = 0; t < nt; ++t) ties[t].flow = 0.0;
    for (int t : active_ties) {
      TieRt& tr = ties[t];
      tr.flow = tr.pmax * std::sin(y[na + tr.from] - y[na + tr.to]) + tr.dt * (y[tr.from] - y[tr.to]);
      out_net[tr.from] += tr.flow;
      out_net[tr.to] -= tr.flow;
    }
    const double t = time();
    for (std::size_t a = 0; a < na; ++a) {
      if (areas[a].collapsed) {
        rocof[a] = 0.0;
        continue;
      }
      const double load = current_load(a, t);
      rocof[a] = (out_gen[a] - load - out_net[a]) * inv_m[a];
    }
  }

  double current_load(std::size_t a, double t) const {
    const AreaRt& ar = areas[a];
    return ar.pd0 - ar.shed_mw + extra_load(ar, t) + ar.noise_mw + ar.dmp * y[a];
  }

  double ace(std::size_t a) {
    ensure_outputs();
    return (out_net[a] - areas[a].sched_export) + areas[a].bias * y[a];
  }

  // Secondary control: PI on ACE, shared by participation, kept inside each unit's range.
  void run_agc(std::size_t a) {
    AreaRt& ar = areas[a];
    const double period = static_cast<double>(ar.period_steps) * h;
    const double e = ace(a);
    const double trial = ar.integral + e * period;
    const double want = -(ar.kp * e + ar.ki * trial);
    const double got = allocate_agc(a, want, false);
    // Anti-windup: keep the integral while the participants cannot follow it further.
    const bool saturated = std::fabs(got - want) > 1e-9 * std::max(1.0, std::fabs(want));
    const bool deeper = std::fabs(-(ar.kp * e + ar.ki * ar.integral)) < std::fabs(want);
    if (!(saturated && deeper)) ar.integral = trial;
    ar.agc_total = allocate_agc(a, -(ar.kp * e + ar.ki * ar.integral), true);
  }

  // Water-filling of a requested correction over participants by share, within each unit's
  // [min, max] around its setpoint. Returns what could be placed; writes pagc when `commit`.
  double allocate_agc(std::size_t a, double want, bool commit) {
    const auto& parts = areas[a].participants;
    if (parts.empty()) return 0.0;
    std::vector<double> give(parts.size(), 0.0);
    std::vector<bool> fixed(parts.size(), false);
    double left = want;
    for (int round = 0; round < 8 && std::fabs(left) > 1e-12; ++round) {
      double shares = 0.0;
      for (std::size_t i = 0; i < parts.size(); ++i)
        if (!fixed[i]) shares += def.units[unit_of_slot[parts[i]]].agc_share;
      if (shares <= 0.0) break;
      double placed = 0.0;
      for (std::size_t i = 0; i < parts.size(); ++i) {
        if (fixed[i]) continue;
        const std::size_t s = parts[i];
        const double share = def.units[unit_of_slot[s]].agc_share / shares;
        const double lo = pmin[s] - pset[s], hi = pmax[s] - pset[s];
        const double wish = give[i] + left * share;
        const double now = std::clamp(wish, lo, hi);
        if (now != wish) fixed[i] = true;
        placed += now - give[i];
        give[i] = now;
      }
      left -= placed;
    }
    double total = 0.0;
    for (std::size_t i = 0; i < parts.size(); ++i) {
      total += give[i];
      if (commit) {
        pagc[parts[i]] = give[i];
        pref0[parts[i]] = pset[parts[i]] + give[i];
      }
    }
    return total;
  }

  // ---------------------------------------------------------------- topology changes
  void trip_tie(std::size_t t, const std::string& cause) {
    ensure_outputs();
    TieRt& tr = ties[t];
    const double flow = tr.flow;
    tr.in_service = false;
    update_topology();
    tr.flow = 0.0;
    if (areas[tr.from].island != areas[tr.to].island) {
      open_disturbance(tr.from, -flow, CommandKind::tie_trip, cause + " (island of " +
                                                                   def.areas[tr.from].id + ")");
      open_disturbance(tr.to, flow, CommandKind::tie_trip,
                       cause + " (island of " + def.areas[tr.to].id + ")");
    }
    invalidate_outputs();
  }

  void collapse_area_if_dead(std::size_t a) {
    AreaRt& ar = areas[a];
    if (ar.collapsed || ar.m > 0.0) return;
    ar.collapsed = true;
    notices.push_back({time(), "collapse",
                       "area " + def.areas[a].id +
                           " lost all synchronous inertia and collapsed; its ties are opened"});
    for (std::size_t t = 0; t < nt; ++t)
      if (ties[t].in_service && (ties[t].from == a || ties[t].to == a)) {
        ties[t].in_service = false;
        ties[t].flow = 0.0;
      }
    for (std::size_t u = 0; u < nu; ++u)
      if (units[u].area == a && units[u].online) take_offline(u);
    update_topology();
    refresh_participants(a);
  }

  // ---------------------------------------------------------------- commands
  struct Shadow {
    std::vector<bool> unit_online, tie_in;
    std::vector<double> droop;  // as the commands checked so far would leave them
  };

  // Dense index of a scenario id (the count when absent); commands are validated first.
  template <class T>
  static std::size_t index_of(const std::vector<T>& items, const std::string& id) {
    for (std::size_t i = 0; i < items.size(); ++i)
      if (items[i].id == id) return i;
    return items.size();
  }
  std::size_t unit_idx(const std::string& id) const { return index_of(def.units, id); }
  std::size_t area_idx(const std::string& id) const { return index_of(def.areas, id); }
  std::size_t tie_idx(const std::string& id) const { return index_of(def.ties, id); }

  std::string dynamic_error(const Command& c, Shadow& sh, const std::string& path) const {
    switch (c.kind) {
      case CommandKind::unit_trip: {
        const std::size_t u = unit_idx(c.unit);
        if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
        sh.unit_online[u] = false;
        break;
      }
      case CommandKind::unit_start: {
        const std::size_t u = unit_idx(c.unit);
        if (sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is already online";
        if (areas[units[u].area].collapsed)
          return path + ".unit: area \"" + def.areas[units[u].area].id + "\" has collapsed";
        sh.unit_online[u] = true;
        break;
      }
      case CommandKind::setpoint: {
        const std::size_t u = unit_idx(c.unit);
        if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
        break;
      }
      case CommandKind::governor: {
        const std::size_t u = unit_idx(c.unit);
        if (!sh.unit_online[u]) return path + ".unit: unit \"" + c.unit + "\" is not online";
        if (c.droop) {
          // With the droops as they are now (earlier commands included), the area's frequency
          // loop must stay slow enough for the fixed step: M/beta at least five steps.
          sh.droop[u] = *c.droop;
          const std::size_t a = units[u].area;
          double beta = areas[a].dmp;
          for (std::size_t v = 0; v < nu; ++v)
            if (units[v].area == a && sh.unit_online[v] && sh.droop[v] > 0.0)
              beta += def.units[v].rating_mw / (sh.droop[v] * f0);
          if (std::string why = droop_step_problem(*c.droop, def.areas[a].id, areas[a].m, beta, h); !why.empty())
            return path + ".droop: " + why;
        }
        break;
      }
      case CommandKind::tie_trip: {
        const std::size_t t = tie_idx(c.tie);
        if (!sh.tie_in[t]) return path + ".tie: tie \"" + c.tie + "\" is already open";
        sh.tie_in[t] = false;
        break;
      }
      case CommandKind::tie_close: {
        const std::size_t t = tie_idx(c.tie);
        if (sh.tie_in[t]) return path + ".tie: tie \"" + c.tie + "\" is already in service";
        if (areas[ties[t].from].collapsed || areas[ties[t].to].collapsed)
          return path + ".tie: an end of tie \"" + c.tie + "\" has collapsed";
        sh.tie_in[t] = true;
        break;
      }
      case CommandKind::load_step:
      case CommandKind::load_ramp:
      case CommandKind::agc:
      case CommandKind::fluctuation: {
        const std::size_t a = area_idx(c.area);
        if (areas[a].collapsed) return path + ".area: area \"" + c.area + "\" has collapsed";
        break;
      }
    }
    return {};
  }

  Shadow shadow() const {
    Shadow sh;
    for (const UnitRt& u : units) {
      sh.unit_online.push_back(u.online);
      sh.droop.push_back(u.droop);
    }
    for (const TieRt& t : ties) sh.tie_in.push_back(t.in_service);
    return sh;
  }

  ApplyResult apply_checked(std::span<const Command> cmds) {
    ApplyResult r = check(cmds);
    if (!r.ok) return r;
    for (const Command& c : cmds) perform(c);
    return r;
  }

  ApplyResult check(std::span<const Command> cmds) const {
    Shadow sh = shadow();
    std::vector<std::string> errors;
    for (std::size_t i = 0; i < cmds.size(); ++i) {
      const std::string path = cmds.size() == 1 ? "command" : "commands[" + std::to_string(i) + "]";
      auto issues = validate_command(def, cmds[i], path);
      for (const Issue& is : issues)
        if (!is.warning) errors.push_back(is.text());
      if (issues.empty()) {
        std::string dyn = dynamic_error(cmds[i], sh, path);
        if (!dyn.empty()) errors.push_back(dyn);
      }
    }
    ApplyResult r;
    r.at_s = time();
    for (std::size_t i = 0; i < errors.size(); ++i) r.error += (i ? "; " : "") + errors[i];
    r.ok = errors.empty();
    return r;
  }

  void perform(const Command& c) {
    ensure_outputs();
    const double t = time();
    std::string text;
    switch (c.kind) {
      case CommandKind::load_step: {
        const std::size_t a = area_idx(c.area);
        areas[a].steps_mw += c.mw;
        text = "load step " + fmt_num(c.mw) + " MW in area " + c.area;
        open_disturbance(a, c.mw, c.kind, text);
        break;
      }
      case CommandKind::load_ramp: {
        const std::size_t a = area_idx(c.area);
        areas[a].ramps.push_back({t, c.over_s, c.mw});
        text = "load ramp " + fmt_num(c.mw) + " MW over " + fmt_num(c.over_s) + " s in area " + c.area;
        open_disturbance(a, c.mw, c.kind, text);
        break;
      }
      case CommandKind::unit_trip: {
        const std::size_t u = unit_idx(c.unit);
        const double lost = pm[units[u].slot];
        const std::size_t a = units[u].area;
        take_offline(u);
        units[u].tripped = true;
        update_inertia();
        refresh_participants(a);
        text = "unit " + c.unit + " tripped from " + fmt_fixed(lost, 1) + " MW";
        collapse_area_if_dead(a);
        if (!areas[a].collapsed) open_disturbance(a, lost, c.kind, text);
        break;
      }
      case CommandKind::unit_start: {
        const std::size_t u = unit_idx(c.unit);
        bring_online(u, c.mw, false);
        update_inertia();
        refresh_participants(units[u].area);
        text = "unit " + c.unit + " started, loading to " + fmt_num(c.mw) + " MW";
        open_disturbance(units[u].area, -c.mw, c.kind, text);
        break;
      }
      case CommandKind::setpoint: {
        UnitRt& ur = units[unit_idx(c.unit)];
        ur.target_mw = c.mw;
        if (c.ramp_mw_per_s) {
          if (ur.target_rate <= 0.0) ramping.push_back(unit_idx(c.unit));
          ur.target_rate = *c.ramp_mw_per_s;
        } else {
          ur.target_rate = 0.0;
          pset[ur.slot] = c.mw;
          pref0[ur.slot] = c.mw + pagc[ur.slot];
        }
        text = "setpoint of " + c.unit + " to " + fmt_num(c.mw) + " MW" +
               (c.ramp_mw_per_s ? " at " + fmt_num(*c.ramp_mw_per_s) + " MW/s" : "");
        break;
      }
      case CommandKind::governor: {
        const std::size_t u = unit_idx(c.unit);
        UnitRt& ur = units[u];
        if (c.droop) ur.droop = *c.droop;
        if (c.deadband_hz) ur.deadband_hz = *c.deadband_hz;
        if (c.deadband) ur.deadband = *c.deadband;
        if (c.mode && *c.mode != ur.mode) {
          // Leaving isochronous mode, the integrator's output is taken into the setpoint so the
          // reference does not jump; entering it, the integrator starts from zero.
          double& iso = state(u, blocks[ur.block].nstate - 1);
          if (ur.mode == GovernorMode::isochronous) {
            pset[ur.slot] += iso;
            ur.target_mw = pset[ur.slot];
            pref0[ur.slot] = pset[ur.slot] + pagc[ur.slot];
          }
          iso = 0.0;
          ur.mode = *c.mode;
          rebuild_segments();
        }
        set_governor_gains(u);
        fill_type_params(u);
        text = "governor of " + c.unit + ": droop " + fmt_num(ur.droop) + ", deadband " +
               fmt_num(ur.deadband_hz) + " Hz " + to_string(ur.deadband) + ", " + to_string(ur.mode);
        break;
      }
      case CommandKind::tie_trip: {
        const std::size_t ti = tie_idx(c.tie);
        text = "tie " + c.tie + " tripped carrying " + fmt_fixed(ties[ti].flow, 1) + " MW";
        trip_tie(ti, "trip of tie " + c.tie);
        break;
      }
      case CommandKind::tie_close: {
        const std::size_t ti = tie_idx(c.tie);
        TieRt& tr = ties[ti];
        // Closing between islands: shift the joining island's angles by whole turns so the
        // tracked (unwrapped) difference starts within +/-180 degrees.
        if (areas[tr.from].island != areas[tr.to].island) {
          const double d = y[na + tr.from] - y[na + tr.to];
          const double turns = std::round(d / kTwoPi);
          const int isl = areas[tr.to].island;
          for (std::size_t a = 0; a < na; ++a)
            if (areas[a].island == isl) y[na + a] += turns * kTwoPi;
        }
        tr.in_service = true;
        update_topology();
        invalidate_outputs();
        text = "tie " + c.tie + " closed at " +
               fmt_fixed((y[na + tr.from] - y[na + tr.to]) * 180.0 / std::numbers::pi, 1) + " deg";
        break;
      }
      case CommandKind::agc: {
        const std::size_t a = area_idx(c.area);
        areas[a].agc_on = c.enabled;
        text = std::string("secondary control ") + (c.enabled ? "on" : "off") + " in area " + c.area;
        break;
      }
      case CommandKind::fluctuation: {
        AreaRt& ar = areas[area_idx(c.area)];
        ar.noise_sigma = c.sigma_mw;
        ar.noise_tau = c.tau_s;
        if (c.sigma_mw <= 0.0) ar.noise_mw = 0.0;
        text = c.sigma_mw > 0.0 ? "load fluctuation " + fmt_num(c.sigma_mw) + " MW (tau " +
                                      fmt_num(c.tau_s) + " s) in area " + c.area
                                : "load fluctuation off in area " + c.area;
        break;
      }
    }
    invalidate_outputs();
    notices.push_back({t, "command", text});
  }

  // ---------------------------------------------------------------- metrics
  std::vector<std::size_t> island_areas(std::size_t a) const {
    std::vector<std::size_t> out;
    for (std::size_t b = 0; b < na; ++b)
      if (areas[b].island == areas[a].island && !areas[b].collapsed) out.push_back(b);
    return out;
  }

  double coi_deviation(const std::vector<std::uint32_t>& ids, const double* df) const {
    double num = 0.0, den = 0.0;
    for (std::uint32_t a : ids) {
      if (areas[a].collapsed) continue;
      num += areas[a].m * df[a];
      den += areas[a].m;
    }
    return den > 0.0 ? num / den : 0.0;
  }

  void open_disturbance(std::size_t area, double delta, CommandKind kind, const std::string& cause) {
    ensure_outputs();
    const std::vector<std::size_t> isl = island_areas(area);
    std::vector<std::uint32_t> ids(isl.begin(), isl.end());
    // Same instant, same island: one disturbance with the imbalances added.
    for (Tracker& tk : trackers) {
      Disturbance& d = records[tk.record];
      if (tk.n0 == n && d.areas == ids) {
        d.delta_mw += delta;
        d.cause += "; " + cause;
        finish_prediction(d, tk);
        return;
      }
    }
    // A new disturbance ends the windows of earlier ones in the same island.
    for (std::size_t i = 0; i < trackers.size();) {
      const Disturbance& d = records[trackers[i].record];
      const bool overlap = std::any_of(d.areas.begin(), d.areas.end(), [&](std::uint32_t a) {
        return std::find(ids.begin(), ids.end(), a) != ids.end();
      });
      if (overlap) {
        close_tracker(i);
      } else {
        ++i;
      }
    }
    Disturbance d;
    d.kind = kind;
    d.cause = cause;
    d.at_s = time();
    d.areas = ids;
    d.delta_mw = delta;
    // Pre-event mean over what the history holds of the last 16 s.
    const std::int64_t first = std::max<std::int64_t>(0, n - static_cast<std::int64_t>(ring_len) + 1);
    double sum = 0.0;
    std::int64_t count = 0;
    std::vector<double> df(na);
    for (std::int64_t i = first; i < n; ++i) {
      for (std::size_t a = 0; a < na; ++a) df[a] = ring[(static_cast<std::size_t>(i) % ring_len) * na + a];
      sum += coi_deviation(ids, df.data());
      ++count;
    }
    const double now = coi_deviation(ids, y.data());
    d.pre_hz = f0 + (count ? sum / static_cast<double>(count) : now);
    Tracker tk;
    tk.record = records.size();
    tk.n0 = n;
    tk.f_start = f0 + now;
    for (std::size_t s = 0; s < nu; ++s) {
      const std::size_t u = unit_of_slot[s];
      if (!units[u].online) continue;
      if (std::find(ids.begin(), ids.end(), units[u].area) == ids.end()) continue;
      tk.slots.push_back(s);
    }
    std::sort(tk.slots.begin(), tk.slots.end(),
              [&](std::size_t a, std::size_t b) { return unit_of_slot[a] < unit_of_slot[b]; });
    for (std::size_t s : tk.slots) {
      UnitResponse r;
      r.unit = static_cast<std::uint32_t>(unit_of_slot[s]);
      r.p_at_start_mw = pm[s];
      d.units.push_back(r);
    }
    d.zenith = delta < 0.0;
    d.nadir_hz = tk.f_start;
    d.nadir_at_s = d.at_s;
    records.push_back(std::move(d));
    finish_prediction(records.back(), tk);
    trackers.push_back(std::move(tk));
  }

  // Static droop prediction: the frequency where the island's natural response covers delta.
  void finish_prediction(Disturbance& d, const Tracker& tk) {
    double beta = 0.0;
    for (std::uint32_t a : d.areas) beta += areas[a].dmp;
    for (std::size_t s : tk.slots) beta += kd[s];
    d.zenith = d.delta_mw < 0.0;
    d.predicted_settling_hz = beta > 0.0 ? d.pre_hz - d.delta_mw / beta : d.pre_hz;
    const double dev = d.pre_hz - d.predicted_settling_hz;
    for (std::size_t i = 0; i < tk.slots.size(); ++i) d.units[i].predicted_mw = kd[tk.slots[i]] * dev;
  }

  void close_tracker(std::size_t i) {
    records[trackers[i].record].open = false;
    trackers.erase(trackers.begin() + static_cast<std::ptrdiff_t>(i));
  }

  void update_metrics() {
    for (std::size_t i = 0; i < trackers.size();) {
      Tracker& tk = trackers[i];
      Disturbance& d = records[tk.record];
      const std::int64_t kk = n - tk.n0;
      const double f = f0 + coi_deviation(d.areas, y.data());
      if (kk == k_rocof) d.rocof_hz_per_s = (f - tk.f_start) / (static_cast<double>(kk) * h);
      if (d.zenith ? f > *d.nadir_hz : f < *d.nadir_hz) {
        d.nadir_hz = f;
        d.nadir_at_s = time();
      }
      if (kk >= k_settle_begin && kk <= k_settle_end) {
        tk.settle_sum += f;
        ++tk.settle_count;
        if (kk == k_settle_end) {
          d.settling_hz = tk.settle_sum / static_cast<double>(tk.settle_count);
          const double dev = d.pre_hz - *d.settling_hz;
          if (std::fabs(dev) > 1e-12) d.response_mw_per_0p1hz = d.delta_mw / (10.0 * dev);
        }
      }
      if (kk == k10 || kk == k30) {
        ensure_outputs();
        for (std::size_t u = 0; u < tk.slots.size(); ++u) {
          const double change = pm[tk.slots[u]] - d.units[u].p_at_start_mw;
          (kk == k10 ? d.units[u].response_10s_mw : d.units[u].response_30s_mw) = change;
        }
      }
      bool all_gone = true;
      for (std::uint32_t a : d.areas) all_gone = all_gone && areas[a].collapsed;
      if (kk >= k_close || all_gone) {
        close_tracker(i);
      } else {
        ++i;
      }
    }
  }
};

// -------------------------------------------------------------------- public interface

Engine::Engine(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Engine::~Engine() = default;

CreateResult Engine::create(const SystemDef& def) {
  CreateResult out;
  out.issues = validate(def);
  if (has_errors(out.issues)) return out;
  std::vector<Issue> flow_issues;
  auto flows = solve_initial_flows(def, flow_issues);
  if (!flows) {
    out.issues.insert(out.issues.begin(), flow_issues.begin(), flow_issues.end());
    return out;
  }
  out.engine = std::unique_ptr<Engine>(new Engine(std::make_unique<Impl>(def, *flows)));
  return out;
}

std::unique_ptr<Engine> Engine::clone() const {
  return std::unique_ptr<Engine>(new Engine(std::make_unique<Impl>(*impl_)));
}

void Engine::step() { impl_->step(); }

void Engine::set_task_runner(TaskRunner* runner) { impl_->runner = runner; }

void Engine::run(std::int64_t max_steps) {
  for (std::int64_t i = 0; i < max_steps && impl_->n < impl_->n_total; ++i) impl_->step();
}

bool Engine::finished() const { return impl_->n >= impl_->n_total; }

void Engine::close_disturbances() {
  while (!impl_->trackers.empty()) impl_->close_tracker(0);
}

ApplyResult Engine::apply(const Command& command) {
  return impl_->apply_checked(std::span<const Command>(&command, 1));
}

ApplyResult Engine::apply_all(std::span<const Command> commands) {
  return impl_->apply_checked(commands);
}

ApplyResult Engine::check_all(std::span<const Command> commands) const {
  return impl_->check(commands);
}

double Engine::time_s() const { return impl_->time(); }
std::int64_t Engine::step_index() const { return impl_->n; }
const SystemDef& Engine::def() const { return impl_->def; }

std::optional<AreaId> Engine::find_area(std::string_view id) const {
  for (std::size_t a = 0; a < impl_->na; ++a)
    if (impl_->def.areas[a].id == id) return AreaId{static_cast<std::uint32_t>(a)};
  return std::nullopt;
}
std::optional<UnitId> Engine::find_unit(std::string_view id) const {
  for (std::size_t u = 0; u < impl_->nu; ++u)
    if (impl_->def.units[u].id == id) return UnitId{static_cast<std::uint32_t>(u)};
  return std::nullopt;
}
std::optional<TieId> Engine::find_tie(std::string_view id) const {
  for (std::size_t t = 0; t < impl_->nt; ++t)
    if (impl_->def.ties[t].id == id) return TieId{static_cast<std::uint32_t>(t)};
  return std::nullopt;
}

AreaState Engine::area(AreaId id) const {
  if (id.index >= impl_->na) throw std::out_of_range("no area with index " + std::to_string(id.index));
  impl_->ensure_outputs();
  Impl& m = *impl_;
  const std::size_t a = id.index;
  const auto& ar = m.areas[a];
  AreaState s;
  s.f_hz = m.f0 + m.y[a];
  s.rocof_hz_per_s = m.rocof[a];
  s.demand_mw = m.current_load(a, m.time());
  s.generation_mw = m.out_gen[a];
  s.export_mw = m.out_net[a];
  s.scheduled_export_mw = ar.sched_export;
  s.ace_mw = m.ace(a);
  s.agc_mw = ar.agc_total;
  s.shed_mw = ar.shed_mw;
  s.inertia_mws_per_hz = ar.m;
  s.agc_enabled = ar.agc_on;
  s.collapsed = ar.collapsed;
  s.island = ar.island;
  return s;
}

UnitState Engine::unit(UnitId id) const {
  if (id.index >= impl_->nu) throw std::out_of_range("no unit with index " + std::to_string(id.index));
  impl_->ensure_outputs();
  const Impl& m = *impl_;
  const auto& ur = m.units[id.index];
  const auto& b = m.blocks[ur.block];
  const std::size_t s = ur.slot;
  UnitState st;
  st.p_mw = m.pm[s];
  st.setpoint_mw = m.pset[s];
  st.agc_mw = m.pagc[s];
  st.valve_mw = m.y[b.off + valve_state(b.type) * b.n + ur.j];
  st.droop = ur.droop;
  st.deadband_hz = ur.deadband_hz;
  st.deadband = ur.deadband;
  st.mode = ur.mode;
  double hi = m.def_pmax[s];
  if (b.type == TurbineType::gas) hi = std::min(hi, b.p3[ur.j]);
  st.headroom_up_mw = ur.online ? std::max(0.0, hi - st.p_mw) : 0.0;
  st.headroom_down_mw = ur.online ? std::max(0.0, st.p_mw - m.def_pmin[s]) : 0.0;
  if (b.type == TurbineType::battery) st.energy_mwh = m.y[b.off + 2 * b.n + ur.j];
  const double tol = 1e-6 * std::max(1.0, std::fabs(hi));
  if (!ur.online)
    st.status = UnitStatus::tripped;
  else if (st.valve_mw >= hi - tol ||
           (b.type == TurbineType::battery && st.energy_mwh <= 0.0 && st.p_mw <= tol))
    st.status = UnitStatus::at_max;
  else if (st.valve_mw <= m.def_pmin[s] + tol ||
           (b.type == TurbineType::battery && st.energy_mwh >= b.p4[ur.j] && st.p_mw >= -tol))
    st.status = UnitStatus::at_min;
  return st;
}

TieState Engine::tie(TieId id) const {
  if (id.index >= impl_->nt) throw std::out_of_range("no tie with index " + std::to_string(id.index));
  impl_->ensure_outputs();
  const Impl& m = *impl_;
  const auto& tr = m.ties[id.index];
  TieState s;
  s.flow_mw = tr.flow;
  s.angle_deg = (m.y[m.na + tr.from] - m.y[m.na + tr.to]) * 180.0 / std::numbers::pi;
  s.scheduled_mw = tr.scheduled;
  s.in_service = tr.in_service;
  return s;
}

const std::vector<Disturbance>& Engine::disturbances() const { return impl_->records; }

std::vector<Notice> Engine::take_notices() {
  std::vector<Notice> out;
  out.swap(impl_->notices);
  return out;
}

std::vector<double> Engine::state() const { return impl_->y; }
std::vector<std::string> Engine::state_names() const { return impl_->state_names(); }

void Engine::set_state(std::span<const double> x) {
  if (x.size() != impl_->y.size())
    throw std::invalid_argument("set_state: the state has " + std::to_string(impl_->y.size()) + " values");
  std::copy(x.begin(), x.end(), impl_->y.begin());
  impl_->invalidate_outputs();
}

bool Engine::finite() const {
  // The outputs are derived from the state (bounded sums and sines of it): checking the state
  // is enough, and it does not work out the outputs every step of a live loop.
  const std::vector<double>& y = impl_->y;
  return std::all_of(y.begin(), y.end(), [](double x) { return std::isfinite(x); });
}
void Engine::step_state(std::span<const double> x, std::span<double> next) {
  if (x.size() != impl_->y.size() || next.size() != impl_->y.size())
    throw std::invalid_argument("step_state: the state has " + std::to_string(impl_->y.size()) + " values");
  impl_->step_state(x, next);
}

std::size_t Engine::series_width() const { return 1 + impl_->na + impl_->nu + impl_->nt; }

std::vector<std::string> Engine::series_columns() const {
  std::vector<std::string> cols{"t_s"};
  for (const AreaDef& a : impl_->def.areas) cols.push_back(a.id + ".f_hz");
  for (const UnitDef& u : impl_->def.units) cols.push_back(u.id + ".p_mw");
  for (const TieDef& t : impl_->def.ties) cols.push_back(t.id + ".flow_mw");
  return cols;
}

void Engine::sample(std::span<double> row) const {
  impl_->ensure_outputs();
  const Impl& m = *impl_;
  if (row.size() < series_width()) throw std::out_of_range("series row too short");
  std::size_t i = 0;
  row[i++] = m.time();
  for (std::size_t a = 0; a < m.na; ++a) row[i++] = m.f0 + m.y[a];
  for (std::size_t u = 0; u < m.nu; ++u) row[i++] = m.pm[m.units[u].slot];
  for (std::size_t t = 0; t < m.nt; ++t) row[i++] = m.ties[t].flow;
}

}  // namespace droopline
