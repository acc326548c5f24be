// The live session's last line of defence: a state that stops being finite is never streamed.
// The session goes back to its last good checkpoint, pauses, refuses commands and resume, tells
// every client why, and comes back clean on a reset. Also: the event log keeps one entry per
// disturbance with its latest state, and a reset empties it.
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <condition_variable>
#include <filesystem>
#include <fstream>
#include <future>
#include <limits>
#include <map>
#include <mutex>
#include <nlohmann/json.hpp>
#include <thread>

#include "droopline/journal_read.hpp"
#include "droopline/format.hpp"
#include "droopline/scenario_io.hpp"
#include "journal.hpp"
#include "live_session.hpp"
#include "study_jobs.hpp"
#include "support.hpp"

using namespace droopline;
using json = nlohmann::json;

namespace {

// Every message the session sends, collected for the test thread.
struct Inbox {
  std::mutex m;
  std::condition_variable cv;
  std::vector<json> messages;
  void put(const Outgoing& o) {
    std::lock_guard lock(m);
    messages.push_back(json::parse(*o.text));
    cv.notify_all();
  }
  template <class Pred>
  std::optional<json> wait_for(Pred pred, std::chrono::seconds limit = std::chrono::seconds(10)) {
    std::unique_lock lock(m);
    std::optional<json> found;
    cv.wait_for(lock, limit, [&] {
      for (const json& j : messages)
        if (pred(j)) {
          found = j;
          return true;
        }
      return false;
    });
    return found;
  }
};

CheckedSystem demo() {
  LoadResult r = load_scenario_file(std::string(DROOPLINE_SOURCE_DIR) + "/scenarios/demo_three_areas.json");
  REQUIRE(r.system);
  return *r.system;
}

template <class T>
T on_loop(LiveSession& s, std::function<T(Engine&)> fn) {
  std::promise<T> p;
  s.post([&](Engine& e) { p.set_value(fn(e)); });
  return p.get_future().get();
}

// A load step in the demo's area "oskany" (MW).
Command load_step(double mw) {
  Command c;
  c.kind = CommandKind::load_step;
  c.area = "oskany";
  c.mw = mw;
  return c;
}

// A journal path in the temporary folder, no file there yet.
std::string fresh_journal(const std::string& name) {
  return test::scratch_path(name + ".jsonl").string();
}

LiveSession::Result call(std::function<void(LiveSession::Done)> fn) {
  std::promise<LiveSession::Result> p;
  fn([&](LiveSession::Result r) { p.set_value(std::move(r)); });
  return p.get_future().get();
}

}  // namespace

TEST_CASE("a non-finite state is never streamed: the session keeps the last good state and pauses") {
  Inbox inbox;
  LiveConfig cfg;
  cfg.speed = 20.0;
  LiveSession s(demo(), cfg, [&](const Outgoing& o) { inbox.put(o); });
  // Let it run past a checkpoint (one simulated second), then poison the state between two steps.
  REQUIRE(inbox.wait_for([](const json& j) { return j["type"] == "frame" && j["t_s"].get<double>() > 2.5; }));
  const double poisoned_at = on_loop<double>(s, [](Engine& e) {
    std::vector<double> x = e.state();
    x[0] = std::numeric_limits<double>::quiet_NaN();
    e.set_state(x);
    return e.time_s();
  });
  auto halted = inbox.wait_for([](const json& j) { return j.value("kind", "") == "halted"; });
  REQUIRE(halted);
  const std::string why = (*halted)["text"];
  CHECK(why.find("stopped being a finite number") != std::string::npos);
  CHECK(why.find("the instructor can reset it") != std::string::npos);
  CHECK(s.paused());
  // The state kept is a real one from before the poison, at most a second back.
  const auto [t, finite] = on_loop<std::pair<double, bool>>(s, [](Engine& e) {
    return std::pair{e.time_s(), e.finite()};
  });
  CHECK(finite);
  CHECK(t <= poisoned_at);
  CHECK(t >= poisoned_at - 1.0 - 1e-9);
  // No frame after the halt carries a non-finite number (JSON has none: it would be null).
  {
    std::lock_guard lock(inbox.m);
    for (const json& j : inbox.messages)
      if (j["type"] == "frame")
        for (auto& [id, a] : j["areas"].items()) CHECK(a["f_hz"].is_number());
  }
  // Commands and resume are refused with the reason; a reset brings it back.
  Command step = load_step(10);
  const LiveSession::Result refused = call([&](auto done) { s.apply({step}, "instructor", std::nullopt, done); });
  CHECK(refused.status == 409);
  CHECK(refused.error.find("stopped being a finite number") != std::string::npos);
  CHECK(call([&](auto done) { s.resume(done); }).status == 409);
  CHECK(call([&](auto done) { s.reset(done); }).status == 200);
  CHECK(call([&](auto done) { s.resume(done); }).status == 200);
  CHECK(call([&](auto done) { s.apply({step}, "instructor", std::nullopt, done); }).status == 200);
  // The reset started a clean log: the halt is gone from what a new client is greeted with.
  std::promise<std::shared_ptr<const HelloSnapshot>> hp;
  s.hello([&](auto snap) { hp.set_value(std::move(snap)); });
  const auto snap = hp.get_future().get();
  for (const std::string& e : snap->events) CHECK(e.find("halted") == std::string::npos);
  s.stop();
}

