#pragma once
/// Definition structs: the plain data that describes a system. The engine copies a SystemDef at
/// creation. Field names mirror the scenario file's JSON names so that validation paths read the same.
#include <cstdint>
#include <optional>
#include <string>
#include <vector>

namespace droopline {

/// Prime mover model of a unit.
enum class TurbineType { steam, reheat, hydro, gas, battery };
/// Governor control law.
enum class GovernorMode { droop, isochronous };
/// What the area control error of secondary control compares (model notes, section 12).
enum class AgcMode {
  tie_line_bias,        ///< ACE = (net export - schedule) + B*df: each area answers for its own imbalance
  constant_frequency,   ///< ACE = B*df: ties ignored (an island, or the area holding frequency)
  constant_interchange  ///< ACE = net export - schedule: frequency ignored
};
/// How the governor treats speed errors inside its deadband.
enum class DeadbandKind {
  offset,  ///< error reduced by the half-width: sign(e)*max(|e|-db, 0)
  step     ///< error passed unchanged once outside the band, zero inside
};

/// Secondary (AGC) control of one area.
struct AgcDef {
  bool enabled = false;                  ///< runs from t = 0 when true
  std::optional<double> bias_mw_per_hz;  ///< tie-line bias B (MW/Hz, > 0); default: natural response
  double kp = 0.0;                       ///< proportional gain on ACE (MW/MW), typical 0
  double ki_per_s = 0.05;                ///< integral gain on ACE (1/s), typical 0.01-0.2
  double period_s = 2.0;                 ///< sampling cycle (s); 0 = every step
  AgcMode mode = AgcMode::tie_line_bias;  ///< what the ACE compares
};

/// One under-frequency load-shedding stage.
struct SheddingStageDef {
  double below_hz = 0.0;  ///< pickup threshold (Hz), e.g. 49.0
  double delay_s = 0.0;   ///< time frequency must stay below the threshold (s), e.g. 0.1
  double shed_pct = 0.0;  ///< share of the initial demand removed (%), e.g. 5
};

/// A control area: one frequency, one aggregate load.
struct AreaDef {
  std::string id;
  double demand_mw = 0.0;     ///< initial demand P_d0 (MW)
  double load_damping = 1.0;  ///< D: % load change per 1 % frequency change, typical 0-3
  AgcDef agc;
  std::vector<SheddingStageDef> shedding;
};

/// A tie-line between two areas (sinusoidal power-transfer law).
struct TieDef {
  std::string id;
  std::string from;                      ///< area id; flow is positive from -> to
  std::string to;                        ///< area id
  double pmax_mw = 0.0;                  ///< pull-out power V1*V2/X (MW)
  double damping_mw_per_hz = 0.0;        ///< Dt, damping of the inter-area swing (MW/Hz)
  std::optional<double> trip_angle_deg;  ///< out-of-step trip angle (deg); absent = never
  bool in_service = true;
};

/// Speed governor settings.
struct GovernorDef {
  GovernorMode mode = GovernorMode::droop;
  double droop = 0.05;                       ///< R, per unit on rating, typical 0.02-0.12
  double deadband_hz = 0.0;                  ///< half-width of the deadband (Hz), typical 0.015-0.036
  DeadbandKind deadband = DeadbandKind::offset;
  double lag_s = 0.2;                        ///< governor / valve servo lag (s), typical 0.05-0.5
  double integral_s = 10.0;                  ///< isochronous reset time (s)
};

/// Prime mover parameters; only those of `type` are used.
struct TurbineDef {
  TurbineType type = TurbineType::steam;
  double steam_chest_s = 0.3;              ///< steam, reheat: steam chest lag (s), typical 0.1-0.5
  double reheat_s = 7.0;                   ///< reheat: reheater lag (s), typical 4-12
  double hp_fraction = 0.3;                ///< reheat: high-pressure share, typical 0.2-0.4
  double water_s = 1.0;                    ///< hydro: water starting time Tw (s), typical 0.5-4
  std::optional<double> temporary_droop;   ///< hydro: RT (pu); default from the design rule
  std::optional<double> reset_s;           ///< hydro: TR (s); default from the design rule
  double fuel_s = 0.4;                     ///< gas: fuel system lag (s)
  double combustion_s = 0.1;               ///< gas: combustion / compressor lag (s)
  std::optional<double> load_limit_mw;     ///< gas: load limit (MW); default the rating
  double response_s = 0.1;                 ///< battery: inverter power response lag (s)
  double synthetic_inertia_s = 0.0;        ///< battery: emulated H on its rating (s)
  double rocof_filter_s = 0.1;             ///< battery: RoCoF washout filter time constant (s)
  std::optional<double> energy_mwh;        ///< battery: usable energy capacity (MWh), required
  double soc = 0.5;                        ///< battery: initial state of charge (0-1)
};

/// A generating unit or battery.
struct UnitDef {
  std::string id;
  std::string area;                      ///< area id
  double rating_mw = 0.0;                ///< S (MW)
  double inertia_s = 0.0;                ///< H on own rating (s), typical 2-10; 0 for a battery
  double setpoint_mw = 0.0;              ///< initial dispatch (MW)
  std::optional<double> min_mw;          ///< default 0 (battery: -rating)
  std::optional<double> max_mw;          ///< default rating
  std::optional<double> ramp_mw_per_s;   ///< valve / power rate limit (MW/s); absent = none
  double agc_share = 0.0;                ///< participation share in secondary control (>= 0)
  bool online = true;
  double start_up_s = 0.0;  ///< time from a start command to synchronisation (s); 0 = at once
  GovernorDef governor;
  TurbineDef turbine;
};

/// The vocabulary of timed events and live commands.
enum class CommandKind {
  load_step, load_ramp, unit_trip, unit_start, setpoint, governor, tie_trip, tie_close, agc,
  fluctuation, unit_stop, schedule, shed, restore
};

/// One command: scenario events without their time, and live commands to the service.
struct Command {
  CommandKind kind = CommandKind::load_step;
  std::string area;                      ///< load_step, load_ramp, agc, fluctuation, schedule, shed, restore
  std::string unit;                      ///< unit_trip, unit_start, setpoint, governor, unit_stop
  std::string tie;                       ///< tie_trip, tie_close
  double mw = 0.0;                       ///< load_step, load_ramp, unit_start, setpoint, schedule, shed, restore (MW)
  bool all_shed = false;                 ///< restore without `mw`: reconnect all shed load of the area
  double over_s = 0.0;                   ///< load_ramp duration (s); schedule: ramp time, 0 = at once
  std::optional<double> ramp_mw_per_s;   ///< setpoint: move at this rate (MW/s), absent = at once;
                                         ///< unit_stop: unload at this rate, absent = the unit's default
  std::optional<double> droop;           ///< governor: new R (pu)
  std::optional<double> deadband_hz;     ///< governor: new half-width (Hz)
  std::optional<DeadbandKind> deadband;  ///< governor: new deadband kind
  std::optional<GovernorMode> mode;      ///< governor: new mode
  bool enabled = false;                  ///< agc
  std::optional<AgcMode> agc_mode;       ///< agc: new mode (JSON `mode`); absent = unchanged
  double sigma_mw = 0.0;                 ///< fluctuation: stationary standard deviation (MW); 0 = off
  double tau_s = 1.0;                    ///< fluctuation: correlation time (s)
};

/// A command scheduled at a simulation time.
struct EventDef {
  double at_s = 0.0;  ///< simulation time (s), rounded to the nearest step
  Command command;
};

/// The whole system: the scenario file's content.
struct SystemDef {
  std::string name;
  double nominal_hz = 50.0;     ///< f0 (Hz): 50 or 60
  double step_s = 0.01;         ///< fixed integration step (s)
  double duration_s = 60.0;     ///< run length (s)
  double output_every_s = 0.1;  ///< series sampling interval (s), a whole multiple of step_s
  std::uint64_t seed = 0;       ///< seed of the load fluctuation noise
  std::vector<AreaDef> areas;
  std::vector<TieDef> ties;
  std::vector<UnitDef> units;
  std::vector<EventDef> events;
};

/// Names used in files and messages.
const char* to_string(TurbineType t);
const char* to_string(GovernorMode m);
const char* to_string(DeadbandKind k);
const char* to_string(CommandKind k);
const char* to_string(AgcMode m);

}  // namespace droopline
