#pragma once
// Save points and rewind, shared by the live session and `droopline replay` (no clock, no I/O).
// A run keeps a ring of automatic checkpoints (full copies of the state, one every `every_s`
// simulated seconds, reaching at least `keep_s` back) and the log of the actions applied on the
// current lineage since the oldest of them. A named save point keeps its state and a copy of the
// ring and log as they were, so that after restoring it a rewind stays on its lineage. A rewind
// goes to the latest checkpoint at or before the time asked for and simulates forward from there,
// applying the logged actions at their steps: the engine is deterministic, so the state reached
// is the one the lineage had.
//
// Steps: a checkpoint at step k is taken after step k and what follows it (notices, alarms),
// usually before the actions applied at k; one taken among them (the live session checkpoints when
// an alarm is acknowledged, and an acknowledgement is applied with the actions due at its step)
// counts those it holds, and a rewind from it applies only the later ones. A rewind to step k gives
// the state before the actions of k. A save point is the state as
// it is when saved (actions already applied at its step included).
//
// Memory: each checkpoint is a full copy of the engine (measured: 0.24 kB per unit of a mixed
// fleet, 4.8 MB for 20,000 units; `Timeline::copy_bytes`, the estimate used, is about twice
// that). The ring holds at most `keep_s / every_s + 2` copies; for a large fleet the interval
// grows so that the estimate stays within `budget_bytes` (at least 4 copies: 20,000 units keep
// 26 copies 25 s apart, 100,000 units 5 copies 200 s apart, and a rewind then simulates up to
// 200 s). A save point shares its ring's copies with the present lineage where they are the
// same; at most `kMaxSavePoints` are kept.
#include <cstdint>
#include <deque>
#include <functional>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "droopline/alarms.hpp"
#include "droopline/engine.hpp"
#include "droopline/objectives.hpp"
#include "droopline/script.hpp"

namespace droopline::study {

/// What the loop around an engine counts that shapes what it sends or writes next.
struct LoopCounters {
  std::size_t announced = 0;  ///< disturbances sent as begun
  std::size_t reported = 0;   ///< disturbances sent complete
  std::uint64_t frames = 0;   ///< frames sent (open disturbances are updated every few frames)
  std::size_t notices = 0;    ///< notices kept so far on this lineage (replay's summary)
};

/// Everything a loop needs to resume exactly where it was: the engine (state, integrators, timers,
/// noise position, open disturbances, notices not yet taken), the loop's counters and the
/// exercise state (script, alarms and objectives, when an exercise runs).
struct SavedState {
  std::unique_ptr<Engine> engine;
  LoopCounters counters;
  std::optional<ScriptRunner> script;
  std::optional<AlarmMonitor> alarms;
  std::optional<ObjectiveMonitor> objectives = std::nullopt;  ///< initialised so callers without objectives may leave it out

  /// An independent copy (the engine cloned).
  SavedState copy() const;
  /// The step it stands at.
  std::int64_t step() const { return engine->step_index(); }
};

/// Actions applied at one step, in the order applied.
struct LoggedActions {
  std::int64_t step = 0;
  std::vector<Action> actions;
  std::string author;  ///< who sent them ("" when the caller does not say): objectives count a seat's own
};

/// How far back and how densely a timeline keeps checkpoints.
struct TimelineOptions {
  double keep_s = 600.0;                  ///< a rewind reaches at least this far back (simulated s)
  double every_s = 10.0;                  ///< checkpoint interval for small systems (simulated s)
  std::size_t budget_bytes = 256u << 20;  ///< the ring's copies stay within this (estimated)
};

/// An automatic checkpoint: the state, and how many logged actions of its own step it already
/// holds (a rewind from it applies only those after them).
struct Checkpoint {
  std::shared_ptr<const SavedState> state;
  std::size_t applied_here = 0;
  std::int64_t step() const { return state->step(); }
};

/// The checkpoints and actions of one lineage.
struct Lineage {
  std::deque<Checkpoint> ring;     ///< oldest first, steps rising
  std::vector<LoggedActions> log;  ///< since the oldest checkpoint, steps rising
};

/// A named save point.
struct SavePoint {
  std::uint64_t id = 0;   ///< 1, 2, ... in the order saved (never reused within a run)
  std::string name;       ///< as given (clipped by the caller)
  std::int64_t step = 0;  ///< the step it was saved at
  double t_s = 0.0;       ///< its simulation time (s)
  std::shared_ptr<const SavedState> state;
  Lineage lineage;  ///< the ring and log as they were when saved
};

/// What a rewind's simulation forward tells the caller, so that it can feed what the live loop
/// feeds after each step (alarms, script, notices, counters). Each may be left empty.
struct Resimulation {
  std::function<void(SavedState&)> begin;                          ///< on the checkpoint it starts from
  std::function<void(SavedState&, const LoggedActions&)> applied;  ///< after logged actions were applied
  std::function<void(SavedState&)> stepped;                        ///< after each step
};

/// Save points, automatic checkpoints and rewind for one run.
class Timeline {
 public:
  /// At most this many named save points per run.
  static constexpr std::size_t kMaxSavePoints = 50;

