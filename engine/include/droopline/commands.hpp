#pragma once
/// Typed commands: one struct per command kind, naming its targets by typed ids and carrying only
/// its own fields. The string form (`Command` in defs.hpp) is what files, the journal and the API
/// speak; `resolve` (validate.hpp) turns it into an `Action` once, at the boundary.
#include <cstddef>
#include <optional>
#include <type_traits>
#include <variant>

#include "droopline/defs.hpp"
#include "droopline/ids.hpp"

namespace droopline {

/// A step change of an area's load (positive = more load).
struct LoadStep {
  AreaId area;      ///< where
  double mw = 0.0;  ///< size of the step (MW)
};
/// A linear change of an area's load over a time.
struct LoadRamp {
  AreaId area;          ///< where
  double mw = 0.0;      ///< total change (MW)
  double over_s = 0.0;  ///< duration (s)
};
/// A unit trips (goes offline at once).
struct UnitTrip {
  UnitId unit;  ///< which
};
/// A unit starts and loads to a setpoint.
struct UnitStart {
  UnitId unit;      ///< which
  double mw = 0.0;  ///< setpoint it loads to (MW)
};
/// A new dispatch setpoint, at once or at a rate.
struct Setpoint {
  UnitId unit;                          ///< which
  double mw = 0.0;                      ///< new setpoint (MW)
  std::optional<double> ramp_mw_per_s;  ///< move at this rate (MW/s); absent = at once
};
/// New governor settings (at least one field set).
struct GovernorChange {
  UnitId unit;                           ///< which
  std::optional<double> droop;           ///< new R (pu)
  std::optional<double> deadband_hz;     ///< new half-width (Hz)
  std::optional<DeadbandKind> deadband;  ///< new deadband kind
  std::optional<GovernorMode> mode;      ///< new mode
};
/// A tie opens.
struct TieTrip {
  TieId tie;  ///< which
};
/// An open tie closes.
struct TieClose {
  TieId tie;  ///< which
};
/// Secondary control of an area switched on or off, and optionally its mode changed.
struct AgcSwitch {
  AreaId area;                  ///< where
  bool enabled = false;         ///< on or off
  std::optional<AgcMode> mode;  ///< new mode; absent = unchanged
};
/// Random load fluctuation of an area (Ornstein-Uhlenbeck), or off.
struct Fluctuation {
  AreaId area;            ///< where
  double sigma_mw = 0.0;  ///< stationary standard deviation (MW); 0 = off
  double tau_s = 1.0;     ///< correlation time (s)
};

/// A controlled stop: the setpoint ramps down to zero, then the unit goes offline (not a trip).
struct UnitStop {
  UnitId unit;                          ///< which
  std::optional<double> ramp_mw_per_s;  ///< unloading rate (MW/s); absent = the unit's default (unit_stop_rate)
};
/// A new scheduled net export of an area, at once or along a ramp.
struct Schedule {
  AreaId area;          ///< where
  double mw = 0.0;      ///< new scheduled net export (MW, positive = export)
  double over_s = 0.0;  ///< ramp duration (s); 0 = at once
};
/// Load disconnected by hand.
struct Shed {
  AreaId area;      ///< where
  double mw = 0.0;  ///< load to disconnect (MW, > 0)
};
/// Shed load (by hand or by the under-frequency stages) reconnected.
struct Restore {
  AreaId area;               ///< where
  std::optional<double> mw;  ///< load to reconnect (MW); absent = all shed load of the area
};

/// One command with its targets resolved: what the engine applies. The alternatives are in
/// CommandKind's order.
using Action = std::variant<LoadStep, LoadRamp, UnitTrip, UnitStart, Setpoint, GovernorChange, TieTrip, TieClose,
                            AgcSwitch, Fluctuation, UnitStop, Schedule, Shed, Restore>;

/// The kind of an action (CommandKind's enumerator of the same position).
inline CommandKind kind_of(const Action& action) { return static_cast<CommandKind>(action.index()); }

static_assert(std::variant_size_v<Action> == static_cast<std::size_t>(CommandKind::restore) + 1,
              "Action lists one struct per CommandKind, in its order");
static_assert(
    std::is_same_v<std::variant_alternative_t<static_cast<std::size_t>(CommandKind::governor), Action>, GovernorChange>,
    "Action's alternatives follow CommandKind's order");
static_assert(
    std::is_same_v<std::variant_alternative_t<static_cast<std::size_t>(CommandKind::restore), Action>, Restore>,
    "Action's alternatives follow CommandKind's order");

/// A scenario event resolved at load: an action at a simulation time.
struct TimedAction {
  double at_s = 0.0;  ///< simulation time (s), rounded to the nearest step
  Action action;      ///< what happens
};

}  // namespace droopline
