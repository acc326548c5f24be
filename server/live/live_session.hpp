#pragma once
// The live simulation of `droopline serve`: one engine stepped in real time on its own thread
// against absolute deadlines of a steady clock, never blocked by network I/O. Everything that
// touches the engine (commands, state, scenario loads) runs on that thread between steps, posted
// as tasks; results travel back through callbacks. Frames and events leave through a sink that
// must not block (the hub queues them per client).
#include <atomic>
#include <chrono>
#include <condition_variable>
#include <cstdint>
#include <deque>
#include <iterator>
#include <functional>
#include <map>
#include <set>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "droopline/alarms.hpp"
#include "droopline/comtrade.hpp"
#include "droopline/engine.hpp"
#include "droopline/exercise.hpp"
#include "droopline/objectives.hpp"
#include "droopline/script.hpp"
#include "droopline/timeline.hpp"
#include "command_pipeline.hpp"
#include "history_store.hpp"
#include "seat_scope.hpp"
#include "journal.hpp"
#include "run_log.hpp"
#include "telemetry.hpp"

namespace droopline {

struct LiveConfig {
  double speed = 1.0;            ///< simulated seconds per wall second, 0.1 .. 100
  double frame_hz = 20.0;        ///< telemetry frames per wall second
  double history_s = 600.0;      ///< simulated seconds of history kept for late joiners
  int max_catchup_steps = 20;    ///< a late loop runs at most this many steps per wake beyond those due, then slips
  /// true: the loop sleeps until the next frame and then runs the steps due by then in one go
  /// (one wake-up per frame; simulated time, commands and frames are the same, computed up to a
  /// frame interval later in wall time); false: it wakes at every step's deadline.
  bool wake_per_frame = true;
  std::string journal_path;      ///< empty: no journal
  /// Wall time a command is scheduled ahead so that its journal record is on disk before the loop
  /// reaches it; the loop waits at that step only if the disk is slower than this.
  double journal_lead_s = 0.02;
  std::shared_ptr<RunLog> run_log;  ///< training records (none: not kept)
};

/// Counters for /metrics (read from any thread).
struct LiveCounters {
  /// 1 once the loop runs at a real-time priority, 0 once it found it has no privilege for one,
  /// -1 until it has tried.
  std::atomic<int> realtime{-1};
  std::atomic<std::uint64_t> steps{0};
  std::atomic<std::uint64_t> overruns{0};       ///< wakes later than one step behind the deadline
  std::atomic<std::uint64_t> slips{0};          ///< schedule given up and rebased
  std::atomic<std::uint64_t> frames{0};
  std::atomic<std::uint64_t> commands{0};       ///< commands applied
  std::atomic<std::uint64_t> commands_refused{0};
  std::atomic<double> lag_s{0.0};               ///< how late the last step ran (wall s)
  std::atomic<double> jitter_max_s{0.0};        ///< worst lateness since start (wall s)
  std::atomic<double> realtime_factor{0.0};     ///< simulated s per wall s over the last second
  /// Upper bounds (s) of the lateness histogram; the last bucket is everything above.
  static constexpr double kLagBounds[] = {1e-5, 2e-5, 5e-5, 1e-4, 2e-4, 5e-4, 1e-3, 2e-3, 5e-3, 1e-2, 1e-1};
  static constexpr std::size_t kLagBuckets = std::size(kLagBounds) + 1;
  std::atomic<std::uint64_t> lag_counts[kLagBuckets] = {};  ///< wakes per lateness bucket
  std::atomic<double> lag_sum_s{0.0};
  void record_lag(double late_s) {
    std::size_t b = 0;
    while (b < std::size(kLagBounds) && late_s > kLagBounds[b]) ++b;
    lag_counts[b].fetch_add(1, std::memory_order_relaxed);
    lag_sum_s = lag_sum_s.load() + late_s;
  }
};

/// A message for clients: `droppable` telemetry may be dropped for a slow client, events never.
struct Outgoing {
  std::shared_ptr<const std::string> text;
  bool droppable = false;
};

class LiveSession {
 public:
  using Sink = std::function<void(const Outgoing&)>;
  using Task = std::function<void(Engine&)>;

  /// Starts the loop thread on a checked system, or on an exercise's (its script and alarms run
  /// after each step). `sink` is called on the loop thread.
  LiveSession(const CheckedSystem& system, LiveConfig config, Sink sink,
              std::optional<study::Exercise> exercise = std::nullopt);
  ~LiveSession();
  LiveSession(const LiveSession&) = delete;
  LiveSession& operator=(const LiveSession&) = delete;

  /// False when the journal could not be opened (the reason in journal_error()).
  bool journal_ok() const { return pipeline_.journal().ok() && !journal_failed_; }
  /// Whether the loop thread got its real-time priority; waits (microseconds) for it to try.
  bool realtime() const;
  /// Why the journal could not be opened or written.
  const std::string& journal_error() const { return pipeline_.journal().error(); }

