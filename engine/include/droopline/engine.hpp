#pragma once
/// The fixed-step frequency-response engine: create from a SystemDef, step, read.
#include <cstdint>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "droopline/commands.hpp"
#include "droopline/defs.hpp"
#include "droopline/ids.hpp"
#include "droopline/validate.hpp"

namespace droopline {

/// Operating state of a unit.
enum class UnitStatus {
  online,
  at_max,
  at_min,
  tripped,   ///< out of service by a trip (or offline from the start)
  starting,  ///< started, not yet synchronised: no output, no inertia (start_up_s)
  stopping,  ///< online, unloading towards zero before it goes offline (unit_stop)
  offline    ///< out of service after a controlled stop
};
/// File and message name of a UnitStatus.
const char* to_string(UnitStatus s);
/// True while the unit is synchronised (online, at a limit, or stopping): it gives power and inertia.
inline bool is_synchronised(UnitStatus s) {
  return s == UnitStatus::online || s == UnitStatus::at_max || s == UnitStatus::at_min || s == UnitStatus::stopping;
}

/// Snapshot of one area after the last step.
struct AreaState {
  double f_hz = 0.0;           ///< area frequency (Hz)
  double rocof_hz_per_s = 0.0; ///< d f / dt at the end of the last step (Hz/s)
  double demand_mw = 0.0;      ///< load including frequency dependence, steps, shedding, noise
  double generation_mw = 0.0;  ///< sum of online units' mechanical power (MW)
  double export_mw = 0.0;      ///< net flow out over in-service ties (MW)
  double scheduled_export_mw = 0.0; ///< exchange schedule the ACE compares against (MW)
  double ace_mw = 0.0;         ///< area control error (MW), computed whether or not AGC runs
  double agc_mw = 0.0;         ///< total secondary-control correction now applied (MW)
  double shed_mw = 0.0;        ///< load disconnected now, by the under-frequency stages and by hand (MW)
  double inertia_mws_per_hz = 0.0; ///< M = 2*sum(H*S)/f0 of online synchronous units
  bool agc_enabled = false;
  AgcMode agc_mode = AgcMode::tie_line_bias;  ///< what the ACE compares
  bool collapsed = false;      ///< lost all synchronous inertia: no longer integrated
  int island = 0;              ///< index of the island the area belongs to
};

/// Snapshot of one unit after the last step.
struct UnitState {
  double p_mw = 0.0;           ///< mechanical (battery: electrical) output (MW)
  double setpoint_mw = 0.0;    ///< current dispatch setpoint (MW)
  double agc_mw = 0.0;         ///< secondary-control correction (MW)
  double valve_mw = 0.0;       ///< valve / gate position in MW terms (battery: output)
  double headroom_up_mw = 0.0; ///< max_mw - p_mw
  double headroom_down_mw = 0.0; ///< p_mw - min_mw
  double droop = 0.0;          ///< current R (pu)
  double deadband_hz = 0.0;    ///< current half-width (Hz)
  DeadbandKind deadband = DeadbandKind::offset;
  GovernorMode mode = GovernorMode::droop;
  double energy_mwh = 0.0;     ///< battery: stored energy (MWh); 0 for other types
  UnitStatus status = UnitStatus::online;
};

/// Snapshot of one tie after the last step.
struct TieState {
  double flow_mw = 0.0;        ///< from -> to (MW), 0 when out of service
  double angle_deg = 0.0;      ///< theta_from - theta_to, unwrapped (deg)
  double scheduled_mw = 0.0;   ///< initial exchange (MW)
  bool in_service = true;
};

/// What a notice reports.
enum class NoticeKind {
  command,            ///< a command took effect (`action`, `value`)
  command_refused,    ///< a scenario event was refused by the state checks (`action`, `issues`)
  out_of_step,        ///< a tie tripped out of step (`tie`, `value`: angle in deg)
  shedding,           ///< an under-frequency stage shed load (`area`, `stage`, `value`: MW shed)
  collapse,           ///< an area lost all synchronous inertia (`area`)
  islanded,           ///< a disturbance cause only: a tie trip split the system (`tie`, `area`: the island's
                      ///< area; `action` set when a command tripped it, absent when out of step)
  unit_synchronised,  ///< a starting unit's start-up time passed: it is online (`action`: its UnitStart)
  unit_stopped        ///< a controlled stop ended: the unit is offline (`action`: its UnitStop, `value`: MW
                      ///< it gave when its breaker opened)
};
/// File and message name of a NoticeKind.
const char* to_string(NoticeKind k);

/// Something that happened inside the engine (command, refusal, shedding, out-of-step, collapse),
/// as data: its text is written at the boundary (`describe` in scenario_io.hpp).
struct Notice {
  double t_s = 0.0;                       ///< when (s)
  NoticeKind kind = NoticeKind::command;  ///< what happened
  std::optional<Action> action;  ///< command, command_refused: the action (governor: every setting as it now stands)
  std::uint32_t area = 0;        ///< shedding, collapse: the area; islanded: the island's area
  std::uint32_t tie = 0;         ///< out_of_step, islanded: the tie
  std::uint32_t stage = 0;       ///< shedding: the stage (0-based); command restore: stages re-armed
  double value = 0.0;            ///< command unit_trip: MW lost, tie_trip: MW carried, tie_close: angle (deg),
                                 ///< unit_stop: unloading rate (MW/s), schedule: the schedule before (MW),
                                 ///< restore: MW reconnected; out_of_step: angle (deg); shedding: MW shed
  std::vector<Issue> issues;  ///< command_refused: why
};

/// One unit's part in a disturbance.
struct UnitResponse {
  std::uint32_t unit = 0;                   ///< unit index
  double p_at_start_mw = 0.0;               ///< output when the disturbance began (MW)
  std::optional<double> response_10s_mw;    ///< change in output 10 s after (MW)
  std::optional<double> response_30s_mw;    ///< change in output 30 s after (MW)
  double predicted_mw = 0.0;                ///< static droop share: S/(R f0) * (f0 - predicted f)
};

/// Metrics of one disturbance in one island, filled in as the run goes.
struct Disturbance {
  CommandKind kind = CommandKind::load_step; ///< first cause
  std::vector<Notice> causes;              ///< every cause at t0 (`describe_cause` writes them)
  double at_s = 0.0;                       ///< t0 (s)
  std::vector<std::uint32_t> areas;        ///< areas of the island (indices)
  double delta_mw = 0.0;                   ///< imbalance, positive = deficit (MW)
  double pre_hz = 0.0;                     ///< mean frequency over up to 16 s before t0 (Hz)
  std::optional<double> rocof_hz_per_s;    ///< (f(t0+0.5) - f(t0)) / 0.5 (Hz/s)
  bool zenith = false;                     ///< true for a surplus: the extreme is a maximum
  std::optional<double> nadir_hz;          ///< lowest (zenith: highest) frequency (Hz)
  std::optional<double> nadir_at_s;        ///< time of that extreme (s, absolute)
  std::optional<double> settling_hz;       ///< mean over t0+20 .. t0+52 s (Hz)
  std::optional<double> response_mw_per_0p1hz; ///< delta_mw / (10 * (pre_hz - settling_hz))
  double predicted_settling_hz = 0.0;      ///< f0 - delta_mw / sum(beta), limits ignored (Hz)
  std::vector<UnitResponse> units;         ///< every online unit of the island
  bool open = true;                        ///< still collecting (the window has not ended)
};

/// Result of applying (or checking) commands between steps.
struct ApplyResult {
  bool ok = false;            ///< every command passed the checks of the live state
  std::vector<Issue> issues;  ///< why not, one problem each (`command.unit`, `commands[i].tie`, ...)
  double at_s = 0.0;          ///< simulation time at which the commands took (or would take) effect
};

/// Runs independent tasks, possibly in parallel, for engines with large fleets. The engine
/// owns no threads: a caller that has some hands them in through this interface.
class TaskRunner {
 public:
  virtual ~TaskRunner() = default;
  /// How many tasks can usefully run at once.
  virtual std::size_t concurrency() const = 0;
  /// Calls fn(ctx, i, count) for i in [0, count) and returns when every call has returned.
  virtual void run(std::size_t count, void (*fn)(void* ctx, std::size_t i, std::size_t count),
                   void* ctx) = 0;
};

/// Fixed-step RK4 simulation of areas, units and ties. Not thread-safe: drive it from one thread.
class Engine {
 public:
  /// An engine at t = 0 of a checked system (copied): see check() and the scenario loader.
  static std::unique_ptr<Engine> create(const CheckedSystem& system);
  ~Engine();
  Engine(const Engine&) = delete;
  Engine& operator=(const Engine&) = delete;
  /// An independent copy at the same step (a checkpoint): stepping either leaves the other as it
  /// was. The task runner, if any, is shared.
  std::unique_ptr<Engine> clone() const;