TEST_CASE("the event log keeps each disturbance once, in its latest state") {
  Inbox inbox;
  LiveConfig cfg;
  cfg.speed = 10.0;
  LiveSession s(demo(), cfg, [&](const Outgoing& o) { inbox.put(o); });
  Command step = load_step(60);
  REQUIRE(call([&](auto done) { s.apply({step}, "instructor", std::nullopt, done); }).status == 200);
  // Wait until the open disturbance has been updated a few times (its nadir has moved).
  REQUIRE(inbox.wait_for([](const json& j) { return j["type"] == "disturbance" && j["seq"].get<int>() > 8; }));
  std::this_thread::sleep_for(std::chrono::milliseconds(1500));
  std::map<int, int> latest_seq_sent;
  {
    std::lock_guard lock(inbox.m);
    for (const json& j : inbox.messages)
      if (j["type"] == "disturbance") latest_seq_sent[j["index"].get<int>()] = j["seq"].get<int>();
  }
  // Read after the snapshot: everything sent was logged first, so the log can only be newer.
  const json log = json::parse(s.events(0))["events"];
  std::map<int, int> entries;  // per disturbance index
  for (const json& e : log)
    if (e["type"] == "disturbance") {
      const int index = e["index"];
      ++entries[index];
      CHECK(e["seq"].get<int>() >= latest_seq_sent[index]);  // the log holds the latest state sent
      CHECK(e["nadir_hz"].is_number());
      CHECK(e["nadir_hz"].get<double>() != e["pre_hz"].get<double>());  // not the state at its start
    }
  REQUIRE_FALSE(entries.empty());
  for (const auto& [index, n] : entries) CHECK(n == 1);
  // events(since) hands out only what changed after `since`.
  const int last = log.back()["seq"];
  CHECK(json::parse(s.events(static_cast<std::uint64_t>(last)))["events"].size() <= 2);
  // A reset empties the log, then logs itself.
  REQUIRE(call([&](auto done) { s.reset(done); }).status == 200);
  const json after = json::parse(s.events(0))["events"];
  REQUIRE(after.size() == 1);
  CHECK(after[0]["kind"] == "reset");
  s.stop();
}

TEST_CASE("a seat may command its own areas' units, secondary control and load, and nothing else") {
  const LoadResult loaded = load_scenario_file(std::string(DROOPLINE_SOURCE_DIR) + "/scenarios/demo_three_areas.json");
  REQUIRE(loaded.system);
  const SeatScope west{"west", {"vellmark"}};
  auto cmd = [](CommandKind kind, std::string area, std::string unit) {
    Command c;
    c.kind = kind;
    c.area = std::move(area);
    c.unit = std::move(unit);
    return c;
  };
  // Its own: a setpoint, a start and a stop of a vellmark unit, its secondary control, schedule and load.
  CHECK(outside_scope(*loaded.system,
                      {cmd(CommandKind::setpoint, "", "V1"), cmd(CommandKind::unit_start, "", "V2"),
                       cmd(CommandKind::unit_stop, "", "V3"), cmd(CommandKind::agc, "vellmark", ""),
                       cmd(CommandKind::schedule, "vellmark", ""), cmd(CommandKind::shed, "vellmark", ""),
                       cmd(CommandKind::restore, "vellmark", "")},
                      west)
            .empty());
  // Another area's unit and secondary control: named by path, with the area in words.
  const auto other = outside_scope(
      *loaded.system, {cmd(CommandKind::setpoint, "", "O1"), cmd(CommandKind::agc, "oskany", "")}, west);
  REQUIRE(other.size() == 2);
  CHECK(other[0].path == "commands[0].unit");
  CHECK(other[0].message.find("unit \"O1\" is in area \"oskany\", which seat \"west\" does not answer for") !=
        std::string::npos);
  CHECK(other[1].path == "commands[1].area");
  // The instructor's kinds, even in its own area.
  const auto theirs = outside_scope(*loaded.system,
                                    {cmd(CommandKind::unit_trip, "", "V1"), cmd(CommandKind::load_step, "vellmark", ""),
                                     cmd(CommandKind::governor, "", "V1"), cmd(CommandKind::fluctuation, "vellmark", "")},
                                    west);
  REQUIRE(theirs.size() == 4);
  CHECK(theirs[0].message.find("may not send unit_trip") != std::string::npos);
  // An unknown unit is left to resolve_all, which names it.
  CHECK(outside_scope(*loaded.system, {cmd(CommandKind::setpoint, "", "nowhere")}, west).empty());
}

