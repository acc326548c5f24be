#pragma once
/// Requirement checks: a scenario run against limits from a requirements file (nadir, zenith,
/// settling deviation, RoCoF, and each unit's delivered share of its droop response within a
/// time), with the measured value, the margin and pass/fail for each.
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline::study {

/// One limit of the requirements file.
struct Limit {
  std::string key;     ///< `lowest_hz_min`, `highest_hz_max`, `settling_deviation_hz_max`, `rocof_hz_per_s_max`
  double value = 0.0;
  std::string source;  ///< where the figure comes from
};

/// A response requirement for some units: after the frequency has moved `deviation_hz` from its
/// pre-event value, within `within_s` each unit delivers at least `share_min` of what its droop
/// line asks for the deviation at that moment.
struct ResponseRequirement {
  std::vector<std::string> units;  ///< empty: every unit in droop mode
  double deviation_hz = 0.2;
  double within_s = 30.0;
  double share_min = 1.0;
  std::string source;
};

struct Requirements {
  std::string name;
  std::vector<Limit> limits;
  std::vector<ResponseRequirement> responses;
};

/// Parses a requirements file; errors name the path (`limits.lowest_hz_min.value: ...`).
std::optional<Requirements> parse_requirements(std::string_view json_text, std::vector<Issue>& issues);

struct CheckRow {
  std::string requirement;  ///< readable: `lowest frequency`, `V1 response 30 s after 200 mHz`
  std::string relation;     ///< `>=` or `<=`
  double limit = 0.0;
  std::optional<double> measured;  ///< empty: not tested (the case never arose)
  double margin = 0.0;             ///< positive = inside the limit
  std::string result;              ///< `pass`, `fail`, `not tested`
  std::string unit;                ///< of limit and measured (`Hz`, `Hz/s`, `share`)
  std::string detail;              ///< which disturbance decided it
  std::string source;
};

struct Assessment {
  std::vector<CheckRow> rows;
  bool passed = true;         ///< every row tested and none failed
  std::size_t untested = 0;   ///< rows whose case never arose (not shown met, not failed)
  std::size_t failed = 0;
};

/// What `req` names that `def` does not have (`unit_response[0].units[1]: no unit "hy" in the
/// scenario`): a requirement on a unit that is not there would otherwise never be tested.
std::vector<Issue> requirement_issues(const SystemDef& def, const Requirements& req);

/// The verdict in words: "all requirements met", "requirements NOT met: 2 failed", or "not shown
/// met: 3 of 5 not tested (the run never reached their case)".
std::string verdict_text(const Assessment& a);

/// Runs the (validated) scenario to its end and checks it.
Assessment assess(const SystemDef& def, const Requirements& req);
nlohmann::ordered_json assessment_to_json(const Assessment& a, const Requirements& req);

}  // namespace droopline::study
