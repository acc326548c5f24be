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
//   {"type":"exercise","step":0,"run":"<id>","exercise":{...}}
//                                                     the exercise the run opened by the scenario
//                                                     record before it runs (self-contained)
//   {"type":"ack","step":N,"alarm":I,"by":"..."}       alarm I acknowledged between steps N-1 and N
//   {"type":"trainee","step":N,"seat":"...","name":"..."}   a trainee's name entered at a seat
//   {"type":"note","step":N,"by":"instructor","text":"..."} the instructor's note
//   {"type":"end","step":N,"complete":true,"why":"..."}     the exercise ended (or was ended)
//
// A scenario record carries `"run":"<id>"` (absent in older journals), a random id of the run.
// Acknowledgements follow the run's lineage like command batches (a restore or rewind to before
// one undoes it); trainee names and notes are kept whatever happened to the lineage.
//
// `taken`: how many of the run's command batches had been taken at their step (applied, or
// refused there) when it happened; the batches journalled before a restore or rewind and not yet
// taken were refused by it.
#include <cstdint>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/exercise.hpp"
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
  std::size_t acks_before = 0;     ///< alarm acknowledgements journalled before it in this run
  std::uint64_t id = 0;            ///< savepoint: its id; restore: the save point's
  std::string name;                ///< savepoint: its name
  std::int64_t to_step = 0;        ///< restore, rewind: the step gone back to
  std::string by;                  ///< who did it
};

/// An alarm acknowledged, as journalled.
struct JournalAck {
  std::int64_t step = 0;    ///< between steps N-1 and N
  std::uint64_t alarm = 0;  ///< the alarm monitor's id
  std::string by;           ///< seat id or "instructor"
};

/// A trainee's name entered at a seat.
struct JournalTrainee {
  std::int64_t step = 0;
  std::string seat;
  std::string name;
};

/// An instructor's note typed during the session.
struct JournalNote {
  std::int64_t step = 0;
  std::string by;
  std::string text;
};

/// How an exercise run ended.
struct JournalEnd {
  std::int64_t step = 0;
  bool complete = false;  ///< the time limit reached (not ended early)
  std::string why;
};

/// One scenario-long stretch of a journal: the scenario and the commands applied to it.
struct JournalRun {
  CheckedSystem system;                ///< the scenario as the loader checked it
  std::vector<JournalBatch> commands;  ///< in the order journalled
  std::vector<JournalMark> marks;      ///< save points, restores and rewinds, in the order journalled
  std::int64_t last_step = 0;          ///< the stop record's step, else the last command's step (on the last lineage)
  std::string run_id;                  ///< the scenario record's "run" ("" in older journals)
  std::optional<study::Exercise> exercise;  ///< the exercise record's, for an exercise run
  std::vector<JournalAck> acks;             ///< in the order journalled
  std::vector<JournalTrainee> trainees;     ///< in the order journalled
  std::vector<JournalNote> notes;           ///< in the order journalled
  std::optional<JournalEnd> end;            ///< the end record's
};

/// What a run's final lineage holds: the command batches and acknowledgements a restore or rewind
/// did not undo (indices into JournalRun::commands and ::acks, in the order journalled).
struct FinalLineage {
  std::vector<std::size_t> batches;
  std::vector<std::size_t> acks;
};
/// Works out the final lineage of `run` from its records alone (no simulation): batches are taken in
/// the order journalled, as many before each mark as it says, and acknowledgements journalled before
/// a mark took effect before it when their step had come; a save point keeps what was taken on its
/// lineage, a restore goes back to it, a rewind to step S drops the batches applied at S or later
/// and the acknowledgements after S (as the live session's checkpoints keep them); batches and
/// acknowledgements journalled before a restore or rewind and not taken were refused by it. Nothing, with `error`
/// ("journal line 9: ..."), when a restore names a save point not kept before it.
std::optional<FinalLineage> final_lineage(const JournalRun& run, std::string& error);

/// A journal read back: its runs, or what is wrong with it.
struct JournalRead {
  std::vector<JournalRun> runs;
  std::vector<Issue> issues;
};
/// Reads a journal back. Errors name the line: `journal line 7: ...`; a torn last line (a crash
/// mid-write, never acknowledged) ends it.
JournalRead read_journal(const std::string& path);

}  // namespace droopline
