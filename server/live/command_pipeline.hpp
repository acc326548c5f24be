#pragma once
// The live session's command pipeline, journal before apply: a command is resolved against the
// running system (ids and static checks, once), checked against the state, scheduled for a step a little ahead, its record handed to the journal's writer thread,
// and applied at that step only once the record is durable. One refused by the check or the
// journal changes nothing. Used on the loop thread only (the journal writes on its own).
#include <atomic>
#include <cstdint>
#include <algorithm>
#include <deque>
#include <functional>
#include <memory>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "droopline/engine.hpp"
#include "journal.hpp"

namespace droopline {

/// What a change of the live session came to: `status` 200 with `data`, or a refusal (400, 409,
/// 500, 507: the HTTP status the API answers with) with `error` and `issues`. Data, not a reply.
struct LiveResult {
  int status = 200;                 ///< 200, or the refusal's status
  nlohmann::ordered_json data;      ///< what a 200 carries
  std::string error;                ///< why it was refused
  std::vector<Issue> issues;        ///< the problems one by one (`path`, `message`)
};

/// A 200 result carrying `data`.
LiveResult accepted(nlohmann::ordered_json data);
/// A refusal with its status, reason and the problems one by one.
LiveResult refused(int status, std::string error, std::vector<Issue> issues = {});

/// Commands between the API and the engine (loop thread only).
class CommandPipeline {
 public:
  /// Receives the result (on the loop thread).
  using Done = std::function<void(LiveResult)>;
  /// Journals to `journal_path` (empty: no journal); `wake` is called when a record is written;
  /// `applied` and `refused` count commands (for /metrics).
  CommandPipeline(std::string journal_path, std::function<void()> wake, std::atomic<std::uint64_t>& applied,
                  std::atomic<std::uint64_t>& refused);

  /// The journal's writer, for the scenario and stop records written in line.
  JournalWriter& journal() { return journal_; }
  /// The journal's writer, to ask whether it is open and why not.
  const JournalWriter& journal() const { return journal_; }

  /// Resolves `commands` against `engine`'s system (ids, static checks), checks them against its
  /// state, schedules them for `earliest_step` or later (never before one already waiting) and
  /// submits their record with `author` (who sent them: "instructor", a seat id, "script"); false
  /// (nothing kept) with `done` answered when a check refuses them.
  bool submit(const Engine& engine, std::vector<Command> commands, std::string author, std::int64_t earliest_step,
              Done done);
  /// Something other than commands that must be journalled before it takes effect, as commands are
  /// (an alarm acknowledgement): `record` (its "step" set to the step chosen, `earliest_step` or
  /// later) goes to the journal, and `effect` runs at that step once the record is durable and
  /// answers; a failed record answers its status and nothing happens. Not a batch taken.
  void submit_effect(nlohmann::ordered_json record, std::int64_t earliest_step,
                     std::function<LiveResult(Engine&)> effect, Done done);
  /// The next command is due at `step` but its record is not on disk yet (the loop waits).
  bool due_unwritten(std::int64_t step) const;
  /// apply_due() has something to do at `step`.
  bool ready(std::int64_t step) const;
  /// What was applied, told to the caller right after `Engine::apply_all` and before the answer:
  /// the notices the engine holds then are this batch's (the loop takes them after every step).
  struct Applied {
    std::int64_t step;                   ///< the step it was applied at
    const std::vector<Action>& actions;  ///< the resolved actions
    const std::string& author;           ///< who sent them
    const std::string& commands;         ///< the commands as the journal wrote them (a JSON array)
  };
  /// Answers the commands whose record failed; applies the durable ones whose step has come,
  /// calling `applied` after each (for the notices, their author and the save points' log), and
  /// answers them.
  void apply_due(Engine& engine, const std::function<void(const Applied&)>& applied);
  /// Batches taken at their step (applied, or refused by the state checks there) since the last
  /// reset_taken(): save point and restore records name it, so that replay knows which of the
  /// batches journalled before them came first.
  std::uint64_t taken() const { return taken_; }
  /// Counts taken batches from 0 again (a new run).
  void reset_taken() { taken_ = 0; }
  /// Commands waiting (scheduled, not yet applied or refused).
  std::size_t waiting_commands() const {
    std::size_t n = 0;
    for (const Pending& p : pending_) n += p.actions.size();
    return n;
  }
  /// The step of the next waiting command, or -1.
  std::int64_t next_step() const { return pending_.empty() ? -1 : pending_.front().step; }
  /// The step something submitted now for `earliest_step` would take (never before one waiting).
  std::int64_t schedule(std::int64_t earliest_step) const {
    return pending_.empty() ? earliest_step : std::max(earliest_step, pending_.back().step);
  }
  /// Refuses every waiting command with `status` and `why`.
  void refuse_all(int status, const std::string& why);
  /// Refuses `commands` before they reach the pipeline (a halted session), counted like the rest.
  void refuse(const std::vector<Command>& commands, const Done& done, int status, const std::string& why,
              std::vector<Issue> issues = {});

 private:
  struct Pending {
    std::int64_t step;
    std::vector<Action> actions;  // resolved once, applied at `step`
    std::string author;           // who sent them
    std::string commands;         // their journal form (a JSON array), for the training records
    std::function<LiveResult(Engine&)> effect;  // instead of commands: what submit_effect runs
    Done done;
    std::shared_ptr<const JournalWriter::Outcome> outcome;
  };
  JournalWriter journal_;
  std::deque<Pending> pending_;
  std::uint64_t taken_ = 0;
  std::atomic<std::uint64_t>& applied_;
  std::atomic<std::uint64_t>& refused_;
};

}  // namespace droopline
