#include "droopline/journal_read.hpp"

#include <algorithm>
#include <fstream>
#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {
namespace {

using json = nlohmann::ordered_json;

// A whole number `key` of `j` within [0, 2^53], or an error naming it.
bool count_field(const json& j, const char* key, std::uint64_t& out, std::string& error) {
  if (!j.contains(key) || !j[key].is_number_integer() || j[key].get<std::int64_t>() < 0 ||
      j[key].get<std::int64_t>() > (std::int64_t{1} << 53)) {
    error = std::string(key) + ": must be a whole number from 0 to 2^53";
    return false;
  }
  out = j[key].get<std::uint64_t>();
  return true;
}

// A save point, restore or rewind record (its type already known), or an error.
bool read_mark(const json& j, const std::string& type, JournalMark& m, std::string& error) {
  m.kind = type == "savepoint" ? JournalMark::Kind::savepoint
           : type == "restore" ? JournalMark::Kind::restore
                               : JournalMark::Kind::rewind;
  std::uint64_t to_step = 0;
  if (!count_field(j, "taken", m.taken, error)) return false;
  if (m.kind != JournalMark::Kind::rewind &&
      !count_field(j, m.kind == JournalMark::Kind::savepoint ? "id" : "savepoint", m.id, error))
    return false;
  if (m.kind != JournalMark::Kind::savepoint && !count_field(j, "to_step", to_step, error)) return false;
  m.to_step = static_cast<std::int64_t>(to_step);
  if (m.kind != JournalMark::Kind::savepoint && m.to_step > m.step) {
    error = "to_step: must not lie after the record's step";
    return false;
  }
  if (m.kind == JournalMark::Kind::savepoint) {
    if (!j.contains("name") || !j["name"].is_string() || j["name"].get<std::string>().size() > 64) {
      error = "name: must be a string of at most 64 bytes";
      return false;
    }
    m.name = j["name"].get<std::string>();
  }
  m.by = j.contains("by") && j["by"].is_string() ? clip_text(j["by"].get<std::string>(), 64) : "instructor";
  return true;
}

}  // namespace

JournalRead read_journal(const std::string& path) {
  JournalRead out;
  std::ifstream in(path);
  if (!in) {
    out.issues.push_back({"journal", "cannot read \"" + path + "\"", false});
    return out;
  }
  std::string line;
  for (int n = 1; std::getline(in, line); ++n) {
    if (line.empty()) continue;
    const std::string where = "journal line " + std::to_string(n);
    std::string bad;
    auto parsed = parse_untrusted_json(line, bad);
    if (!parsed || !parsed->is_object() || !parsed->contains("type") || !(*parsed)["type"].is_string() ||
        !parsed->contains("step") || !(*parsed)["step"].is_number_integer()) {
      // A torn last line (a crash mid-write) was never acknowledged: stop there.
      if (in.peek() == EOF) break;
      out.issues.push_back({where, "not a journal record" + (bad.empty() ? std::string() : " (" + bad + ")"), false});
      return out;
    }
    nlohmann::ordered_json& j = *parsed;
    const std::string type = j["type"].get<std::string>();
    const std::int64_t step = j["step"].get<std::int64_t>();
    if (type == "scenario") {
      LoadResult r = parse_scenario(j["scenario"].dump());
      if (!r.system) {
        for (auto& i : r.issues)
          if (!i.warning) out.issues.push_back({where, i.text(), false});
        return out;
      }
      out.runs.push_back({std::move(*r.system), {}, {}, 0, {}});
      if (j.contains("run") && j["run"].is_string()) out.runs.back().run_id = clip_text(j["run"].get<std::string>(), 64);
    } else if (type == "savepoint" || type == "restore" || type == "rewind") {
      if (out.runs.empty()) {
        out.issues.push_back({where, "a record before any scenario", false});
        return out;
      }
      JournalRun& run = out.runs.back();
      JournalMark m;
      m.line = n;
      m.step = step;
      m.batches_before = run.commands.size();
      std::string error;
      if (!read_mark(j, type, m, error)) {
        out.issues.push_back({where, error, false});
        return out;
      }
      run.last_step = m.kind == JournalMark::Kind::savepoint ? std::max(run.last_step, step) : m.to_step;
      run.marks.push_back(std::move(m));
    } else if (type == "commands" || type == "stop") {
      if (out.runs.empty()) {
        out.issues.push_back({where, "a record before any scenario", false});
        return out;
      }
      JournalRun& run = out.runs.back();
      if (type == "commands") {
        CommandParse cp = parse_commands(j["commands"].dump());
        if (!cp.issues.empty()) {
          out.issues.push_back({where, cp.issues.front().text(), false});
          return out;
        }
        JournalBatch batch{step, std::move(cp.commands), "instructor"};
        if (j.contains("by")) {
          if (!j["by"].is_string() || j["by"].get<std::string>().empty() || j["by"].get<std::string>().size() > 64) {
            out.issues.push_back({where, "by: must be a non-empty string of at most 64 characters", false});
            return out;
          }
          batch.by = j["by"].get<std::string>();
        }
        run.commands.push_back(std::move(batch));
      }
      run.last_step = std::max(run.last_step, step);
    } else if (type == "script" || type == "exercise" || type == "ack" || type == "trainee" || type == "note" ||
               type == "end") {
      // An instructor's edit of an exercise's script, for the record: what the script fired is in
      // the command records (by "script"), so replay has nothing to do here. The exercise, its
      // acknowledgements, trainees, notes and end are the debrief's to read.
    } else {
      out.issues.push_back({where, "unknown record type \"" + type + "\"", false});
      return out;
    }
  }
  return out;
}

}  // namespace droopline