TEST_CASE("every applied command carries its author in the reply and the event log and the stream and the journal") {
  const std::string journal = fresh_journal("authors");
  Inbox inbox;
  LiveConfig cfg;
  cfg.speed = 10.0;
  cfg.journal_path = journal;
  LiveSession s(demo(), cfg, [&](const Outgoing& o) { inbox.put(o); });
  Command step = load_step(20);
  const LiveSession::Result by_seat = call([&](auto done) { s.apply({step}, "seat-west", std::nullopt, done); });
  REQUIRE(by_seat.status == 200);
  CHECK(by_seat.data["by"] == "seat-west");
  step.mw = -20;
  const LiveSession::Result by_instructor = call([&](auto done) { s.apply({step}, "instructor", std::nullopt, done); });
  REQUIRE(by_instructor.status == 200);
  CHECK(by_instructor.data["by"] == "instructor");
  // The stream and the log: each command's notice names its author.
  auto streamed = inbox.wait_for(
      [](const json& j) { return j.value("kind", "") == "command" && j.value("by", "") == "seat-west"; });
  CHECK(streamed);
  std::vector<std::string> authors;
  const json log = json::parse(s.events(0))["events"];
  for (const json& e : log)
    if (e.value("kind", "") == "command") authors.push_back(e.value("by", "(none)"));
  CHECK(authors == std::vector<std::string>{"seat-west", "instructor"});
  s.stop();
  // The journal: each commands record has "by", and it reads back.
  std::ifstream in(journal);
  std::vector<std::string> journalled;
  for (std::string line; std::getline(in, line);)
    if (json j = json::parse(line); j["type"] == "commands") journalled.push_back(j["by"]);
  CHECK(journalled == std::vector<std::string>{"seat-west", "instructor"});
  const JournalRead back = read_journal(journal);
  REQUIRE(back.issues.empty());
  REQUIRE(back.runs.size() == 1);
  REQUIRE(back.runs[0].commands.size() == 2);
  CHECK(back.runs[0].commands[0].by == "seat-west");
  CHECK(back.runs[0].commands[1].by == "instructor");
  std::filesystem::remove(journal);
}

TEST_CASE("a journal from before authors reads back with the instructor as the author and a bad author is refused") {
  const auto path = test::scratch_path("old-journal");
  const json scenario = json::parse(scenario_to_json(demo().def()).dump());
  auto write = [&](const std::string& commands_line) {
    std::ofstream out(path, std::ios::trunc);
    out << json{{"type", "scenario"}, {"step", 0}, {"scenario", scenario}}.dump() << '\n' << commands_line << '\n';
  };
  write(R"({"type":"commands","step":5,"commands":[{"kind":"load_step","area":"oskany","mw":10}]})");
  JournalRead old = read_journal(path.string());
  REQUIRE(old.issues.empty());
  REQUIRE(old.runs.at(0).commands.size() == 1);
  CHECK(old.runs[0].commands[0].by == "instructor");
  CHECK(old.runs[0].commands[0].step == 5);
  write(R"({"type":"commands","step":5,"commands":[{"kind":"load_step","area":"oskany","mw":10}],"by":7})");
  JournalRead bad = read_journal(path.string());
  REQUIRE(bad.issues.size() == 1);
  CHECK(bad.issues[0].text() == "journal line 2: by: must be a non-empty string of at most 64 characters");
  // Save point, restore and rewind records are checked too.
  write(R"({"type":"rewind","step":50,"taken":0,"to_step":60,"by":"instructor"})");
  CHECK(read_journal(path.string()).issues.at(0).text() ==
        "journal line 2: to_step: a rewind must not lie after the record's step");
  // A restore may go to a save point later than now (taken on a course since rewound past).
  write(R"({"type":"restore","step":50,"taken":0,"savepoint":1,"to_step":60})");
  CHECK(read_journal(path.string()).issues.empty());
  write(R"({"type":"restore","step":50,"taken":0,"to_step":10})");
  CHECK(read_journal(path.string()).issues.at(0).text() == "journal line 2: savepoint: must be a whole number from 0 to 2^53");
  write(R"({"type":"savepoint","step":50,"taken":0,"id":1,"name":"a"})");
  const JournalRead marked = read_journal(path.string());
  REQUIRE(marked.issues.empty());
  REQUIRE(marked.runs.at(0).marks.size() == 1);
  CHECK(marked.runs[0].marks[0].name == "a");
  CHECK(marked.runs[0].marks[0].line == 2);
  std::filesystem::remove(path);
}

