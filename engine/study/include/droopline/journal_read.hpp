#pragma once
// Reading a live session's journal back (the writer is the service's, server/live/journal.hpp):
// one JSON object per line, a scenario record opening each run, then its commands and stop.
//
//   {"type":"scenario","step":0,"scenario":{...}}     a scenario was loaded (or the session reset)
//   {"type":"commands","step":N,"commands":[...],"by":"instructor"}
//                                                     commands applied before step N, and who sent
//                                                     them (absent in older journals: the instructor)
//   {"type":"stop","step":N}                          graceful shutdown after N steps
#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline {

/// One batch of commands as journalled.
struct JournalBatch {
  std::int64_t step = 0;          ///< applied before this step
  std::vector<Command> commands;  ///< in the string form
  std::string by = "instructor";  ///< who sent them ("by"; journals before authors were kept: the instructor)
};

/// One scenario-long stretch of a journal: the scenario and the commands applied to it.
struct JournalRun {
  CheckedSystem system;  ///< the scenario as the loader checked it
  std::vector<JournalBatch> commands;  ///< in the order journalled
  std::int64_t last_step = 0;  ///< the stop record's step, else the last command's step
};

/// A journal read back: its runs, or what is wrong with it.
struct JournalRead {
  std::vector<JournalRun> runs;
  std::vector<Issue> issues;
};
/// Reads a journal back. Errors name the line: `journal line 7: ...`; a torn last line (a crash
/// mid-write, never acknowledged) ends it.
JournalRead read_journal(const std::string& path);

}  // namespace droopline
