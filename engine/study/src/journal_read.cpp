#include "droopline/journal_read.hpp"

#include <algorithm>
#include <fstream>
#include <nlohmann/json.hpp>

#include "droopline/json_input.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline {

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
      out.runs.push_back({std::move(*r.system), {}, 0});
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
    } else {
      out.issues.push_back({where, "unknown record type \"" + type + "\"", false});
      return out;
    }
  }
  return out;
}

}  // namespace droopline
