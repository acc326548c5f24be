#include "cli_run.hpp"

#include <unistd.h>

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <tuple>
#include <iostream>

#include <nlohmann/json.hpp>

#include "droopline/batch.hpp"
#include "droopline/exercise.hpp"
#include "droopline/format.hpp"
#include "droopline/journal_read.hpp"
#include "droopline/scenario_io.hpp"
#include "droopline/task_pool.hpp"
#include "droopline/timeline.hpp"
#include "cli_files.hpp"

namespace droopline::cli {
namespace {

namespace fs = std::filesystem;

// Errors always; warnings unless `quiet` (they are in summary.json too).
void print_issues(const std::vector<Issue>& issues, const std::string& file, bool quiet = false) {
  for (const Issue& i : issues)
    if (!quiet || !i.warning) std::cerr << file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
}


// Issues on one line, as a warning prints them.
std::string joined_texts(const std::vector<Issue>& issues) {
  std::string out;
  for (const Issue& i : issues) out += (out.empty() ? "" : "; ") + i.text();
  return out;
}

std::string opt_text(const std::optional<double>& v, int decimals, const char* unit) {
  return v ? fmt_fixed(*v, decimals) + unit : std::string("-");
}

}  // namespace

int check(const std::string& file) {
  std::vector<Issue> unread;
  const std::optional<std::string> text = read_text_file(file, unread);
  if (!text) {
    print_issues(unread, file);
    return 2;
  }
  if (study::looks_like_exercise(*text)) {
    study::ExerciseLoad x = study::load_exercise_file(file);
    print_issues(x.issues, file);
    if (!x.exercise) return 2;
    const study::ExerciseDef& e = x.exercise->def;
    std::cout << file << ": ok: exercise \"" << e.name << "\": " << e.seats.size() << " seat(s), "
              << e.script.size() << " script event(s), " << fmt_num(e.time_limit_s) << " s; scenario \""
              << x.exercise->system.def().name << "\"\n";
    return 0;
  }
  LoadResult r = parse_scenario(*text);
  print_issues(r.issues, file);
  if (!r.system) return 2;
  const SystemDef& d = r.system->def();
  std::cout << file << ": ok: \"" << d.name << "\": " << d.areas.size() << " area(s), "
            << d.units.size() << " unit(s), " << d.ties.size() << " tie(s), " << d.events.size()
            << " event(s), " << fmt_num(d.duration_s) << " s at a " << fmt_num(d.step_s)
            << " s step\n";
  return 0;
}

int run(const std::string& file, const std::string& out_dir, bool quiet, unsigned threads) {
  const auto t_start = std::chrono::steady_clock::now();
  auto lap = [&, last = t_start](const char* what) mutable {
    if (!std::getenv("DROOPLINE_TIMINGS")) return;
    const auto now = std::chrono::steady_clock::now();
    std::fprintf(stderr, "droopline: %-8s %.4f s\n", what, std::chrono::duration<double>(now - last).count());
    last = now;
  };
  LoadResult r = load_scenario_file(file);
  lap("load");
  print_issues(r.issues, file, quiet);
  if (!r.system) return 2;
  const SystemDef& def = r.system->def();
  std::vector<Issue> warnings;
  for (const Issue& i : r.issues)
    if (i.warning) warnings.push_back(i);

  std::error_code ec;
  fs::create_directories(out_dir, ec);
  if (ec) {
    std::cerr << "droopline: cannot create output folder \"" << out_dir << "\": " << ec.message() << "\n";
    return 1;
  }
  const std::unique_ptr<Engine> created = Engine::create(*r.system);
  lap("create");
  Engine& engine = *created;
  TaskPool pool(def.units.size() >= 4096 ? (threads ? threads : std::max(1u, std::thread::hardware_concurrency())) : 1);
  engine.set_task_runner(&pool);
  AtomicFile series(fs::path(out_dir) / "series.csv");
  AtomicFile summary(fs::path(out_dir) / "summary.json");
  if (!series.ok() || !summary.ok()) {
    std::cerr << "droopline: cannot write in \"" << out_dir << "\"\n";
    return 1;
  }
  SeriesCsv csv;
  std::string buf = SeriesCsv::header(engine);
  std::vector<Notice> notices;
  Progress progress(!quiet && ::isatty(STDERR_FILENO) && def.duration_s / def.step_s > 2e5);
  study::BatchObservers obs;
  obs.row = [&](const Engine& e) {
    csv.append_row(e, buf);
    if (buf.size() > (1u << 20)) {  // stream long runs to disk in 1 MiB pieces
      series.stream().write(buf.data(), static_cast<std::streamsize>(buf.size()));
      buf.clear();
    }
  };
  obs.stop = [&] { return !series.stream(); };  // a failed write ends the run: the files are not kept
  obs.notice = [&](const Notice& n) { notices.push_back(n); };
  obs.after_step = [&](const Engine& e) {
    if ((e.step_index() & 1023) == 0) progress.update(e.time_s(), def.duration_s);
  };
  study::BatchOptions until_written;
  until_written.close_disturbances = false;  // after the last rows are written, as before
  run_batch(engine, until_written, obs);
  lap("simulate");
  series.stream().write(buf.data(), static_cast<std::streamsize>(buf.size()));
  engine.close_disturbances();
  summary.stream() << to_text(summary_to_json(engine, notices, warnings));
  if (!series.stream() || !summary.stream() || !series.commit() || !summary.commit()) {
    std::cerr << "droopline: writing the results in \"" << out_dir << "\" failed (disk full?)\n";
    return 1;
  }
  lap("write");
  if (!quiet) {
    std::cout << "droopline: \"" << def.name << "\": " << fmt_num(engine.time_s()) << " s simulated; wrote "
              << (fs::path(out_dir) / "series.csv").string() << " and "
              << (fs::path(out_dir) / "summary.json").string() << "\n";
    for (const Notice& n : notices)
      if (n.kind != NoticeKind::command) std::cout << "  t=" << fmt_fixed(n.t_s, 2) << " s  " << describe(def, n) << "\n";
    for (const Disturbance& d : engine.disturbances()) {
      std::cout << "  disturbance at t=" << fmt_fixed(d.at_s, 2) << " s: " << describe_cause(def, d) << "\n"
                << "    imbalance " << fmt_fixed(d.delta_mw, 1) << " MW, RoCoF "
                << opt_text(d.rocof_hz_per_s, 3, " Hz/s") << ", " << (d.zenith ? "zenith " : "nadir ")
                << opt_text(d.nadir_hz, 3, " Hz")
                << (d.nadir_at_s ? " at +" + fmt_fixed(*d.nadir_at_s - d.at_s, 2) + " s" : "")
                << ", settling " << opt_text(d.settling_hz, 3, " Hz") << " (droop formula "
                << fmt_fixed(d.predicted_settling_hz, 3) << " Hz), response "
                << opt_text(d.response_mw_per_0p1hz, 1, " MW/0.1 Hz") << "\n";
    }
  }
  return 0;
}

int replay(const std::string& journal, const std::string& out_dir, int run_number, bool quiet, bool final_lineage) {
  JournalRead jr = read_journal(journal);
  print_issues(jr.issues, journal);
  if (!jr.issues.empty()) return 2;
  if (jr.runs.empty()) {
    std::cerr << journal << ": error: the journal holds no scenario\n";
    return 2;
  }
  const int count = static_cast<int>(jr.runs.size());
  const int pick = run_number == 0 ? count : run_number;
  if (pick < 1 || pick > count) {
    std::cerr << journal << ": error: --run " << run_number << ": the journal holds runs 1 to " << count << "\n";
    return 2;
  }
  const JournalRun& run = jr.runs[static_cast<std::size_t>(pick - 1)];
  std::unique_ptr<Engine> engine = Engine::create(run.system);
  std::error_code ec;
  fs::create_directories(out_dir, ec);
  AtomicFile series(fs::path(out_dir) / "series.csv");
  AtomicFile summary(fs::path(out_dir) / "summary.json");
  AtomicFile applied(fs::path(out_dir) / "commands.jsonl");
  if (ec || !series.ok() || !summary.ok() || !applied.ok()) {
    std::cerr << "droopline: cannot write in \"" << out_dir << "\"\n";
    return 1;
  }
  SeriesCsv csv;
  std::string buf = SeriesCsv::header(*engine);
  std::vector<Notice> notices;
  // final_lineage: where each row ends in `buf`, to drop the rows a restore or rewind undid.
  std::vector<std::pair<std::int64_t, std::size_t>> row_ends{{-1, buf.size()}};
  auto row = [&] {
    csv.append_row(*engine, buf);
    if (final_lineage) row_ends.emplace_back(engine->step_index(), buf.size());
  };
  // Save points, restores and rewinds go through the live session's own Timeline.
  study::Timeline timeline;
  auto saved_now = [&] { return study::SavedState{engine->clone(), {0, 0, 0, notices.size()}, {}, {}}; };
  if (!run.marks.empty()) timeline.start(saved_now());
  const std::int64_t every = study::output_every(run.system.def());
  std::size_t next = 0, m = 0;
  std::uint64_t taken = 0;  // batches taken at their step, as the live pipeline counted them
  auto apply_batch = [&](const JournalBatch& b) {
    // Resolved (ids, static checks) and applied (state checks) as the live pipeline did.
    Resolved resolved = resolve_all(engine->system(), b.commands);
    const ApplyResult r = resolved.issues.empty() ? engine->apply_all(resolved.actions) : ApplyResult{};
    if (!r.ok) {
      std::cerr << journal << ": warning: commands at step " << b.step
                << " refused on replay: " << joined_texts(resolved.issues.empty() ? r.issues : resolved.issues) << "\n";
      return;
    }
    if (!run.marks.empty()) timeline.applied(engine->step_index(), std::move(resolved.actions));
    nlohmann::ordered_json cmds = nlohmann::ordered_json::array();
    for (const Command& c : b.commands) cmds.push_back(command_to_json(c));
    applied.stream()
        << nlohmann::ordered_json{{"step", b.step}, {"t_s", r.at_s}, {"commands", cmds}, {"by", b.by}}.dump() << '\n';
  };
  // A restore or rewind: go on from `st`; the batches journalled before it and not taken were
  // refused by it.
  // final_lineage: the rows of each save point's own lineage, as they stood when it was taken (a
  // restore may lead onto a course since rewound past, whose rows `buf` no longer holds).
  std::map<std::uint64_t, std::pair<std::string, decltype(row_ends)>> saved_rows;
  auto go_back = [&](study::SavedState st, const JournalMark& mark) {
    engine = std::move(st.engine);
    notices.resize(st.counters.notices);
    next = mark.batches_before;
    while (final_lineage && row_ends.back().first > mark.to_step) row_ends.pop_back();
    if (final_lineage) buf.resize(row_ends.back().second);
  };
  auto take_mark = [&](const JournalMark& mark) -> std::string {
    using Kind = JournalMark::Kind;
    if (mark.kind == Kind::savepoint) {
      if (!timeline.can_save() || timeline.next_id() != mark.id)
        return "save point id " + std::to_string(mark.id) + " out of order";
      timeline.save(mark.name, saved_now());
      if (final_lineage) saved_rows[mark.id] = {buf, row_ends};
      return "";
    }
    if (mark.kind == Kind::restore) {
      std::optional<study::SavedState> st = timeline.restore(mark.id);
      if (!st) return "no save point " + std::to_string(mark.id) + " before it";
      if (st->step() != mark.to_step)
        return "save point " + std::to_string(mark.id) + " is not at step " + std::to_string(mark.to_step);
      if (final_lineage) std::tie(buf, row_ends) = saved_rows.at(mark.id);
      go_back(std::move(*st), mark);
      return "";
    }
    if (mark.to_step < timeline.earliest_step(engine->step_index()))
      return "a rewind further back than the live session reaches";
    study::Resimulation hooks;  // the notices of the lineage on the way, for the summary
    hooks.begin = [&](study::SavedState& st) { notices.resize(st.counters.notices); };
    auto keep_notices = [&](study::SavedState& st) {
      for (Notice& n : st.engine->take_notices()) notices.push_back(std::move(n));
      st.counters.notices = notices.size();
    };
    hooks.applied = [&](study::SavedState& st, const study::LoggedActions&) { keep_notices(st); };
    hooks.stepped = keep_notices;
    go_back(timeline.rewind(mark.to_step, hooks), mark);
    return "";
  };
  row();
  for (;;) {
    // What the journal says happened at this step, in its order: a mark comes when as many
    // batches were taken as it says, the batches before it first.
    for (;;) {
      if (m < run.marks.size() && run.marks[m].step == engine->step_index() && taken == run.marks[m].taken) {
        if (const std::string bad = take_mark(run.marks[m]); !bad.empty()) {
          std::cerr << journal << ": error: journal line " << run.marks[m].line << ": " << bad << "\n";
          return 2;
        }
        ++m;
      } else if (next < run.commands.size() && run.commands[next].step <= engine->step_index() &&
                 (m == run.marks.size() || taken < run.marks[m].taken)) {
        apply_batch(run.commands[next++]);
        ++taken;
      } else {
        break;
      }
    }
    if (m < run.marks.size() && engine->step_index() >= run.marks[m].step) {  // nothing more can happen here
      std::cerr << journal << ": error: journal line " << run.marks[m].line << ": never reached on replay (step "
                << run.marks[m].step << " after " << run.marks[m].taken << " command batch(es))\n";
      return 2;
    }
    if (m == run.marks.size() && engine->step_index() >= run.last_step) break;
    engine->step();
    if (engine->step_index() % every == 0) row();
    for (Notice& n : engine->take_notices()) notices.push_back(std::move(n));
    if (!run.marks.empty() && timeline.due(engine->step_index())) timeline.checkpoint(saved_now());
  }
  auto n = engine->take_notices();
  notices.insert(notices.end(), n.begin(), n.end());
  engine->close_disturbances();
  series.stream().write(buf.data(), static_cast<std::streamsize>(buf.size()));
  summary.stream() << to_text(summary_to_json(*engine, notices, {}));
  if (!series.commit() || !summary.commit() || !applied.commit()) {
    std::cerr << "droopline: writing the results in \"" << out_dir << "\" failed\n";
    return 1;
  }
  if (!quiet)
    std::cout << "droopline: replayed run " << pick << " of " << count << " (\"" << run.system.def().name << "\", "
              << run.commands.size() << " command batch(es), " << run.marks.size()
              << " save point(s), restore(s) and rewind(s), " << fmt_num(engine->time_s()) << " s) into " << out_dir
              << "\n";
  return 0;
}

}  // namespace droopline::cli
