#pragma once
// `droopline debrief`: the debrief report of a recorded run, from its journal alone.
#include <string>

namespace droopline::cli {

/// Writes the debrief of run `run_id` ("" = the last) of `journal` to `out_file` (HTML, or JSON with
/// `as_json`), atomically. Exit code: 0 written, 1 the file could not be written, 2 a bad journal or
/// no such run.
int debrief(const std::string& journal, const std::string& out_file, const std::string& run_id, bool as_json,
            bool quiet);

}  // namespace droopline::cli
