#include "cli_debrief.hpp"

#include <iostream>
#include <nlohmann/json.hpp>

#include "cli_files.hpp"
#include "droopline/debrief.hpp"
#include "droopline/format.hpp"

namespace droopline::cli {

int debrief(const std::string& journal, const std::string& out_file, const std::string& run_id, bool as_json,
            bool quiet) {
  std::string error;
  std::optional<std::string> text;
  std::vector<study::DebriefRun> runs;
  if (as_json) {
    if (auto j = study::debrief_json(journal, run_id, {}, error, &runs)) text = j->dump(1) + "\n";
  } else {
    text = study::debrief_html(journal, run_id, {}, error, &runs);
  }
  if (!text) {
    std::cerr << journal << ": error: " << error << "\n";
    return 2;
  }
  // Nothing half-written: the report appears under its name only once complete.
  const fs::path out = fs::absolute(out_file);
  AtomicFile file(out);
  if (!file.ok()) {
    std::cerr << "droopline: cannot write \"" << out_file << "\"\n";
    return 1;
  }
  file.stream() << *text;
  if (!file.stream() || !file.commit()) {
    std::cerr << "droopline: writing \"" << out_file << "\" failed (disk full?)\n";
    return 1;
  }
  if (quiet) return 0;
  std::cout << "droopline: wrote the debrief to " << out_file << "\n";
  // A journal kept across restarts holds several runs: say which one this is and how to pick another.
  if (run_id.empty() && runs.size() > 1) {
    std::cout << "  of the last of the journal's " << runs.size() << " runs (" << runs.back().run_id
              << "); --run ID picks another:\n";
    for (const study::DebriefRun& r : runs)
      std::cout << "    " << (r.run_id.empty() ? std::string("(no id)") : r.run_id) << "  " << r.name
                << ", to t = " << fmt_fixed(r.to_t_s, 2) << " s"
                << (r.ended ? (r.complete ? ", complete" : ", incomplete: " + r.why) : std::string()) << "\n";
  }
  return 0;
}

}  // namespace droopline::cli
