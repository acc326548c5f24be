#pragma once
// The single-scenario study commands: `droopline modes`, `droopline assess` and `droopline record`.
#include <chrono>
#include <string>

namespace droopline::cli {

/// `droopline modes FILE`: prints the small-signal modes (table, or JSON with `as_json`).
int modes(const std::string& file, double damping_threshold, bool as_json);

/// `droopline assess FILE --requirements REQ`: runs and checks; 0 all met, 3 some failed, 2 bad input.
int assess(const std::string& file, const std::string& requirements_file, bool as_json);

/// The arguments of `droopline record`.
struct RecordArgs {
  std::string scenario_file, out_dir, name = "record";
  double from_s = 0.0, to_s = 1e300;
  std::chrono::system_clock::time_point start;  ///< wall time of t = 0
  bool quiet = false;
};
/// `droopline record FILE --out DIR`: runs the scenario and writes DIR/NAME.cfg and .dat (COMTRADE).
int record(const RecordArgs& args);

}  // namespace droopline::cli
