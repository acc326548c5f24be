#pragma once
/// Validation of a SystemDef and of single commands, and the resolved defaults that depend on
/// other fields. Nothing here throws: every problem is reported as an Issue.
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "droopline/defs.hpp"

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

/// Errors of one command against a (valid) system, reported under `path`.
std::vector<Issue> validate_command(const SystemDef& def, const Command& command,
                                    const std::string& path);

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

/// A system definition that passed validate(), with its initial operating point: what
/// Engine::create takes. Only check() makes one, so an engine never sees an unchecked definition.
class CheckedSystem {
 public:
  /// The definition as checked.
  const SystemDef& def() const { return def_; }
  /// Its steady operating point at t = 0.
  const InitialFlows& flows() const { return flows_; }

 private:
  friend CheckResult check(SystemDef def);
  CheckedSystem(SystemDef def, InitialFlows flows) : def_(std::move(def)), flows_(std::move(flows)) {}
  SystemDef def_;
  InitialFlows flows_;
};

/// A checked system, or the errors that stop one being made.
struct CheckResult {
  std::optional<CheckedSystem> system;  ///< set only when there are no errors
  std::vector<Issue> issues;            ///< errors first, then warnings (as validate())
};

/// Validates a definition and solves its initial flows, once: the loader's path, and the one for
/// tests and tools that build a SystemDef in code.
CheckResult check(SystemDef def);

/// Island index of every area given which ties are in service (areas joined by ties share one).
std::vector<int> islands_of(std::size_t area_count, const std::vector<int>& tie_from,
                            const std::vector<int>& tie_to, const std::vector<bool>& in_service);

}  // namespace droopline
