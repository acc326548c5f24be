#pragma once
// The sweep commands: `droopline sweep` and `droopline merge`.
#include <optional>
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
  bool ensemble = true;  ///< false: --no-ensemble, every run alone (for comparison)
};

/// Runs the sweep (this shard) and writes DIR/sweep.csv, DIR/sweep.json and, for one or two
/// varied fields, DIR/sweep.svg. 0, 1 (output failed) or 2 (bad scenario or arguments).
int sweep(const SweepArgs& args);

/// Joins shard directories of one sweep into `out_dir` (same files as a whole sweep). Refuses
/// shards of different sweeps, a shard given twice or missing.
int merge(const std::vector<std::string>& shard_dirs, const std::string& out_dir, const std::string& metric, bool quiet);

}  // namespace droopline::cli
