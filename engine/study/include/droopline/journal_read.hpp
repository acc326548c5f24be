#pragma once
// Reading a live session's journal back (the writer is the service's, server/live/journal.hpp):
// one JSON object per line, a scenario record opening each run, then its commands and stop.
//
//   {"type":"scenario","step":0,"scenario":{...}}     a scenario was loaded (or the session reset)
//   {"type":"commands","step":N,"commands":[...],"by":"instructor"}
//                                                     commands applied before step N, and who sent
//                                                     them (absent in older journals: the instructor)
//   {"type":"savepoint","step":N,"taken":K,"id":I,"name":"...","by":"instructor"}
//                                                     save point I kept at step N
//   {"type":"restore","step":N,"taken":K,"savepoint":I,"to_step":S,"by":"instructor"}
//                                                     back to save point I (its step S) from step N
//   {"type":"rewind","step":N,"taken":K,"to_step":S,"by":"instructor"}
//                                                     back to step S of the lineage from step N
//   {"type":"stop","step":N}                          graceful shutdown after N steps
//
// `taken`: how many of the run's command batches had been taken at their step (applied, or
// refused there) when it happened; the batches journalled before a restore or rewind and not yet
// taken were refused by it.
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

/// A save point, restore or rewind as journalled.
struct JournalMark {
  enum class Kind { savepoint, restore, rewind };
  Kind kind = Kind::savepoint;
  int line = 0;                    ///< its journal line (for messages)
  std::int64_t step = 0;           ///< the step it happened at
  std::uint64_t taken = 0;         ///< command batches taken at their step before it
  std::size_t batches_before = 0;  ///< command batches journalled before it in this run
  std::uint64_t id = 0;            ///< savepoint: its id; restore: the save point's
  std::string name;                ///< savepoint: its name
  std::int64_t to_step = 0;        ///< restore, rewind: the step gone back to
  std::string by;                  ///< who did it
};

/// One scenario-long stretch of a journal: the scenario and the commands applied to it.
struct JournalRun {
  CheckedSystem system;                ///< the scenario as the loader checked it
  std::vector<JournalBatch> commands;  ///< in the order journalled
  std::vector<JournalMark> marks;      ///< save points, restores and rewinds, in the order journalled
  std::int64_t last_step = 0;          ///< the stop record's step, else the last command's step (on the last lineage)
  std::string run_id;                  ///< the scenario record's "run" (empty in journals before run ids)
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
