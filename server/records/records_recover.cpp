// Recovery at open: a run still `running` in the file was cut short (the
// service was killed, or the file could not be written for a while). The
// journal is the source of truth: it is written before a command is applied and
// acknowledged, so the actions it holds for the run that the file lacks are
// added, and the run is marked incomplete, each run in one transaction.
#include <spdlog/spdlog.h>

#include <map>
#include <utility>
#include <vector>

#include "droopline/journal_read.hpp"
#include "droopline/scenario_io.hpp"
#include "records_store.hpp"

namespace droopline::records {
namespace {

nlohmann::json commands_json(const std::vector<Command>& commands) {
  nlohmann::json out = nlohmann::json::array();
  for (const Command& c : commands) out.push_back(nlohmann::json::parse(command_to_json(c).dump()));
  return out;
}

// What identifies a batch whichever side wrote it: its author and its commands
// in the one written form (parsed and written again, so 5 and 5.0, or keys in
// another order, compare equal).
std::string batch_key(const std::string& by, const std::string& commands_text) {
  CommandParse parsed = parse_commands(commands_text);
  return by + '\n' + (parsed.issues.empty() ? commands_json(parsed.commands).dump() : commands_text);
}

// Adds the journal's batches for `run` that the file lacks (matched by author
// and commands, as many times as each occurs); false with the reason on a write
// failure.
bool add_missing_actions(Db& db, const JournalRun& run, const std::string& run_id, std::size_t& added,
                         std::string& error) {
  std::map<std::string, int> have;
  Stmt existing(db.get(), "SELECT by, commands FROM actions WHERE run_id = ?1");
  existing.bind(1, run_id);
  while (existing.row()) {
    ++have[batch_key(existing.text(0), existing.text(1))];
  }
  if (existing.failed()) {
    error = existing.error();
    return false;
  }
  const double step_s = run.system.def().step_s;
  for (const JournalBatch& batch : run.commands) {
    const nlohmann::json commands = commands_json(batch.commands);
    if (int& n = have[batch_key(batch.by, commands.dump())]; n > 0) {
      --n;
      continue;
    }
    Stmt insert(db.get(),
                "INSERT INTO actions(run_id, t_s, by, commands) "
                "VALUES(?1, ?2, ?3, ?4)");
    insert.bind(1, run_id).bind(2, static_cast<double>(batch.step) * step_s).bind(3, batch.by).bind(4, commands.dump());
    if (!insert.run()) {
      error = insert.error();
      return false;
    }
    ++added;
  }
  return true;
}

}  // namespace

bool RecordsStore::recover(const std::string& why) {
  std::vector<std::pair<std::string, std::string>> running;  // run id, journal
  {
    Stmt s(db_.get(),
           "SELECT run_id, journal_path FROM runs WHERE status = "
           "'running' ORDER BY started_at");
    while (s.row()) running.emplace_back(s.text(0), s.text(1));
    if (s.failed()) {
      fail(s.error());
      return false;
    }
  }
  std::map<std::string, JournalRead> journals;  // each journal read once
  for (const auto& entry : running) {
    const std::string& run_id = entry.first;
    const std::string& path = entry.second;
    const JournalRun* found = nullptr;
    if (!path.empty()) {
      auto it = journals.find(path);
      if (it == journals.end()) it = journals.emplace(path, read_journal(path)).first;
      for (const JournalRun& r : it->second.runs)
        if (r.run_id == run_id) found = &r;
      if (!it->second.issues.empty())
        spdlog::warn("records: the journal {} of run {} reads only in part: {}", path, run_id,
                     it->second.issues.front().text());
    }
    std::size_t added = 0;
    std::string error;
    const bool written = transaction(db_, error, [&](std::string& e) {
      if (found && !add_missing_actions(db_, *found, run_id, added, e)) return false;
      Stmt s(db_.get(),
             "UPDATE runs SET status = 'incomplete', why = ?2, "
             "ended_s = COALESCE(ended_s, ?3) WHERE run_id = ?1");
      s.bind(1, run_id).bind(2, why);
      if (found)
        s.bind(3, static_cast<double>(found->last_step) * found->system.def().step_s);
      else
        s.bind_null(3);
      if (s.run()) return true;
      e = s.error();
      return false;
    });
    if (!written) {
      fail(error);
      return false;
    }
    spdlog::warn(
        "records: run {} was left running ({}): marked incomplete{}", run_id, why,
        found ? ", " + std::to_string(added) + " action(s) added from its journal" : ", its journal not found");
  }
  return true;
}

}  // namespace droopline::records