  /// Lets large fleets (4096 units and more) spread each stage over `runner` (null: one thread).
  /// Results are bit-identical either way. The runner must outlive its use by this engine.
  void set_task_runner(TaskRunner* runner);

  /// Applies the scheduled events due now, then advances exactly one step.
  void step();
  /// step() with every area's frequency imposed instead of integrated (no swing equation: playback
  /// of a recorded frequency): `df_hz` holds, per area in order, its deviation from f0 (Hz) at each
  /// of the four RK4 stage points, which the units' own stage kernels see; the area's deviation
  /// after the step is the fourth. Throws std::invalid_argument unless it holds 4 values per area.
  void step_imposed(std::span<const double> df_hz);
  /// Steps until duration_s (or until `max_steps` more steps were taken).
  void run(std::int64_t max_steps = INT64_MAX);
  /// True once the scenario's duration is reached (step() may still be called: it runs on).
  bool finished() const;
  /// Closes the metric windows that are still open (end of run); values not reached stay empty.
  void close_disturbances();

  /// Applies one resolved command now (between steps), checked against the live state only (its
  /// static checks were made by resolve()). Disturbing commands open a metrics record.
  ApplyResult apply(const Action& action);
  /// Applies several commands atomically: all when every one passes the state checks, else none.
  ApplyResult apply_all(std::span<const Action> actions);
  /// What apply_all would answer, without changing anything.
  ApplyResult check_all(std::span<const Action> actions) const;

