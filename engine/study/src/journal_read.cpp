#include "droopline/journal_read.hpp"

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <fstream>
#include <map>
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
  // A rewind goes back on its own course; a restore goes to its save point wherever that lies (on
  // a course since rewound past, perhaps later than now).
  if (m.kind == JournalMark::Kind::rewind && m.to_step > m.step) {
    error = "to_step: a rewind must not lie after the record's step";
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

// A string `key` of `j` of 1 to `max` bytes (0 to `max` when `may_be_empty`), or an error naming it.
bool text_field(const json& j, const char* key, std::size_t max, bool may_be_empty, std::string& out,
                std::string& error) {
  if (!j.contains(key) || !j[key].is_string() || (!may_be_empty && j[key].get<std::string>().empty()) ||
      j[key].get<std::string>().size() > max) {
    error = std::string(key) + ": must be a " + (may_be_empty ? "" : "non-empty ") + "string of at most " +
            std::to_string(max) + " bytes";
    return false;
  }
  out = j[key].get<std::string>();
  return true;
}

// The records issue 13 added to a run: its exercise, acknowledgements, trainees, notes and end.
bool read_training_record(const json& j, const std::string& type, std::int64_t step, const std::string& base_dir,
                          JournalRun& run, std::string& error) {
  if (type == "exercise") {
    if (run.exercise) return (error = "a second exercise record in one run", false);
    if (!j.contains("exercise") || !j["exercise"].is_object()) return (error = "exercise: must be an object", false);
    study::ExerciseLoad x = study::parse_exercise(j["exercise"].dump(), base_dir);
    if (!x.exercise) {
      for (const Issue& i : x.issues)
        if (!i.warning) return (error = "exercise." + i.text(), false);
      return (error = "exercise: not a valid exercise", false);
    }
    run.exercise = std::move(*x.exercise);
    return true;
  }
  if (type == "ack") {
    JournalAck a{step, 0, {}};
    if (!count_field(j, "alarm", a.alarm, error) || !text_field(j, "by", 64, false, a.by, error)) return false;
    run.acks.push_back(std::move(a));
    run.last_step = std::max(run.last_step, step);
    return true;
  }
  if (type == "trainee") {
    JournalTrainee t{step, {}, {}};
    if (!text_field(j, "seat", 64, false, t.seat, error) || !text_field(j, "name", 200, true, t.name, error))
      return false;
    run.trainees.push_back(std::move(t));
    return true;
  }
  if (type == "note") {
    JournalNote note{step, {}, {}};
    if (!text_field(j, "by", 64, false, note.by, error) || !text_field(j, "text", 10000, false, note.text, error))
      return false;
    run.notes.push_back(std::move(note));
    return true;
  }
  JournalEnd end{step, false, {}};  // "end"
  if (!j.contains("complete") || !j["complete"].is_boolean()) return (error = "complete: must be true or false", false);
  end.complete = j["complete"].get<bool>();
  if (!text_field(j, "why", 300, true, end.why, error)) return false;
  run.end = std::move(end);
  run.last_step = std::max(run.last_step, step);
  return true;
}

// A scenario record's run id: [0-9A-Za-z_-], at most 64 characters (the service writes 32 hex).
bool read_run_id(const json& j, std::string& out, std::string& error) {
  if (!j.contains("run")) return true;
  if (!text_field(j, "run", 64, false, out, error)) return false;
  for (char c : out)
    if (!std::isalnum(static_cast<unsigned char>(c)) && c != '-' && c != '_')
      return (error = "run: only letters, digits, '-' and '_'", false);
  return true;
}

}  // namespace

JournalRead read_journal(const std::string& path) {
  JournalRead out;
  // A journal is a file the service appended to. A device (`--journal /dev/full`, a disk that is
  // always full) reads as an endless line: read, it would take every byte of memory.
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) {
    out.issues.push_back({"journal", "\"" + path + "\" is not a regular file", false});
    return out;
  }
  std::ifstream in(path);
  if (!in) {
    out.issues.push_back({"journal", "cannot read \"" + path + "\"", false});
    return out;
  }
  const std::string base_dir = std::filesystem::path(path).parent_path().string();
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
      JournalRun run{std::move(*r.system), {}, {}, 0, {}, {}, {}, {}, {}, {}};
      if (std::string error; !read_run_id(j, run.run_id, error)) {
        out.issues.push_back({where, error, false});
        return out;
      }
      out.runs.push_back(std::move(run));
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
      m.acks_before = run.acks.size();
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
    } else if (type == "exercise" || type == "ack" || type == "trainee" || type == "note" || type == "end") {
      std::string error = out.runs.empty() ? "a record before any scenario" : "";
      if (!error.empty() || !read_training_record(j, type, step, base_dir, out.runs.back(), error)) {
        out.issues.push_back({where, error, false});
        return out;
      }
    } else if (type == "script") {
      // An instructor's edit of an exercise's script, for the record: what the script fired is in
      // the command records (by "script"), so replay has nothing to do here.
    } else {
      out.issues.push_back({where, "unknown record type \"" + type + "\"", false});
      return out;
    }
  }
  return out;
}

std::optional<FinalLineage> final_lineage(const JournalRun& run, std::string& error) {
  FinalLineage now;
  std::map<std::uint64_t, FinalLineage> saved;  // by save point id: its lineage when kept
  std::vector<std::size_t> due;                 // acknowledgements journalled for a step still to come
  std::size_t next = 0, next_ack = 0;
  std::uint64_t taken = 0;
  for (const JournalMark& m : run.marks) {
    // The batches taken at their step before the mark, in the order journalled.
    for (; taken < m.taken && next < run.commands.size(); ++taken) now.batches.push_back(next++);
    // An acknowledgement is journalled before it takes effect, at its step, like a batch.
    std::vector<std::size_t> later;
    for (std::size_t a : due) (run.acks[a].step <= m.step ? now.acks : later).push_back(a);
    for (; next_ack < m.acks_before; ++next_ack)
      (run.acks[next_ack].step <= m.step ? now.acks : later).push_back(next_ack);
    due = std::move(later);
    if (m.kind == JournalMark::Kind::savepoint) {
      saved[m.id] = now;
      continue;  // what was still due goes on after it
    }
    if (m.kind == JournalMark::Kind::restore) {
      const auto it = saved.find(m.id);
      if (it == saved.end()) {
        error = "journal line " + std::to_string(m.line) + ": no save point " + std::to_string(m.id) + " before it";
        return std::nullopt;
      }
      now = it->second;
    } else {
      // A rewind to step S gives the state after step S before the actions applied at S; an
      // acknowledgement at S or before was kept by the checkpoint taken with it.
      std::erase_if(now.batches, [&](std::size_t b) { return run.commands[b].step >= m.to_step; });
      std::erase_if(now.acks, [&](std::size_t a) { return run.acks[a].step > m.to_step; });
    }
    due.clear();                              // refused by the restore or rewind, as waiting batches are
    next = std::max(next, m.batches_before);  // journalled before it and not taken: refused by it
  }
  for (; next < run.commands.size(); ++next) now.batches.push_back(next);
  now.acks.insert(now.acks.end(), due.begin(), due.end());
  for (; next_ack < run.acks.size(); ++next_ack) now.acks.push_back(next_ack);
  return now;
}

}  // namespace droopline
