#include "cli_debrief.hpp"

#include <iostream>
#include <nlohmann/json.hpp>

#include "cli_files.hpp"
#include "droopline/debrief.hpp"
#include "droopline/format.hpp"
#include "droopline/journal_read.hpp"

namespace droopline::cli {

int debrief(const std::string& journal, const std::string& out_file, const std::string& run_id, bool as_json,
            bool quiet) {
  std::string error;
  std::optional<std::string> text;
  if (as_json) {
    if (auto j = study::debrief_json(journal, run_id, {}, error)) text = j->dump(1) + "\n";
  } else {
    text = study::debrief_html(journal, run_id, {}, error);
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
  if (run_id.empty()) {
    const JournalRead read = read_journal(journal);
    if (read.runs.size() > 1) {
      std::cout << "  of the last of the journal's " << read.runs.size() << " runs (" << read.runs.back().run_id
                << "); --run ID picks another:\n";
      for (const JournalRun& r : read.runs)
        std::cout << "    " << (r.run_id.empty() ? std::string("(no id)") : r.run_id) << "  "
                  << (r.exercise ? r.exercise->def.name : r.system.def().name) << ", to t = "
                  << fmt_fixed(static_cast<double>(r.last_step) * r.system.def().step_s, 2) << " s"
                  << (r.end ? (r.end->complete ? ", complete" : ", incomplete: " + r.end->why) : std::string()) << "\n";
    }
  }
  return 0;
}

}  // namespace droopline::cli
