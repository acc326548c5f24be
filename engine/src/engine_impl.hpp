#pragma once
// The engine's private state and the member functions that work on it, spread over one file per
// concern: layout.cpp (state layout, start-up of units), topology.cpp (islands, inertia,
// participants), integration.cpp (RK4 stages, pieces, the task runner, the step), outputs.cpp
// (derived outputs, state names), commands.cpp (live checks, perform), agc.cpp (secondary
// control), protection.cpp (shedding, out-of-step trips, collapse); disturbances.hpp (metrics).
#include <array>
#include <cstdint>
#include <limits>
#include <optional>
#include <span>
#include <string>
#include <utility>
#include <vector>

#include "disturbances.hpp"
#include "droopline/engine.hpp"
#include "kernels.hpp"
#include "models/model_base.hpp"
#include "noise.hpp"

namespace droopline::detail {

/// A notice of `kind` at `t_s`, about `action` when given; the caller fills in the rest.
inline Notice notice_at(double t_s, NoticeKind kind, std::optional<Action> action = std::nullopt) {
  Notice n;
  n.t_s = t_s;
  n.kind = kind;
  n.action = std::move(action);
  return n;
}

/// Ramp rate standing for "no ramp limit" (MW/s).
inline constexpr double kNoRamp = 1e300;

/// A maximal run of units of one block sharing area and governor mode.
struct Segment {
  std::size_t area, begin, end;  // [begin, end) within the block
  bool iso;                      // isochronous units: the kernel runs their integrator too
};

/// The units of one turbine type: contiguous slots, and their states in the state vector as
/// `y[off + state * n + j]` (one array per state, so the kernels stream them).
struct Block {
  TurbineType type = TurbineType::steam;
  std::size_t first_slot = 0, n = 0, off = 0, nstate = 0;
  std::vector<Segment> segments;
  std::array<std::vector<double>, kMaxParams> params;  // by the model's Param list (models/*.hpp)
};

/// At most kPieceUnits units of one segment: the unit of work of a stage.
struct Piece {
  std::size_t block, area, begin, end;  // [begin, end) within the block
  bool iso;
};

/// A piece's kernel arguments, worked out once for the layout rather than at every stage: in a
/// small system the stage's work per unit is so small that gathering them was a third of it.
/// They point into the state and parameter arrays, so they are worked out again whenever one of
/// those may have moved (see Engine::Impl::refresh_calls).
struct PieceCall {
  GovernorParams g;
  ModelParams tp;
  SegmentArrays arr;
  double* out;  // the units' outputs at the stage point (MW)
  std::size_t len, area;
  TurbineType type;
  bool iso;
};

/// A load ramp in progress.
struct Ramp {
  double start_s, over_s, mw;
};

/// One under-frequency shedding stage's timer.
struct ShedTimer {
  double timer_s = 0.0;  // time spent below the threshold since it was first seen below
  bool below = false;
  bool done = false;     // picked up; re-armed once all its load is restored
  double shed_mw = 0.0;  // its load still disconnected (MW)
};

/// An area's load, protection, secondary control and topology.
struct AreaRt {
  // Load
  double pd0 = 0.0, dmp = 0.0;  // initial demand (MW), damping D*Pd0/f0 (MW/Hz)
  double steps_mw = 0.0;        // accumulated load steps and finished ramps
  std::vector<Ramp> ramps;
  double noise_sigma = 0.0, noise_tau = 1.0, noise_mw = 0.0, noise_next = 0.0;
  NormalSource rng;
  // Protection and shedding by hand
  double shed_mw = 0.0;         // all load disconnected now (MW): the stages' and by hand
  double manual_shed_mw = 0.0;  // the part shed by hand (MW)
  std::vector<ShedTimer> stages;
  // Topology
  double m = 0.0;  // 2*sum(H S)/f0 (MW s/Hz)
  bool collapsed = false;
  int island = 0;
  // Secondary control
  bool agc_on = false;
  double bias = 0.0, kp = 0.0, ki = 0.0;
  std::int64_t period_steps = 1;
  AgcMode agc_mode = AgcMode::tie_line_bias;
  double integral = 0.0, agc_total = 0.0, sched_export = 0.0;
  std::vector<std::size_t> participants;  // slots
  // A schedule set by command overrides the tie-based one; it may be ramping
  bool sched_manual = false, sched_ramping = false;
  double sched_from = 0.0, sched_to = 0.0;
  std::int64_t sched_n0 = 0, sched_steps = 1;
};

/// A unit's place in the layout and its governor settings now.
struct UnitRt {
  std::size_t slot = 0, block = 0, j = 0, area = 0;
  bool online = true, tripped = false;
  bool starting = false, stopping = false, stopped = false;  // start-up, controlled stop, ended by one
  std::int64_t sync_step = 0;                                // starting: the step at which it synchronises
  double start_mw = 0.0;                                     // starting: the setpoint it then loads to (MW)
  std::int64_t stop_at_zero = -1;  // stopping: the step its setpoint reached zero (-1: not yet)
  double stop_last_p = 0.0;        // stopping: its output a whole second ago (MW)
  double droop = 0.05, deadband_hz = 0.0;
  DeadbandKind deadband = DeadbandKind::offset;
  GovernorMode mode = GovernorMode::droop;
  double target_mw = 0.0, target_rate = 0.0;  // setpoint ramp in progress when rate > 0
};

/// A tie's parameters and its flow after the last step.
struct TieRt {
  std::size_t from = 0, to = 0;
  double pmax = 0.0, dt = 0.0, trip_rad = std::numeric_limits<double>::infinity();
  double scheduled = 0.0, flow = 0.0;
  bool in_service = true;
};

/// Everything the engine holds. Units live in slots sorted by (type, area, mode); per-slot arrays
/// are indexed by slot, `units` by file order.
struct EngineState {
  /// Starts from a checked system (shared, never changed): `def` refers into it.
  explicit EngineState(const CheckedSystem& checked) : system(checked), def(system.def()) {}
  EngineState(const EngineState&) = default;  // a clone shares the checked system