namespace {

// The session's rows within [from_s, to_s] as JSON (exact numbers: compared as text, bit for bit).
json rows_between(const LiveSession& s, double from_s, double to_s) {
  std::string error;
  return json::parse(s.history(from_s, to_s, 0, false, error).value())["rows"];
}

// Runs the session until its time has passed `t_s`, then pauses it; the time it paused at.
double run_past(LiveSession& s, double t_s) {
  REQUIRE(call([&](auto done) { s.resume(done); }).status == 200);
  while (on_loop<double>(s, [](Engine& e) { return e.time_s(); }) <= t_s)
    std::this_thread::sleep_for(std::chrono::milliseconds(20));
  const LiveSession::Result paused = call([&](auto done) { s.pause(done); });
  REQUIRE(paused.status == 200);
  return paused.data["t_s"].get<double>();
}

}  // namespace

TEST_CASE("a live restore followed by the same commands gives the first branch bit for bit and a rewind goes back") {
  Inbox inbox;
  LiveConfig cfg;
  cfg.speed = 20.0;
  LiveSession s(demo(), cfg, [&](const Outgoing& o) { inbox.put(o); });
  const double t0 = run_past(s, 3.0);
  const LiveSession::Result saved = call([&](auto done) { s.save("before the step", "instructor", done); });
  REQUIRE(saved.status == 200);
  CHECK(saved.data["t_s"].get<double>() == t0);
  CHECK(saved.data["name"] == "before the step");
  const std::uint64_t id = saved.data["id"];
  // Paused: the command applies at the step it was sent at, on each branch alike.
  REQUIRE(call([&](auto done) { s.apply({load_step(40)}, "instructor", std::nullopt, done); }).status == 200);
  const double t1 = run_past(s, t0 + 6.0);
  const json first = rows_between(s, t0, t1);
  REQUIRE(first.size() > 50);

  // Another branch, then back: the rows after the save point are gone, the log keeps the branch.
  REQUIRE(call([&](auto done) { s.apply({load_step(-70)}, "instructor", std::nullopt, done); }).status == 200);
  run_past(s, t1 + 1.0);
  const LiveSession::Result restored = call([&](auto done) { s.restore(id, "instructor", done); });
  REQUIRE(restored.status == 200);
  CHECK(restored.data["t_s"].get<double>() == t0);
  CHECK(restored.data["savepoint"]["name"] == "before the step");
  CHECK(rows_between(s, t0 + 1e-6, 1e9).empty());
  auto event = inbox.wait_for([](const json& j) { return j["type"] == "restored"; });
  REQUIRE(event);
  CHECK((*event)["by"] == "instructor");
  CHECK((*event)["t_s"].get<double>() == t0);
  REQUIRE(call([&](auto done) { s.apply({load_step(40)}, "instructor", std::nullopt, done); }).status == 200);
  run_past(s, t1);
  CHECK(rows_between(s, t0, t1) == first);

  // A rewind to between the two: the state the lineage had there, and on from it the same rows.
  const double to = t0 + 2.5;
  const LiveSession::Result back = call([&](auto done) { s.rewind(to, "instructor", done); });
  REQUIRE(back.status == 200);
  CHECK(back.data["savepoint"].is_null());
  CHECK(rows_between(s, to + 1e-6, 1e9).empty());
  run_past(s, t1);
  CHECK(rows_between(s, t0, t1) == first);

  // Out of reach: ahead of now, before the start.
  const double now = on_loop<double>(s, [](Engine& e) { return e.time_s(); });
  const LiveSession::Result ahead = call([&](auto done) { s.rewind(now + 1.0, "instructor", done); });
  CHECK(ahead.status == 400);
  CHECK(ahead.error.find("to_s: must lie within the last 600 s of this lineage and not ahead of now") == 0);
  CHECK(call([&](auto done) { s.rewind(-1.0, "instructor", done); }).status == 400);
  CHECK(call([&](auto done) { s.restore(id + 7, "instructor", done); }).status == 404);
  const LiveSession::Result list = call([&](auto done) { s.save_points(done); });
  REQUIRE(list.status == 200);
  REQUIRE(list.data["savepoints"].size() == 1);
  CHECK(list.data["savepoints"][0]["id"] == id);
  CHECK(list.data["rewind_from_s"].get<double>() == 0.0);
  s.stop();
}