  /// Runs `task` on the loop thread between two steps.
  void post(Task task);

  /// What a change came to (data, never a reply: the API words it).
  using Result = LiveResult;
  using Done = std::function<void(Result)>;

  /// Applies commands atomically (all or none), journals them with `author` (who sent them:
  /// "instructor", a seat id or "script"; in the journal, the command's event and the reply as
  /// "by"), then answers. From a seat (`scope`), commands outside its kinds or areas refuse the
  /// whole batch with 403.
  void apply(std::vector<Command> commands, std::string author, std::optional<SeatScope> scope, Done done);
  /// Replaces the scenario (checked by the loader) and restarts from t = 0.
  void load(CheckedSystem system, Done done);
  /// Restarts the current scenario from t = 0.
  void reset(Done done);
  void pause(Done done);
  void resume(Done done);
  /// Sets the speed factor (0.1 .. 100).
  void set_speed(double speed, Done done);

  // Save points and rewind (study::Timeline): the run's state can be saved under a name and
  // restored exactly, or rewound to any time within the last `kRewindS` simulated seconds. Both
  // are journalled; commands still waiting in the pipeline are refused (409); the history after
  // the point gone back to is dropped, the event log kept, and every client is told with a
  // `restored` event. A reset or a new scenario starts a new run without save points.

  /// How far back a rewind reaches (simulated s).
  static constexpr double kRewindS = 600.0;
  /// A save point's name is cut to this many bytes (at a UTF-8 character's start).
  static constexpr std::size_t kMaxNameBytes = 64;
  /// Saves the state now as `name` (empty: "save point N"); answers {"id", "name", "t_s", "step"}
  /// (409 when the run holds Timeline::kMaxSavePoints already).
  void save(std::string name, std::string author, Done done);
  /// Answers {"t_s", "rewind_from_s", "savepoints": [{"id", "name", "t_s", "step"}, ...]}.
  void save_points(Done done);
  /// Goes back to save point `id` (404 when this run has none such); answers {"ok", "t_s",
  /// "from_t_s", "savepoint": {"id", "name"}, "refused_commands"}.
  void restore(std::uint64_t id, std::string author, Done done);
  /// Goes back to `to_s` on this lineage (400 unless it lies within the last kRewindS and not
  /// ahead of now); answers as restore() with "savepoint": null.
  void rewind(double to_s, std::string author, Done done);

  /// The greeting a new client gets (scenario, columns, history, recent events), handed to `done`
  /// on the loop thread between two steps, so that nothing broadcast after it is missing from it.
  void hello(std::function<void(std::shared_ptr<const HelloSnapshot>)> done);
  /// Replaces the running scenario with an exercise (its scenario, script and alarms), from t = 0.
  void load_exercise(study::Exercise exercise, Done done);
  /// The running exercise for everyone: name, briefing, time_limit_s, seats (id, name, areas);
  /// 404 without one. Never the script.
  void exercise(Done done);
  /// The hidden script for the instructor (`script_to_json`); 404 without an exercise.
  void script(Done done);
  /// Adds a script event by `author` (answers `{"id"}`); journaled and logged without its content.
  void script_add(study::ScriptEventDef event, std::string author, Done done);
  /// Fires a pending script event now (through the command pipeline, author "script").
  void script_fire(std::string id, std::string author, Done done);
  /// Skips a pending script event.
  void script_skip(std::string id, std::string author, Done done);
  /// Gives a pending timed script event a new time.
  void script_shift(std::string id, double at_s, std::string author, Done done);
  /// The alarms (`{"alarms": [...]}`, oldest first; only active ones with `active_only`); empty
  /// without an exercise.
  void alarms(bool active_only, Done done);
  /// Acknowledges alarm `id` on behalf of `author` (404 no such alarm, 409 already acknowledged).
  /// A seat (`scope`) acknowledges only alarms that concern one of its areas (else 403).
  void ack_alarm(std::uint64_t id, std::string author, std::optional<SeatScope> scope, Done done);

  // Runs: from a load or reset to the next, each with a random id (the journal's scenario record
  // has it as "run"); the training records (LiveConfig::run_log) hear of each as it goes. An
  // exercise's run ends complete at its time limit or by the instructor; then the session pauses
  // and commands are refused (409) until a reset or a load.

