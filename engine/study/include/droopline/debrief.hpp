#pragma once
// The debrief of a recorded run, from its journal alone: the final lineage's commands re-simulated
// at their steps on a fresh engine, with the alarm monitor and the objective monitor fed as the live
// loop feeds them (so the scores are the live ones), sampled for charts; written as one
// self-contained HTML page (inline CSS and SVG, nothing fetched, printable) or as JSON.
#include <nlohmann/json_fwd.hpp>
#include <optional>
#include <string>
#include <utility>
#include <vector>

namespace droopline::study {

/// An instructor's note for the debrief.
struct DebriefNote {
  std::optional<double> t_s;  ///< simulation time it is about (none: the whole run)
  std::string by;
  std::string text;
};

/// What the records add to a journal.
struct DebriefExtras {
  std::vector<std::pair<std::string, std::string>> trainees;  ///< seat id -> trainee name (over the journal's)
  std::vector<DebriefNote> notes;                             ///< after the journal's own notes
};

/// One run of a journal as a debrief names it (a journal kept across restarts holds one per start).
struct DebriefRun {
  std::string run_id;  ///< its scenario record's "run" ("" in older journals)
  std::string name;    ///< the exercise's name, else the scenario's
  double to_t_s = 0;   ///< how far it went (simulated s)
  bool ended = false;  ///< it has an end record
  bool complete = false;
  std::string why;  ///< the end record's reason
};

/// The debrief of run `run_id` ("" = the last run) of the journal at `journal_path`, as one
/// self-contained HTML page; nullopt with `error` ("journal line 7: ...", "no run <id> in <path>").
/// `runs`, when given, receives every run of the journal, in order.
std::optional<std::string> debrief_html(const std::string& journal_path, const std::string& run_id,
                                        const DebriefExtras& extras, std::string& error,
                                        std::vector<DebriefRun>* runs = nullptr);

/// The same debrief as data: `run`, `exercise`, `status`, `briefing`, `seats`, `scores`, `timeline`,
/// `disturbances`, `notes`, `series`; nullopt with `error` and `runs` as debrief_html.
std::optional<nlohmann::ordered_json> debrief_json(const std::string& journal_path, const std::string& run_id,
                                                   const DebriefExtras& extras, std::string& error,
                                                   std::vector<DebriefRun>* runs = nullptr);

}  // namespace droopline::study