  CheckedSystem system;
  const SystemDef& def;
  double f0 = 50.0, h = 0.01;
  double steps_per_s = 0.0;  // 1/h when that is a whole number (see time())
  std::int64_t n = 0, n_total = 0;
  std::size_t na = 0, nt = 0, nu = 0;
  std::vector<AreaRt> areas;
  std::vector<TieRt> ties;
  std::vector<UnitRt> units;
  std::vector<Block> blocks;
  std::vector<std::size_t> unit_of_slot;
  std::vector<int> active_ties;

  // Per slot, read by the kernels (GovernorParams)
  std::vector<double> pref0, kd, kiso, dbs, inv_lag, ramp, pmin, pmax;
  // Per slot, read outside the stage loop
  std::vector<double> pset, pagc, pm;
  // Per slot: the definition's limits and ramp, restored on unit start
  std::vector<double> def_pmin, def_pmax, def_ramp;
  // State (areas' df, areas' angles, then the blocks) and RK4 work arrays (k: the latest slope)
  std::vector<double> y, k, acc, pm_stage;
  // Per area at the stage point
  std::vector<double> dfv, thv, gen, net_out, lc0, lc1, inv_m;
  // Derived outputs after the last step (see ensure_outputs)
  std::vector<double> out_gen, out_net, rocof;
  bool outputs_valid = false;
  std::vector<std::size_t> ramping;  // units whose setpoint is moving
  std::size_t changing_units = 0;    // units starting or stopping (post_step scans them when > 0)
  bool sched_ramps = false;          // some area's schedule is ramping

  // Work pieces of a stage and the task runner
  std::vector<Piece> pieces;
  std::vector<double> piece_gen;
  std::vector<PieceCall> calls;   // by piece
  const void* calls_key[3] = {};  // this engine, y and k as the calls were worked out for

  TaskRunner* runner = nullptr;
  int stage_now = 1;
  double stage_c = 0.0;
  // step_imposed: per area the frequency deviation at each of a step's four stage points (Hz);
  // null in a normal step, where the swing equation gives it.
  const double* imposed_df = nullptr;

