#pragma once
// Command-line jobs that need no network: check and run.
#include <string>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline::cli {

/// `droopline check FILE`: 0 when valid, 2 with the messages on stderr.
int check(const std::string& file);
/// `droopline run FILE --out DIR`: writes DIR/series.csv and DIR/summary.json atomically.
/// `threads` 0 = one per core (used only by fleets large enough to gain from it).
int run(const std::string& file, const std::string& out_dir, bool quiet, unsigned threads = 0);

/// `droopline replay JOURNAL --out DIR`: rebuilds a live session's series from its journal.
/// `run_number` 0 = the last scenario of the journal, else 1-based.
int replay(const std::string& journal, const std::string& out_dir, int run_number, bool quiet);

/// A whole run held in memory (for replays over HTTP): the same text `run` writes.
struct RunOutcome {
  bool ok = false;
  std::vector<Issue> issues;
  std::string series;   ///< series.csv content
  std::string summary;  ///< summary.json content
};
/// Runs a validated definition to its end and returns both outputs as text.
RunOutcome run_to_strings(const CheckedSystem& system, const std::vector<Issue>& warnings);

}  // namespace droopline::cli
