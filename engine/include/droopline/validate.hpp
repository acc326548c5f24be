#pragma once
/// Validation of a SystemDef and of single commands, and the resolved defaults that depend on
/// other fields. Nothing here throws: every problem is reported as an Issue.
#include <functional>
#include <map>
#include <memory>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "droopline/commands.hpp"
#include "droopline/defs.hpp"
#include "droopline/ids.hpp"

namespace droopline {

/// One validation finding, printed as `path: message`.
struct Issue {
  std::string path;      ///< where, in scenario-file terms, e.g. `units[2].governor.droop`
  std::string message;   ///< what is wrong, with the offending value
  bool warning = false;  ///< true: outside the typical range but still valid

  /// `path: message`.
  std::string text() const { return path.empty() ? message : path + ": " + message; }
};

/// True when any issue is an error (not a warning).
bool has_errors(const std::vector<Issue>& issues);

/// Every error and warning of a system definition, errors first in file order.
std::vector<Issue> validate(const SystemDef& def);

/// Minimum output (MW) with its default applied.
double unit_min_mw(const UnitDef& unit);
/// Maximum output (MW) with its default applied.
double unit_max_mw(const UnitDef& unit);
/// Hydro temporary droop RT (pu) with the design-rule default applied.
double hydro_temporary_droop(const UnitDef& unit);
/// Hydro reset time TR (s) with the design-rule default applied.
double hydro_reset_s(const UnitDef& unit);
/// Natural frequency response beta of an area (MW/Hz) from its online units and load damping.
double natural_response_mw_per_hz(const SystemDef& def, std::size_t area_index);
/// Why a new `droop` is refused when it leaves `area` (inertia m = 2 sum(H S)/f0, natural
/// response beta, both with the new droop) faster than the fixed step can follow (M/beta under
/// five steps); empty when it is fine. Shared by the loader's and the live check.
std::string droop_step_problem(double droop, const std::string& area, double m, double beta, double step_s);
/// Unloading rate of a controlled stop without its own (MW/s): the unit's ramp_mw_per_s, else 1 % of
/// its rating per second.
double unit_stop_rate_mw_per_s(const UnitDef& unit);
/// True for units that add rotating inertia to their area.
bool is_synchronous(const UnitDef& unit);

/// Steady operating point at t = 0: one angle per area and one flow per tie.
struct InitialFlows {
  std::vector<double> angle_rad;  ///< per area, 0 at each island's reference area
  std::vector<double> flow_mw;    ///< per tie, positive from -> to; 0 when out of service
};

/// Solves the tie flows that the per-area surplus (setpoints minus demand) implies.
/// Appends an error and returns nothing when the ties cannot carry the exchange.
std::optional<InitialFlows> solve_initial_flows(const SystemDef& def, std::vector<Issue>& issues);

struct CheckResult;

/// The ids of a valid system, indexed once per definition (by check()): string id to dense index,
/// and what the command checks need besides.
struct SystemIndex {
  /// Scenario id to position in its list.
  using Ids = std::map<std::string, std::size_t, std::less<>>;
  Ids areas;                         ///< area id -> index
  Ids units;                         ///< unit id -> index
  Ids ties;                          ///< tie id -> index
  std::vector<double> area_size_mw;  ///< per area: the larger of its demand and its units' ratings (MW)

  std::optional<AreaId> area(std::string_view id) const;  ///< by scenario id
  std::optional<UnitId> unit(std::string_view id) const;  ///< by scenario id
  std::optional<TieId> tie(std::string_view id) const;    ///< by scenario id
};

/// A system definition that passed validate(), with its initial operating point, its id index and
/// its events resolved: what Engine::create takes. Only check() makes one, so an engine never sees
/// an unchecked definition. Copies are cheap and share the (immutable) contents.
class CheckedSystem {
 public:
  /// The definition as checked.
  const SystemDef& def() const { return parts_->def; }
  /// Its steady operating point at t = 0.
  const InitialFlows& flows() const { return parts_->flows; }
  /// Its ids, indexed.
  const SystemIndex& index() const { return parts_->index; }
  /// Its events (def().events) resolved, in file order.
  const std::vector<TimedAction>& events() const { return parts_->events; }

 private:
  struct Parts {
    SystemDef def;
    InitialFlows flows;
    SystemIndex index;
    std::vector<TimedAction> events;
  };
  friend CheckResult check(SystemDef def);
  explicit CheckedSystem(std::shared_ptr<const Parts> parts) : parts_(std::move(parts)) {}
  std::shared_ptr<const Parts> parts_;
};

/// A checked system, or the errors that stop one being made.
struct CheckResult {
  std::optional<CheckedSystem> system;  ///< set only when there are no errors
  std::vector<Issue> issues;            ///< errors first, then warnings (as validate())
};

/// Validates a definition and solves its initial flows, once: the loader's path, and the one for
/// tests and tools that build a SystemDef in code.
CheckResult check(SystemDef def);

/// Resolves one command of the string form against a checked system: its ids looked up in the
/// index and every static check (references, physical bounds, the step against a new droop) made,
/// the one checker the loader's events share. Problems are appended to `issues` under `path`;
/// the action is returned only when there are none. State-dependent checks are the engine's.
std::optional<Action> resolve(const CheckedSystem& system, const Command& command, const std::string& path,
                              std::vector<Issue>& issues);

/// Commands resolved together: every action, or the problems (then no action).
struct Resolved {
  std::vector<Action> actions;  ///< in the order given; empty when there are issues
  std::vector<Issue> issues;    ///< `command` or `commands[i]` paths, as the API reports them
};
/// Resolves a batch, each command under `command` (a batch of one) or `commands[i]`.
Resolved resolve_all(const CheckedSystem& system, std::span<const Command> commands);

/// Island index of every area given which ties are in service (areas joined by ties share one).
std::vector<int> islands_of(std::size_t area_count, const std::vector<int>& tie_from,
                            const std::vector<int>& tie_to, const std::vector<bool>& in_service);

}  // namespace droopline