  // Secondary-control scratch, sized for every unit so the step never allocates
  std::vector<double> agc_give;
  std::vector<unsigned char> agc_fixed;
  // step_state's saved state, pre-sized
  std::vector<double> saved_y;

  // Events, notices and metrics
  std::vector<std::pair<std::int64_t, Action>> schedule;
  std::size_t next_event = 0;
  std::vector<Notice> notices;
  DisturbanceTracker metrics;

  /// Simulation time: n / (steps per second) when that is a whole number, so 278 steps of 0.01 s
  /// print as 2.78, not as 2.7800000000000002.
  double time() const { return steps_per_s > 0.0 ? static_cast<double>(n) / steps_per_s : static_cast<double>(n) * h; }
  /// Unit u's state `which` (block order of its model).
  double& state(std::size_t u, std::size_t which) {
    const UnitRt& ur = units[u];
    const Block& b = blocks[ur.block];
    return y[b.off + which * b.n + ur.j];
  }
};

}  // namespace droopline::detail

namespace droopline {

struct Engine::Impl : detail::EngineState {
  /// A piece holds at most this many units; the split depends on the layout only, never on the
  /// number of threads, so sums over pieces come out the same with any runner.
  static constexpr std::size_t kPieceUnits = 1024;
  /// Fleets from this size spread their stages over the task runner.
  static constexpr std::size_t kParallelMinUnits = 4096;

  // layout.cpp
  explicit Impl(const CheckedSystem& checked);
  void fill_type_params(std::size_t u);
  void rebuild_segments();
  void rebuild_pieces();
  void set_governor_gains(std::size_t u);
  void bring_online(std::size_t u, double mw, bool steady);
  void take_offline(std::size_t u);
  void begin_start(std::size_t u, double mw);
  void begin_stop(std::size_t u, double rate_mw_per_s);
  void advance_units();
  void advance_schedules();

  // topology.cpp
  void update_inertia();
  void update_topology();
  void refresh_participants(std::size_t a);

  // integration.cpp
  static void run_task(void* self, std::size_t task, std::size_t tasks);
  void run_piece(std::size_t p);
  void refresh_calls();
  void stage(int st);
  double extra_load(const detail::AreaRt& ar, double t) const;
  void step();
  void begin_step();   // events due, load at both ends of the step
  void finish_step();  // the step count, then post_step
  void step_state(std::span<const double> x, std::span<double> next);
  void step_imposed(std::span<const double> df_hz);
  void post_step();

  // outputs.cpp
  void invalidate_outputs() { outputs_valid = false; }
  void ensure_outputs();
  double current_load(std::size_t a, double t) const;
  UnitState unit_state(std::size_t u);
  std::vector<std::string> state_names() const;

  // agc.cpp
  double ace(std::size_t a);
  void run_agc(std::size_t a);
  double allocate_agc(std::size_t a, double want, bool commit);

  // protection.cpp
  void check_out_of_step();
  void check_shedding(std::size_t a);
  void trip_tie(std::size_t t, const std::optional<Action>& by);
  void collapse_area_if_dead(std::size_t a);
  double connected_load(std::size_t a) const;
  std::uint32_t restore_load(std::size_t a, double mw);

  // commands.cpp
  struct Shadow {
    std::vector<bool> unit_online, unit_starting, unit_stopping, tie_in;
    std::vector<double> droop;            // as the commands checked so far would leave them
    std::vector<double> shed, connected;  // per area (MW)
  };
  std::optional<Issue> dynamic_error(const Action& a, Shadow& sh, const std::string& path) const;
  Shadow shadow() const;
  ApplyResult apply_checked(std::span<const Action> cmds);
  ApplyResult check(std::span<const Action> cmds) const;
  void perform(const Action& a);
  void open_disturbance(std::size_t area, double delta, CommandKind kind, const Notice& cause) {
    ensure_outputs();
    metrics.open(*this, area, delta, kind, cause);
  }
};

}  // namespace droopline