  /// The id of the run going on (thread-safe).
  std::string run_id() const;
  /// Seat `seat`'s trainee is `name` (checked by the caller: `typed_text` with kTraineeName): kept
  /// for the exercise (a reset keeps it), journaled ("trainee") and told to the records; answers
  /// {"ok", "seat", "name"}.
  void trainee(std::string seat, std::string name, Done done);
  /// An instructor's note (checked by the caller: kNoteText), journaled ("note"), told to the records
  /// and kept for the run; answers {"ok", "id", "t_s"}.
  void add_note(std::string text, std::string author, Done done);
  /// This run's notes, oldest first: {"notes": [{"id", "t_s", "by", "text"}]}.
  void notes(Done done);
  /// Ends the running exercise now, complete (404 without one, 409 once ended).
  void end_exercise(std::string author, Done done);
  /// The objectives' running state: seat `seat`'s only, or every seat's (nullopt):
  /// {"t_s", "ended", "seats": [seat_score_to_json, ...]}; 404 without an exercise.
  void objectives(std::optional<std::string> seat, Done done);

  /// Current state as JSON (t_s, areas, units, ties, ...).
  void state(std::function<void(std::string)> done);
  /// The current scenario as JSON; without `with_hidden`, an exercise's own events are left out
  /// (viewers and seats must not see what is to come).
  void scenario(std::function<void(std::string)> done, bool with_hidden = true);

  /// History rows within [from_s, to_s] at multiples of `every_s` (0 = all), as CSV or JSON, or
  /// none and `error` (thread-safe).
  std::optional<std::string> history(double from_s, double to_s, double every_s, bool csv, std::string& error) const;
  /// A COMTRADE record (IEEE C37.111-1999 ASCII) of the history within [from_s, to_s]
  /// (thread-safe). Times are simulation times after the wall time the scenario started.
  study::ComtradeRecord record(double from_s, double to_s) const;
  /// Event log entries with sequence number > since, as JSON (thread-safe).
  std::string events(std::uint64_t since) const;

  const LiveCounters& counters() const { return counters_; }
  double speed() const { return speed_.load(); }
  bool paused() const { return paused_.load(); }

  /// Stops the loop (writes the journal's stop record). Idempotent.
  void stop();

 private:
  void run();
  void start_engine(const CheckedSystem& system);
  /// Journals the start of a new run of `def` (and of the running exercise when `exercise_`),
  /// ending the run going on (incomplete, `why`) in the same write; false (logged) when it failed.
  bool journal_new_run(const SystemDef& def, const study::Exercise* exercise, const std::string& why);
  /// After start_engine: the new run told to the records (and the trainees still at their seats).
  void open_run();
  /// The run going on ends: final scores, the journal's end record (unless `journaled`), the records
  /// told; the exercise pauses when `complete`. Nothing when it ended already.
  void close_run(bool complete, const std::string& why, bool journaled);
  /// Hands a record (trainee, note, end, script edit) to the journal's writer without waiting for it.
  void journal_record(const nlohmann::ordered_json& record);
  /// The journal's end record of the run going on.
  nlohmann::ordered_json end_record(bool complete, const std::string& why) const;
  /// Every seat's scores as JSON (empty without objectives).
  nlohmann::ordered_json scores_json(const std::optional<std::string>& seat) const;
  /// After each step: the records' scores every simulated minute; false when the time limit ended it.
  bool run_after_step();
  /// Why commands are refused now ("" when they are not): a halted session or an ended exercise.
  std::string refusal() const;
  // Commands wait here, scheduled for a step, until their journal record is durable.
  void apply_due();             ///< answers failed ones; applies durable ones whose step has come
  bool due_unwritten() const;   ///< the next command is due but its record is not on disk yet
  bool pending_ready() const;   ///< apply_due() has something to do
  void settle_pending();        ///< waits for the writer and runs the engine to every pending step
  void rebase();
  void emit_frame(double wall_s);
  /// Logs and sends the engine's notices and disturbances; `by`: the author of the commands just
  /// applied (their command notices carry it), empty after a step.
  void drain_notices(const std::string& by = {});
  void record_history();
  /// After each step the loop keeps: the guard, the history row, the notices, the checkpoint.
  bool after_step();  ///< false when the guard had to stop the session
  /// The simulation time of `step` (as the engine writes it).
  double time_of(std::int64_t step) const;
  /// The state now, as a save point or checkpoint keeps it.
  study::SavedState saved_now() const;
  /// Writes a save point, restore or rewind record before it happens; false with `done`
  /// answered when the journal refused it (nothing changed).
  bool journal_mark(nlohmann::ordered_json record, const char* what, const Done& done);
  /// Goes on from `state` (a restore or rewind), from time `from_t_s`: refuses what waits in
  /// the pipeline, drops the history after it, tells every client and answers.
  void go_back(study::SavedState state, double from_t_s, const study::SavePoint* savepoint, const std::string& author,
               const Done& done);
  std::string state_json(double wall_s) const;
  /// Logs an event (a JSON object; "seq" is added) and sends it to every client.
  void push_event(nlohmann::ordered_json event);
  /// Logs disturbance `index` as it is now, replacing its earlier entry (a late joiner sees the
  /// present), and sends it; `droppable` for the periodic updates of an open one.
  void push_disturbance(std::size_t index, bool droppable);
  /// After each step: keeps a checkpoint of the last good state every simulated second and, should
  /// anything turn non-finite, goes back to it, pauses and tells every client why.
  bool guard_step();  ///< false when it had to stop the session

