#pragma once
// The session journal: one JSON object per line, appended and flushed to the disk before the
// command it records is acknowledged, so `droopline replay` can rebuild a live session exactly.
//
//   {"type":"scenario","step":0,"scenario":{...}}     a scenario was loaded (or the session reset)
//   {"type":"commands","step":N,"commands":[...]}     commands applied before step N
//   {"type":"stop","step":N}                          graceful shutdown after N steps
#include <cstdio>
#include <string>
#include <vector>

#include "droopline/defs.hpp"
#include "droopline/validate.hpp"

namespace droopline {

class Journal {
 public:
  /// Opens (appends to) `path`; an empty path journals nothing.
  explicit Journal(std::string path);
  ~Journal();
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;

  /// False when the file could not be opened; `error()` says why.
  bool ok() const { return path_.empty() || file_ != nullptr; }
  const std::string& error() const { return error_; }
  const std::string& path() const { return path_; }

  /// Appends one line and makes it durable (fflush + fdatasync). False, with error(), on failure.
  bool append(const std::string& json_line);

 private:
  std::string path_;
  std::FILE* file_ = nullptr;
  std::string error_;
};

/// One scenario-long stretch of a journal: the scenario and the commands applied to it.
struct JournalRun {
  SystemDef def;
  std::vector<std::pair<std::int64_t, std::vector<Command>>> commands;  ///< (step, commands)
  std::int64_t last_step = 0;  ///< the stop record's step, else the last command's step
};

/// Reads a journal back. Errors name the line: `journal line 7: ...`.
struct JournalRead {
  std::vector<JournalRun> runs;
  std::vector<Issue> issues;
};
JournalRead read_journal(const std::string& path);

}  // namespace droopline