TEST_CASE("a restore refuses the commands still waiting and journals what replay needs") {
  const std::string journal = fresh_journal("restore");
  LiveConfig cfg;
  cfg.speed = 1.0;
  cfg.journal_path = journal;
  cfg.journal_lead_s = 30.0;  // a command waits 30 s for its step: the restore comes first
  LiveSession s(demo(), cfg, [](const Outgoing&) {});
  const LiveSession::Result saved = call([&](auto done) { s.save(std::string(200, 'x'), "instructor", done); });
  REQUIRE(saved.status == 200);
  CHECK(saved.data["name"].get<std::string>().size() == LiveSession::kMaxNameBytes);
  std::promise<LiveSession::Result> waiting;
  s.apply({load_step(10)}, "seat-east", std::nullopt, [&](LiveSession::Result r) { waiting.set_value(std::move(r)); });
  const LiveSession::Result restored = call([&](auto done) { s.restore(saved.data["id"], "instructor", done); });
  REQUIRE(restored.status == 200);
  CHECK(restored.data["refused_commands"] == 1);
  const LiveSession::Result refused = waiting.get_future().get();
  CHECK(refused.status == 409);
  CHECK(refused.error.find("the instructor went back to t = ") != std::string::npos);
  s.stop();
  std::ifstream in(journal);
  std::vector<std::string> types;
  for (std::string line; std::getline(in, line);) {
    const json j = json::parse(line);
    types.push_back(j["type"]);
    if (j["type"] == "restore") {
      CHECK(j["taken"] == 0);
      CHECK(j["savepoint"].get<std::uint64_t>() == saved.data["id"].get<std::uint64_t>());
      CHECK(j["to_step"].get<std::int64_t>() == saved.data["step"].get<std::int64_t>());
      CHECK(j["by"] == "instructor");
    }
  }
  // The service stopping cuts the run short: its end record comes before the stop record.
  CHECK(types == std::vector<std::string>{"scenario", "savepoint", "commands", "restore", "end", "stop"});
  std::filesystem::remove(journal);
}

TEST_CASE("study jobs: cancelled and failed jobs are forgotten before results, so cancellations cannot push results out") {
  droopline::server::StudyJobs jobs(1, 4);
  auto run = [&](const std::string& status) {
    std::string error;
    auto job = jobs.submit("fit", nlohmann::ordered_json::object(),
                           [status](droopline::server::StudyJobs::Job& j) { j.status = status; }, error);
    REQUIRE(job);
    while (!job->finished.load()) std::this_thread::yield();
    return job->id;
  };
  const std::string kept = run("done");
  for (int i = 0; i < 10; ++i) run(i % 2 ? "cancelled" : "failed");
  CHECK(jobs.find("fit", kept));  // the one result is still there after ten junk jobs
  for (int i = 0; i < 4; ++i) run("done");
  CHECK_FALSE(jobs.find("fit", kept));  // newer results do push it out, oldest first
}

