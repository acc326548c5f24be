#include "command_pipeline.hpp"

#include <spdlog/spdlog.h>

#include <algorithm>

#include "droopline/scenario_io.hpp"

namespace droopline {
namespace {
using json = nlohmann::ordered_json;
}  // namespace

LiveResult accepted(json data) { return {200, std::move(data), {}, {}}; }

LiveResult refused(int status, std::string error, std::vector<Issue> issues) {
  return {status, nullptr, std::move(error), std::move(issues)};
}

CommandPipeline::CommandPipeline(std::string journal_path, std::function<void()> wake,
                                 std::atomic<std::uint64_t>& applied, std::atomic<std::uint64_t>& refused)
    : journal_(std::move(journal_path), std::move(wake)), applied_(applied), refused_(refused) {}

void CommandPipeline::refuse(const std::vector<Command>& commands, const Done& done, int status,
                             const std::string& why, std::vector<Issue> issues) {
  refused_.fetch_add(commands.size());
  done(refused(status, why, std::move(issues)));
}

bool CommandPipeline::submit(const Engine& engine, std::vector<Command> commands, std::string author,
                             std::int64_t earliest_step, Done done) {
  Resolved resolved = resolve_all(engine.system(), commands);
  if (!resolved.issues.empty()) {
    refused_.fetch_add(commands.size());
    done(refused(400, "command refused", std::move(resolved.issues)));
    return false;
  }
  ApplyResult check = engine.check_all(resolved.actions);
  if (!check.ok) {
    refused_.fetch_add(commands.size());
    done(refused(400, "command refused", std::move(check.issues)));
    return false;
  }
  const std::int64_t step = schedule(earliest_step);
  json cmds = json::array();
  for (const Command& c : commands) cmds.push_back(command_to_json(c));
  auto outcome = journal_.submit(json{{"type", "commands"}, {"step", step}, {"commands", cmds}, {"by", author}}.dump());
  pending_.push_back(
      {step, std::move(resolved.actions), std::move(author), cmds.dump(), {}, std::move(done), std::move(outcome)});
  return true;
}

void CommandPipeline::submit_effect(json record, std::int64_t earliest_step, std::function<LiveResult(Engine&)> effect,
                                    Done done) {
  const std::int64_t step = schedule(earliest_step);
  record["step"] = step;
  auto outcome = journal_.submit(record.dump());
  pending_.push_back({step, {}, {}, {}, std::move(effect), std::move(done), std::move(outcome)});
}

bool CommandPipeline::due_unwritten(std::int64_t step) const {
  return !pending_.empty() && pending_.front().step <= step &&
         pending_.front().outcome->state.load(std::memory_order_acquire) == JournalWriter::writing;
}

bool CommandPipeline::ready(std::int64_t step) const {
  for (const Pending& p : pending_) {
    const int state = p.outcome->state.load(std::memory_order_acquire);
    if (state == JournalWriter::failed) return true;
    if (&p == &pending_.front() && state == JournalWriter::durable && p.step <= step) return true;
  }
  return false;
}

void CommandPipeline::apply_due(Engine& engine, const std::function<void(const Applied&)>& applied) {
  if (pending_.empty()) return;
  for (auto it = pending_.begin(); it != pending_.end();) {
    if (it->outcome->state.load(std::memory_order_acquire) != JournalWriter::failed) {
      ++it;
      continue;
    }
    spdlog::error("{}", it->outcome->error);
    refused_.fetch_add(it->actions.size());
    it->done(refused(it->outcome->status,
                     std::string(it->effect ? "refused" : "command refused") + ", nothing applied: " + it->outcome->error));
    it = pending_.erase(it);
  }
  while (!pending_.empty() && pending_.front().step <= engine.step_index() &&
         pending_.front().outcome->state.load(std::memory_order_acquire) == JournalWriter::durable) {
    Pending p = std::move(pending_.front());
    pending_.pop_front();
    if (p.effect) {  // not a command batch: replay and the save points' counts leave it out
      p.done(p.effect(engine));
      continue;
    }
    ++taken_;
    ApplyResult r = engine.apply_all(p.actions);
    if (!r.ok) {  // replay refuses it the same way
      refused_.fetch_add(p.actions.size());
      p.done(refused(400, "command refused", std::move(r.issues)));
      continue;
    }
    applied_.fetch_add(p.actions.size());
    applied({engine.step_index(), p.actions, p.author, p.commands});
    p.done(accepted(json{{"ok", true},
                         {"applied", p.actions.size()},
                         {"t_s", r.at_s},
                         {"step", engine.step_index()},
                         {"by", p.author}}));
  }
}

void CommandPipeline::refuse_all(int status, const std::string& why) {
  for (Pending& p : pending_) {
    refused_.fetch_add(p.actions.size());
    p.done(refused(status, why));
  }
  pending_.clear();
}

}  // namespace droopline
