#pragma once
/// Frequency-injection tests: deviations (steps, ramps, staircases, in mHz) injected into a unit's
/// governor as its speed (f = f0 + deviation, played back with no swing equation), each with the
/// response it must give: a share of the static droop response within a time, held for a time, and
/// a largest delay before the response starts. The test-profile file is described in the README
/// ("Injection tests").
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// One piece of an injected deviation: move to `to_mhz` (at once, or linearly over `over_s`),
/// then hold it for `hold_s`.
struct InjectPiece {
  double to_mhz = 0.0;
  double over_s = 0.0;
  double hold_s = 0.0;
};

/// The response a test requires, relative to the static droop response to its last level.
struct InjectRequirement {
  double share = 1.0;           ///< share of the droop response to reach (0-1]
  double within_s = 30.0;       ///< reached within this time of the injection's start (s)
  double hold_s = 0.0;          ///< and kept at least that share for this long (s)
  double max_delay_s = 2.0;     ///< the response starts within this time (s)
  double started_share = 0.05;  ///< "started": this share of the droop response reached
  std::string source;           ///< where the figures come from (shown with the result)
};

/// One injection test.
struct InjectTest {
  std::string name;
  double lead_s = 5.0;  ///< nominal frequency before the injection starts (s)
  std::vector<InjectPiece> pieces;
  InjectRequirement require;
};

/// A test profile: a name, its source note and the tests.
struct InjectProfile {
  std::string name, note;
  std::vector<InjectTest> tests;
};

/// Parses a profile; nullopt with every problem, each with its path (`tests[1].pieces[0].over_s`).
std::optional<InjectProfile> parse_inject_profile(std::string_view text, std::vector<Issue>& issues);

/// One test's outcome.
struct InjectOutcome {
  std::string name;
  double expected_mw = 0.0;         ///< static droop response to the last level (MW)
  std::optional<double> delay_s;    ///< when the response started (after the injection's start)
  std::optional<double> reached_s;  ///< when it reached the required share
  double held_share = 0.0;          ///< lowest share kept over the hold window (0 when not reached)
  double delay_margin_s = 0.0, within_margin_s = 0.0, hold_margin = 0.0;  ///< positive: met with room
  bool passed = false;
  std::vector<double> t_s, deviation_mhz, response_mw;  ///< the run, for the plot
  InjectRequirement require;
};

/// Runs every test of the profile on `unit_id` of the scenario; empty with `error` set when the unit
/// is unknown or its playback scenario does not pass the checks.
std::optional<std::vector<InjectOutcome>> run_injection(const SystemDef& def, const std::string& unit_id,
                                                        const InjectProfile& profile, std::string& error);

/// The pass/fail table with margins, as text.
std::string inject_table(const std::vector<InjectOutcome>& outcomes);
/// The outcomes as JSON (no series).
nlohmann::ordered_json inject_to_json(const std::vector<InjectOutcome>& outcomes);
/// One test's plot: the output change and the required share against time.
std::string inject_svg(const InjectOutcome& outcome);

}  // namespace droopline::study
