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
/// series.csv holds the rows as they were streamed, every branch in turn (time goes back at each
/// restore or rewind); with `final_lineage`, only the rows of the lineage the run ended on.
/// summary.json is the final lineage's; commands.jsonl every batch applied, in order.
/// `run_number` 0 = the last scenario of the journal, else 1-based.
int replay(const std::string& journal, const std::string& out_dir, int run_number, bool quiet,
           bool final_lineage = false);

}  // namespace droopline::cli
