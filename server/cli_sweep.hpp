#pragma once
// The study commands: `droopline sweep`, `droopline merge`, `droopline modes`
// and `droopline assess`.
#include <chrono>
#include <string>
#include <vector>

#include "droopline/sweep.hpp"

namespace droopline::cli {

struct SweepArgs {
  std::string scenario_file;
  std::vector<std::string> vary;  ///< PATH=VALUES specs
  std::string out_dir;
  std::optional<std::uint64_t> sample;
  std::uint64_t seed = 1;
  std::uint32_t shard = 1, shards = 1;
  unsigned threads = 0;
  std::string metric = "nadir_hz";
  bool quiet = false;
};

/// Runs the sweep (this shard) and writes DIR/sweep.csv, DIR/sweep.json and, for one or two
/// varied fields, DIR/sweep.svg. 0, 1 (output failed) or 2 (bad scenario or arguments).
int sweep(const SweepArgs& args);

/// Joins shard directories of one sweep into `out_dir` (same files as a whole sweep). Refuses
/// shards of different sweeps, a shard given twice or missing.
int merge(const std::vector<std::string>& shard_dirs, const std::string& out_dir, const std::string& metric, bool quiet);

/// `droopline modes FILE`: prints the small-signal modes (table, or JSON with `as_json`).
int modes(const std::string& file, double damping_threshold, bool as_json);

/// `droopline assess FILE --requirements REQ`: runs and checks; 0 all met, 3 some failed, 2 bad input.
int assess(const std::string& file, const std::string& requirements_file, bool as_json);

struct RecordArgs {
  std::string scenario_file, out_dir, name = "record";
  double from_s = 0.0, to_s = 1e300;
  std::chrono::system_clock::time_point start;  ///< wall time of t = 0
  bool quiet = false;
};
/// `droopline record FILE --out DIR`: runs the scenario and writes DIR/NAME.cfg and .dat (COMTRADE).
int record(const RecordArgs& args);

}  // namespace droopline::cli