  /// An empty timeline; start() begins a run.
  Timeline() = default;
  /// Begins a run from `state` (its first checkpoint); drops every save point and checkpoint.
  void start(const SavedState& state, TimelineOptions options = {});

  /// Steps between checkpoints (set by start from the options and the engine's size).
  std::int64_t every_steps() const { return every_; }
  /// Steps a rewind must reach back (keep_s in steps).
  std::int64_t keep_steps() const { return keep_; }
  /// True when a checkpoint is due after step `step` (the caller then hands one to checkpoint()).
  bool due(std::int64_t step) const { return every_ > 0 && step % every_ == 0 && step > last_checkpoint_step(); }
  /// Keeps `state` as the checkpoint of its step and lets go of what lies further back than needed.
  void checkpoint(SavedState state);
  /// Logs actions applied at `step` on the current lineage, sent by `author`.
  void applied(std::int64_t step, std::vector<Action> actions, std::string author = {});
  /// Forgets everything after `step` on the current lineage: checkpoints after it and actions at
  /// or after it (the state went back there: a rewind, or the live guard's last good state).
  void truncate(std::int64_t step);

  /// The id the next save point gets.
  std::uint64_t next_id() const { return next_id_; }
  /// True when another save point can be kept.
  bool can_save() const { return saves_.size() < kMaxSavePoints; }
  /// Keeps `state` as save point `name` (can_save() must hold); returns it.
  const SavePoint& save(std::string name, SavedState state);
  /// The save point `id`, or null.
  const SavePoint* find(std::uint64_t id) const;
  /// Every save point, oldest first.
  const std::vector<SavePoint>& save_points() const { return saves_; }
  /// Makes save point `id` the current lineage and returns a copy of its state to resume from
  /// (nullopt when there is no such save point).
  std::optional<SavedState> restore(std::uint64_t id);

  /// The earliest step a rewind from `now_step` may go to: keep_s back, never before the oldest
  /// checkpoint of the lineage.
  std::int64_t earliest_step(std::int64_t now_step) const;
  /// Rebuilds the state of the current lineage at `to_step` (earliest_step(now) <= to_step <= now
  /// must hold): from the latest checkpoint at or before it, simulating forward and applying the
  /// logged actions at their steps; forgets what came after. Calls `hooks` on the way.
  SavedState rewind(std::int64_t to_step, const Resimulation& hooks = {});

  /// The estimated bytes of one full copy of `engine` (for the ring's budget).
  static std::size_t copy_bytes(const Engine& engine);

 private:
  std::int64_t last_checkpoint_step() const { return now_.ring.empty() ? -1 : now_.ring.back().step(); }

  std::int64_t every_ = 0;  // steps between checkpoints
  std::int64_t keep_ = 0;   // steps a rewind reaches back
  Lineage now_;             // the current lineage
  std::vector<SavePoint> saves_;
  std::uint64_t next_id_ = 1;
};

}  // namespace droopline::study