TEST_CASE("the loop wakes once per frame by default, at every step when asked, and keeps the same simulated pace") {
  // Counted from the session's own counters: a wake is one entry of the lateness histogram.
  struct Seen {
    std::uint64_t steps, frames, wakes;
    double wall_s;  ///< from before the session started to after the counters were read
  };
  auto watch = [](bool per_frame) {
    LiveConfig cfg;
    cfg.wake_per_frame = per_frame;
    const CheckedSystem system = demo();
    const auto start = std::chrono::steady_clock::now();
    LiveSession s(system, cfg, [](const Outgoing&) {});
    std::this_thread::sleep_for(std::chrono::milliseconds(1500));
    Seen seen{s.counters().steps.load(), s.counters().frames.load(), 0, 0.0};
    seen.wall_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
    for (const auto& c : s.counters().lag_counts) seen.wakes += c.load();
    s.stop();
    return seen;
  };
  const Seen frame = watch(true);
  const Seen step = watch(false);
  INFO("once per frame: " << frame.steps << " steps, " << frame.frames << " frames, " << frame.wakes << " wakes in "
                           << frame.wall_s << " s");
  INFO("every step: " << step.steps << " steps, " << step.frames << " frames, " << step.wakes << " wakes in "
                      << step.wall_s << " s");
  // Some 1.5 s (the sleep may overrun on a busy machine) at speed 1 and a 0.01 s step: some 150
  // steps and 30 frames either way, never ahead of the wall clock.
  for (const Seen& s : {frame, step}) {
    CHECK(s.steps >= 120);
    CHECK(static_cast<double>(s.steps) <= s.wall_s * 100 + 1);
    CHECK(s.frames >= 24);
    CHECK(static_cast<double>(s.frames) <= s.wall_s * 20 + 2);
  }
  CHECK(frame.wakes <= frame.frames + 1);  // the steps due run in one go before each frame
  CHECK(frame.steps >= 4 * frame.wakes);   // 5 steps a frame at 20 frames/s
  CHECK(step.wakes >= 3 * step.frames);    // about one wake per step
}

TEST_CASE("a command sent between frames is scheduled by the wall clock, not the last step run") {
  LiveConfig cfg;
  cfg.frame_hz = 1.0;  // one wake a second: the engine runs up to 100 steps behind the wall clock
  LiveSession s(demo(), cfg, [](const Outgoing&) {});
  std::this_thread::sleep_for(std::chrono::milliseconds(1500));  // half-way between two frames
  const auto before = on_loop<std::int64_t>(s, [](Engine& e) { return e.step_index(); });
  const auto sent = std::chrono::steady_clock::now();
  const LiveSession::Result r = call([&](auto done) { s.apply({load_step(10)}, "instructor", std::nullopt, done); });
  const double waited_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - sent).count();
  REQUIRE(r.status == 200);
  // Applied at its step's time (the journal lead, 20 ms), not at the next frame (some 500 ms on).
  CHECK(waited_s < 0.25);
  const auto& body = r.data;
  INFO(body.dump() << " (engine at step " << before << " when it was sent)");
  // Sent some 50 steps after the last wake (at 1 s, step 100): scheduled at about step 150 + the
  // journal lead (2 steps), not at the step the engine stood at when it arrived.
  const double applied_t = body["t_s"].get<double>();
  CHECK(before <= 110);
  CHECK(applied_t >= 1.4);
  CHECK(applied_t <= 1.8);
  s.stop();
}