  /// Simulation time (s) = step_index * step_s.
  double time_s() const;
  /// Number of steps taken.
  std::int64_t step_index() const;
  /// The copied definition (events included).
  const SystemDef& def() const;
  /// The checked system the engine was created from (definition, id index, resolved events).
  const CheckedSystem& system() const;

  std::optional<AreaId> find_area(std::string_view id) const;  ///< by scenario id
  std::optional<UnitId> find_unit(std::string_view id) const;  ///< by scenario id
  std::optional<TieId> find_tie(std::string_view id) const;    ///< by scenario id
  AreaState area(AreaId id) const;  ///< throws std::out_of_range on a bad id
  UnitState unit(UnitId id) const;  ///< throws std::out_of_range on a bad id
  TieState tie(TieId id) const;     ///< throws std::out_of_range on a bad id

  /// Every disturbance so far, in order of time.
  const std::vector<Disturbance>& disturbances() const;
  /// Notices since the last call, oldest first.
  std::vector<Notice> take_notices();

  /// Column names of a series row: t_s, <area>.f_hz..., <unit>.p_mw..., <tie>.flow_mw...
  std::vector<std::string> series_columns() const;
  /// Writes one series row (same order as series_columns) into `row`.
  void sample(std::span<double> row) const;
  /// Number of values in a series row.
  std::size_t series_width() const;

  // Linear analysis (small-signal studies linearize the step below around a state).
  /// The integrated state: each area's frequency deviation (Hz) and angle (rad), then every
  /// unit's turbine and governor states.
  std::vector<double> state() const;
  /// Names of state(), e.g. `oskany.df_hz`, `oskany.angle_rad`, `V1.valve`, `H1.gate`.
  std::vector<std::string> state_names() const;
  /// Replaces the integrated state (same layout as state()); throws std::invalid_argument on a
  /// wrong size. Everything discrete (time, loads, trips, metrics) stays as it is.
  void set_state(std::span<const double> x);
  /// True when every integrated state is a finite number (the outputs derive from it): the check
  /// a live session makes after each step.
  bool finite() const;
  /// One integration step from state `x` into `next` with the loads held as they are now and
  /// nothing discrete run (no events, protection, shedding, secondary control, ramps or metrics);
  /// the engine's own state and time are left as they were.
  void step_state(std::span<const double> x, std::span<double> next);

 private:
  friend class Ensemble;  // steps the stages of several engines together (ensemble.hpp)
  struct Impl;
  explicit Engine(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace droopline