  /// Simulation steps a command is scheduled ahead so that its journal record gets there first.
  std::int64_t lead_steps() const;
  /// The step a command from outside is scheduled for: lead_steps() after the step due now by
  /// the wall clock (with one wake per frame the engine may not have run it yet).
  std::int64_t command_step() const;
  /// After each step: the script's due events into the pipeline, the alarm monitor fed.
  void exercise_after_step();
  /// A script event handed out by the runner, submitted as a command by "script".
  void submit_firing(const study::ScriptFiring& firing);
  /// The script and alarm monitor of the running exercise made afresh (none without one).
  void start_exercise();
  /// A script edit: journaled (record type "script") and logged with its author, not its content.
  void record_script_edit(const std::string& edit, const std::string& id, const std::string& author,
                          nlohmann::ordered_json detail);
  void push_alarm_changes(const std::vector<study::AlarmChange>& changes);

  LiveConfig config_;
  Sink sink_;
  LiveCounters counters_;
  CommandPipeline pipeline_;     // journal before apply; loop thread only
  bool journal_failed_ = false;  ///< the first scenario record could not be written

  // Loop-thread state
  std::unique_ptr<Engine> engine_;
  std::optional<CheckedSystem> system_;  // the running scenario with its initial flows (a reset starts it again)
  const SystemDef& def() const { return system_->def(); }
  std::int64_t output_every_ = 10;
  std::size_t reported_ = 0;   // disturbances already sent complete
  std::size_t announced_ = 0;  // disturbances already sent as begun
  std::uint64_t frame_count_ = 0;
  study::Timeline timeline_;  // save points, checkpoints and the actions since (the run's lineage)
  // Each save point's history rows (null: over the budget) and event log as they stood, so a restore
  // onto a course since rewound past shows that course's; the rows all together at most kSavedRowsBytes.
  static constexpr std::size_t kSavedRowsBytes = std::size_t{64} << 20;
  struct SavedShown {
    std::shared_ptr<const std::vector<double>> rows;
    std::deque<EventLog::Entry> events;
  };
  std::map<std::uint64_t, SavedShown> saved_shown_;
  std::size_t saved_rows_bytes_ = 0;
  std::unique_ptr<Engine> checkpoint_;  // the last state found finite, about a second back
  std::int64_t checkpoint_every_ = 100;  // steps
  std::string halted_;                   // why the session stopped on a non-finite state ("": running)
  std::chrono::steady_clock::time_point base_wall_;
  std::int64_t base_step_ = 0;
  std::chrono::steady_clock::time_point next_frame_;
  std::chrono::steady_clock::time_point rate_wall_;
  std::chrono::steady_clock::time_point last_overrun_log_{};
  double rate_sim_ = 0.0;

  // Shared with other threads
  std::atomic<double> speed_{1.0};
  std::atomic<bool> paused_{false};
  std::atomic<bool> stop_{false};
  mutable std::mutex tasks_mutex_;
  mutable std::condition_variable tasks_cv_;
  std::vector<Task> tasks_;

  // The running exercise (loop thread only): the script and the alarm monitor are values, so a
  // save point can copy them with the engine.
  std::optional<study::Exercise> exercise_;
  std::optional<study::ScriptRunner> script_;
  std::optional<study::AlarmMonitor> alarms_;
  std::optional<study::ObjectiveMonitor> objectives_;
  std::vector<Notice> alarm_notices_;  // notices since the monitor's last update

  // The run (loop thread only, but run_id_ which other threads read under run_mutex_).
  std::string run_id_;
  mutable std::mutex run_mutex_;
  std::string next_run_id_;       // the id journal_new_run wrote, taken by open_run
  bool run_open_ = false;         // the run has not ended yet
  bool ended_ = false;            // the exercise ended: commands refused until a reset or load
  double next_scores_s_ = 60.0;   // the records get the scores when simulation time reaches this
  std::map<std::string, std::string> trainees_;  // seat id -> trainee name (the exercise's seats)
  static constexpr std::size_t kMaxNamesPerSeat = 8;
  std::map<std::string, std::set<std::string>> names_in_run_;  // seat id -> every name given this run
  std::map<std::string, std::string> carried_;  // seat id -> trainee carried over a reset who has not acted yet
  struct Note {
    std::uint64_t id;
    double t_s;
    std::string by;
    std::string text;
  };
  std::vector<Note> notes_;

  HistoryStore store_;              // rows, columns, scenario and event log for other threads
  std::vector<double> sample_row_;  // loop thread only

  std::thread thread_;
};

}  // namespace droopline