TEST_CASE("a frame, written as text, holds every area, unit and tie as JSON reads it back, exactly") {
  const std::unique_ptr<Engine> engine = test::make(demo().def());
  Engine& e = *engine;
  for (int i = 0; i < 150; ++i) e.step();
  const Resolved step = resolve_all(e.system(), std::vector<Command>{load_step(40)});
  REQUIRE(step.issues.empty());
  REQUIRE(e.apply_all(step.actions).ok);
  for (int i = 0; i < 80; ++i) e.step();
  const json f = json::parse(frame_json(e, 12.5, false, 2.0));
  CHECK(f["type"] == "frame");
  CHECK(f["t_s"].get<double>() == e.time_s());
  CHECK(f["wall_s"].get<double>() == 12.5);
  CHECK(f["step"].get<std::int64_t>() == e.step_index());
  CHECK(f["paused"] == false);
  CHECK(f["speed"].get<double>() == 2.0);
  const SystemDef& d = e.def();
  REQUIRE(f["areas"].size() == d.areas.size());
  for (std::size_t a = 0; a < d.areas.size(); ++a) {
    const AreaState s = e.area(AreaId{static_cast<std::uint32_t>(a)});
    const json& j = f["areas"][d.areas[a].id];
    CHECK(j["f_hz"].get<double>() == s.f_hz);
    CHECK(j["rocof_hz_per_s"].get<double>() == s.rocof_hz_per_s);
    CHECK(j["generation_mw"].get<double>() == s.generation_mw);
    CHECK(j["export_mw"].get<double>() == s.export_mw);
    CHECK(j["ace_mw"].get<double>() == s.ace_mw);
    CHECK(j["agc_enabled"] == s.agc_enabled);
    CHECK(j["agc_mode"] == to_string(s.agc_mode));
    CHECK(j["island"] == s.island);
    CHECK(j.size() == 13);
  }
  REQUIRE(f["units"].size() == d.units.size());
  int batteries = 0;
  for (std::size_t u = 0; u < d.units.size(); ++u) {
    const UnitState s = e.unit(UnitId{static_cast<std::uint32_t>(u)});
    const json& j = f["units"][d.units[u].id];
    CHECK(j["p_mw"].get<double>() == s.p_mw);
    CHECK(j["headroom_down_mw"].get<double>() == s.headroom_down_mw);
    CHECK(j["droop"].get<double>() == s.droop);
    CHECK(j["mode"] == to_string(s.mode));
    CHECK(j["status"] == to_string(s.status));
    const bool battery = d.units[u].turbine.type == TurbineType::battery;
    batteries += battery;
    CHECK(j.contains("energy_mwh") == battery);
    if (battery) CHECK(j["energy_mwh"].get<double>() == s.energy_mwh);
  }
  CHECK(batteries > 0);
  REQUIRE(f["ties"].size() == d.ties.size());
  for (std::size_t t = 0; t < d.ties.size(); ++t) {
    const TieState s = e.tie(TieId{static_cast<std::uint32_t>(t)});
    const json& j = f["ties"][d.ties[t].id];
    CHECK(j["flow_mw"].get<double>() == s.flow_mw);
    CHECK(j["angle_deg"].get<double>() == s.angle_deg);
    CHECK(j["in_service"] == s.in_service);
  }
}

TEST_CASE("text written as a JSON string reads back the same, as nlohmann's own writer escapes it") {
  for (const std::string& text : {std::string("plain"), std::string("quote \" and back\\slash"),
                                 std::string("tab\tnew\nline \x01 \x1f end"), std::string("\xc3\xa9t\xc3\xa9"),
                                 std::string("")}) {
    std::string out;
    append_json_string(out, text);
    INFO(out);
    CHECK(json::parse(out).get<std::string>() == text);
    if (text.find_first_of("\t\n") == std::string::npos) CHECK(out == json(text).dump());
  }
}

TEST_CASE("a journal whose last record a crash cut short is cut back to whole lines before it goes on") {
  const std::string path = test::scratch_path("torn-journal.jsonl").string();
  const std::string whole = R"({"type":"stop","step":7})";
  auto contents = [&] {
    std::ifstream in(path, std::ios::binary);
    return std::string(std::istreambuf_iterator<char>(in), {});
  };
  auto write = [&](const std::string& bytes) { std::ofstream(path, std::ios::binary | std::ios::trunc) << bytes; };
  // Torn after whole lines: the part is cut off, and said so.
  write(whole + "\n" + R"({"type":"commands","step":9,"comm)");
  {
    Journal j(path);
    CHECK(j.ok());
    CHECK(j.repaired().find("its last record was cut short (33 bytes") != std::string::npos);
    CHECK(contents() == whole + "\n");
    REQUIRE(j.append(whole));
  }
  CHECK(contents() == whole + "\n" + whole + "\n");
  // Whole lines only, or an empty file: nothing to repair.
  CHECK(Journal(path).repaired().empty());
  CHECK(contents() == whole + "\n" + whole + "\n");
  write("");
  CHECK(Journal(path).repaired().empty());
  // A first record torn (no whole line at all), longer than one read: all of it goes.
  write(std::string(10000, 'x'));
  CHECK_FALSE(Journal(path).repaired().empty());
  CHECK(contents().empty());
  // A whole last line that is no record: refused before anything is appended after it.
  write(whole + "\ngarbage\n");
  {
    Journal j(path);
    CHECK_FALSE(j.ok());
    CHECK(j.error().find("its last line is not a journal record") != std::string::npos);
  }
  write(whole + "\n[1, 2]\n");
  CHECK_FALSE(Journal(path).ok());
  CHECK(contents() == whole + "\n[1, 2]\n");  // left as it was
  write(whole + "\n");
  CHECK(Journal(path).ok());
}
