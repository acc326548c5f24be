#include "journal.hpp"

#include <unistd.h>

#include <cerrno>
#include <cstring>
#include <fstream>

#include <nlohmann/json.hpp>

#include "droopline/scenario_io.hpp"

namespace droopline {

Journal::Journal(std::string path) : path_(std::move(path)) {
  if (path_.empty()) return;
  file_ = std::fopen(path_.c_str(), "ab");
  if (!file_) error_ = "cannot open journal \"" + path_ + "\": " + std::strerror(errno);
}

Journal::~Journal() {
  if (file_) std::fclose(file_);
}

bool Journal::append(const std::string& json_line) {
  if (path_.empty()) return true;
  if (!file_) return false;
  const bool wrote = std::fwrite(json_line.data(), 1, json_line.size(), file_) == json_line.size() &&
                     std::fputc('\n', file_) != EOF && std::fflush(file_) == 0 &&
                     ::fdatasync(::fileno(file_)) == 0;
  if (!wrote) {
    error_ = "writing the journal \"" + path_ + "\" failed: " + std::strerror(errno);
    std::clearerr(file_);
  }
  return wrote;
}

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
    auto j = nlohmann::json::parse(line, nullptr, false);
    if (j.is_discarded() || !j.is_object() || !j.contains("type") || !j.contains("step") ||
        !j["step"].is_number_integer()) {
      // A torn last line (a crash mid-write) was never acknowledged: stop there.
      if (in.peek() == EOF) break;
      out.issues.push_back({where, "not a journal record", false});
      return out;
    }
    const std::string type = j["type"].get<std::string>();
    const std::int64_t step = j["step"].get<std::int64_t>();
    if (type == "scenario") {
      LoadResult r = parse_scenario(j["scenario"].dump());
      if (!r.def) {
        for (auto& i : r.issues)
          if (!i.warning) out.issues.push_back({where, i.text(), false});
        return out;
      }
      out.runs.push_back({*r.def, {}, 0});
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
        run.commands.emplace_back(step, cp.commands);
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
