// droopline: command-line entry point. Each subcommand is a CLI11 App set up by one function
// below; CLI11 parses, checks (ranges, required options, files that must exist), prints help and
// reports errors, then the subcommand's action calls the droopline::cli or server function.
#include <algorithm>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <functional>
#include <iostream>
#include <memory>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <CLI/CLI.hpp>
#include <spdlog/spdlog.h>

#include "cli_debrief.hpp"
#include "cli_run.hpp"
#include "cli_modes.hpp"
#include "cli_validation.hpp"
#include "cli_sweep.hpp"
#include "droopline/kernel_choice.hpp"
#include "droopline/playback.hpp"
#include "serve.hpp"

namespace {

/// A subcommand and what it does once the whole command line parsed and checked.
struct Command {
  CLI::App* app;
  std::function<int()> action;
};

// --- Checks shared by the subcommands (all CLI11 validators) ---

/// Whole numbers in decimal only: refuses signs, spaces, hex; strips leading zeros so that
/// CLI11's conversion (strtoull base 0) does not read "010" as octal.
const CLI::Validator kDecimal(
    [](std::string& v) {
      if (v.empty() || v.find_first_not_of("0123456789") != std::string::npos) return "not a whole number: " + v;
      v.erase(0, std::min(v.find_first_not_of('0'), v.size() - 1));
      return std::string{};
    },
    "");

/// CLI::Range lets NaN through (both comparisons are false); this refuses it.
const CLI::Validator kNotNan(
    [](std::string& v) {
      double x = 0;
      return CLI::detail::lexical_cast(v, x) && x == x ? std::string{} : "not a number: " + v;
    },
    "");

/// Files and folders that must exist (their check named by the option's type, not again).
const CLI::Validator kFileExists = CLI::Validator(CLI::ExistingFile).description("");
const CLI::Validator kDirExists = CLI::Validator(CLI::ExistingDirectory).description("");

/// A whole-number option in [lo, hi], decimal.
template <typename T, typename N>
CLI::Option* add_count(CLI::App& app, const std::string& name, T& value, N lo, N hi, const std::string& help) {
  return app.add_option(name, value, help)->type_name("N")->transform(kDecimal)->check(CLI::Range(lo, hi));
}

/// A decimal whole number in [lo, hi], checked as add_count checks one; an empty message when valid.
template <typename N>
std::string read_count(std::string digits, N lo, N hi, N& out) {
  for (const std::string& error : {kDecimal(digits), CLI::Range(lo, hi)(digits)})
    if (!error.empty()) return error;
  CLI::detail::lexical_cast(digits, out);
  return {};
}

/// A real-valued option in [lo, hi].
CLI::Option* add_real(CLI::App& app, const std::string& name, double& value, double lo, double hi, const std::string& unit,
                      const std::string& help) {
  return app.add_option(name, value, help)->type_name(unit)->check(kNotNan)->check(CLI::Range(lo, hi));
}

/// `--shard I/N`: this run's slice I of N (1 <= I <= N); the values land in `shard` and `shards`.
void add_shard(CLI::App& app, std::uint32_t& shard, std::uint32_t& shards, const std::string& help) {
  app.add_option("--shard", help)->type_name("I/N")->check([&shard, &shards](const std::string& v) {
    const auto slash = v.find('/');
    if (slash == std::string::npos) return "takes I/N, got \"" + v + "\"";
    std::string error = read_count(v.substr(0, slash), 1u, 100000u, shard);
    if (error.empty()) error = read_count(v.substr(slash + 1), 1u, 100000u, shards);
    return error.empty() && shard > shards ? "takes I/N with 1 <= I <= N, got \"" + v + "\"" : error;
  });
}

/// The scenario FILE every study and run reads; it must exist.
void add_scenario(CLI::App& app, std::string& file) {
  app.add_option("FILE", file, "the scenario (JSON)")->type_name("")->required()->check(kFileExists);
}

/// `--out DIR`, required.
void add_out(CLI::App& app, std::string& dir, const std::string& help) {
  app.add_option("--out", dir, help)->type_name("DIR")->required();
}

void add_quiet(CLI::App& app, bool& quiet) { app.add_flag("--quiet", quiet, "print nothing but errors"); }

void add_metric(CLI::App& app, std::string& metric) {
  app.add_option("--metric", metric, "the metric plotted in DIR/sweep.svg")->type_name("NAME")->capture_default_str();
}

// --- The subcommands ---

Command check_command(CLI::App& root) {
  auto* sub = root.add_subcommand("check", "validate a scenario (exit 0 valid, 2 invalid)");
  auto file = std::make_shared<std::string>();
  add_scenario(*sub, *file);
  return {sub, [file] { return droopline::cli::check(*file); }};
}

Command run_command(CLI::App& root) {
  struct Args {
    std::string file, out;
    bool quiet = false;
    unsigned threads = 0;  // 0: one per core
  };
  auto* sub = root.add_subcommand("run", "simulate to the end; write DIR/series.csv, DIR/summary.json");
  auto a = std::make_shared<Args>();
  add_scenario(*sub, a->file);
  add_out(*sub, a->out, "the output folder");
  add_quiet(*sub, a->quiet);
  add_count(*sub, "--threads", a->threads, 1u, 999u, "worker threads for fleets of 4096+ units (default: one per core)");
  return {sub, [a] { return droopline::cli::run(a->file, a->out, a->quiet, a->threads); }};
}

Command replay_command(CLI::App& root) {
  struct Args {
    std::string journal, out;
    int run = 0;  // 0: the last
    bool quiet = false;
    bool final_lineage = false;
  };
  auto* sub = root.add_subcommand("replay", "rebuild a live session's series from its journal");
  auto a = std::make_shared<Args>();
  sub->add_option("JOURNAL", a->journal, "the journal serve --journal wrote")->type_name("")->required()->check(kFileExists);
  add_out(*sub, a->out, "the output folder");
  add_count(*sub, "--run", a->run, 0, 999999, "the Nth scenario of a journal with loads or resets (default: the last)");
  add_quiet(*sub, a->quiet);
  sub->add_flag("--final-lineage", a->final_lineage,
                "series.csv: only the rows of the lineage the run ended on (default: every branch as streamed, time "
                "going back at each restore or rewind)");
  return {sub, [a] { return droopline::cli::replay(a->journal, a->out, a->run, a->quiet, a->final_lineage); }};
}

Command debrief_command(CLI::App& root) {
  struct Args {
    std::string journal, out, run;
    bool json = false, quiet = false;
  };
  auto* sub = root.add_subcommand("debrief", "write the debrief report (one HTML page) of a run from its journal");
  auto a = std::make_shared<Args>();
  sub->add_option("JOURNAL", a->journal, "the journal serve --journal wrote")->type_name("")->required()->check(kFileExists);
  sub->add_option("--out", a->out, "the report file (written whole or not at all)")->type_name("FILE")->required();
  sub->add_option("--run", a->run, "the run's id (its scenario record's \"run\"; default: the last run)")
      ->type_name("ID");
  sub->add_flag("--json", a->json, "write the report's data as JSON instead of HTML");
  add_quiet(*sub, a->quiet);
  return {sub, [a] { return droopline::cli::debrief(a->journal, a->out, a->run, a->json, a->quiet); }};
}

/// `--listen HOST:PORT` (an IPv6 host in brackets); an empty message when valid. The host is
/// checked as an IP address when the server starts.
std::string split_listen(const std::string& v, std::string& host, unsigned short& port) {
  const auto colon = v.rfind(':');
  if (colon == std::string::npos) return "takes HOST:PORT, got \"" + v + "\"";
  if (std::string error = read_count<unsigned short>(v.substr(colon + 1), 0, 65535, port); !error.empty()) return "the port: " + error;
  host = v.substr(0, colon);
  if (host.size() > 2 && host.front() == '[' && host.back() == ']') host = host.substr(1, host.size() - 2);
  return {};
}

Command serve_command(CLI::App& root) {
  struct Args {
    droopline::server::Options o;
    std::string listen, level = "info";
  };
  auto* sub = root.add_subcommand("serve", "run the scenario in real time behind HTTP and WebSocket");
  auto a = std::make_shared<Args>();
  auto& o = a->o;
  o.web_root = DROOPLINE_WEB_ROOT;
  auto* scenario =
      sub->add_option("--scenario", o.scenario_file, "the scenario (JSON)")->type_name("FILE")->check(kFileExists);
  auto* exercise = sub->add_option("--exercise", o.exercise_file, "run a training exercise (scenario, seats, script)")
                       ->type_name("FILE")
                       ->check(kFileExists)
                       ->excludes(scenario);
  scenario->excludes(exercise);
  sub->callback([scenario, exercise] {
    if (scenario->count() + exercise->count() == 0) throw CLI::RequiredError("--scenario or --exercise");
  });
  sub->add_option("--listen", a->listen, "0.0.0.0:PORT for a LAN (default 127.0.0.1:8080)")
      ->type_name("HOST:PORT")
      ->check([&o](const std::string& v) { return split_listen(v, o.host, o.port); });
  sub->add_option("--token-file", o.token_file, "instructor token (else $DROOPLINE_TOKEN, else generated)")
      ->type_name("FILE")
      ->check(kFileExists);
  sub->add_option("--journal", o.journal, "append every accepted command to FILE (JSON lines)")->type_name("FILE");
  sub->add_option("--records", o.records,
                  "training records in this SQLite file, or none (default with --journal: "
                  "droopline-data/records.sqlite3 beside it)")
      ->type_name("FILE");
  sub->add_option("--web", o.web_root, "static files to serve")->type_name("DIR")->capture_default_str();
  add_real(*sub, "--speed", o.speed, 0.1, 100, "X", "simulated seconds per wall second")->capture_default_str();
  add_real(*sub, "--frame-rate", o.frame_hz, 0.1, 100, "HZ", "telemetry frames per second")->capture_default_str();
  sub->add_flag("--wake-every-step", o.wake_every_step,
                "wake the loop at every step's deadline (default: once per frame, running the steps due)");
  add_real(*sub, "--history", o.history_s, 1, 86400, "S", "seconds of history kept for late joiners")->capture_default_str();
  sub->add_option("--allow-origin", o.allow_origins, "also accept WebSocket upgrades from this Origin (repeatable)")
      ->type_name("URL")
      ->expected(1)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
  add_count(*sub, "--max-connections", o.max_connections, std::size_t{1}, std::size_t{100000}, "open connections at most")
      ->capture_default_str();
  add_count(*sub, "--max-connections-per-address", o.max_connections_per_address, std::size_t{1}, std::size_t{100000},
            "open connections from one address at most (this machine's own not counted)")
      ->capture_default_str();
  sub->add_option("--log-level", a->level, "trace, debug, info, warn, error, critical or off")
      ->type_name("LEVEL")
      ->capture_default_str()
      ->check([](const std::string& v) {
        return spdlog::level::from_str(v) == spdlog::level::off && v != "off" ? "unknown level \"" + v + "\"" : std::string{};
      });
  return {sub, [a] {
            spdlog::set_level(spdlog::level::from_str(a->level));
            return droopline::server::serve(a->o);
          }};
}

Command sweep_command(CLI::App& root) {
  auto* sub = root.add_subcommand("sweep", "run every combination of the varied fields; one row of metrics per run");
  sub->footer("VALUES is V1,V2,... or START:STOP:STEP; PATH as units[V1].governor.droop");
  auto a = std::make_shared<droopline::cli::SweepArgs>();
  add_scenario(*sub, a->scenario_file);
  sub->add_option("--vary", a->vary, "a field and its values (repeatable)")
      ->type_name("PATH=VALUES")
      ->required()
      ->expected(1)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
  add_out(*sub, a->out_dir, "the output folder");
  add_count(*sub, "--sample", a->sample, std::uint64_t{1}, std::uint64_t{1} << 40,
            "a seeded random sample of N combinations of the grid");
  add_count(*sub, "--seed", a->seed, std::uint64_t{0}, ~std::uint64_t{0} >> 1, "the sample's seed")->capture_default_str();
  add_shard(*sub, a->shard, a->shards, "run only slice I of N (join the slices with merge)");
  add_count(*sub, "--threads", a->threads, 1u, 999u, "parallel runs (default: one per core)");
  sub->add_flag("--no-ensemble", [a](std::int64_t) { a->ensemble = false; },
                "run every combination alone instead of stepping those of one structure together");
  add_metric(*sub, a->metric);
  add_quiet(*sub, a->quiet);
  return {sub, [a] { return droopline::cli::sweep(*a); }};
}

Command merge_command(CLI::App& root) {
  struct Args {
    std::vector<std::string> dirs;
    std::string out, metric = "nadir_hz";
    bool quiet = false;
  };
  auto* sub = root.add_subcommand("merge", "join the shards of one sweep");
  auto a = std::make_shared<Args>();
  sub->add_option("DIR", a->dirs, "the shard folders")->type_name("")->required()->check(kDirExists);
  add_out(*sub, a->out, "the output folder");
  add_metric(*sub, a->metric);
  add_quiet(*sub, a->quiet);
  return {sub, [a] { return droopline::cli::merge(a->dirs, a->out, a->metric, a->quiet); }};
}

Command modes_command(CLI::App& root) {
  struct Args {
    std::string file;
    double threshold = 0.05;
    bool json = false;
  };
  auto* sub = root.add_subcommand("modes", "small-signal modes at the initial operating point");
  auto a = std::make_shared<Args>();
  add_scenario(*sub, a->file);
  add_real(*sub, "--damping-threshold", a->threshold, 0, 1, "X", "flag oscillatory modes damped below X (0.05 = 5 %)")->capture_default_str();
  sub->add_flag("--json", a->json, "print the modes as JSON");
  return {sub, [a] { return droopline::cli::modes(a->file, a->threshold, a->json); }};
}

Command assess_command(CLI::App& root) {
  struct Args {
    std::string file, requirements;
    bool json = false;
  };
  auto* sub = root.add_subcommand("assess", "run and check against a requirements file (exit 0 all met, 3 some not met)");
  auto a = std::make_shared<Args>();
  add_scenario(*sub, a->file);
  sub->add_option("--requirements", a->requirements, "the requirements (JSON)")->type_name("REQ")->required()->check(kFileExists);
  sub->add_flag("--json", a->json, "print the table as JSON");
  return {sub, [a] { return droopline::cli::assess(a->file, a->requirements, a->json); }};
}

/// "YYYY-MM-DDTHH:MM:SSZ" (the Z optional), UTC; false when it is not one.
bool parse_utc(const std::string& v, std::chrono::system_clock::time_point& out) {
  std::tm tm{};
  char z = 0;
  if (std::sscanf(v.c_str(), "%4d-%2d-%2dT%2d:%2d:%2d%c", &tm.tm_year, &tm.tm_mon, &tm.tm_mday, &tm.tm_hour, &tm.tm_min,
                  &tm.tm_sec, &z) < 6 || (z != 0 && z != 'Z') || tm.tm_mon < 1 || tm.tm_mon > 12 || tm.tm_mday < 1 ||
      tm.tm_mday > 31 || tm.tm_hour > 23 || tm.tm_min > 59 || tm.tm_sec > 60)
    return false;
  tm.tm_year -= 1900;
  tm.tm_mon -= 1;
  out = std::chrono::system_clock::from_time_t(timegm(&tm));
  return true;
}

Command record_command(CLI::App& root) {
  auto* sub = root.add_subcommand("record", "run and write a COMTRADE (IEEE C37.111-1999 ASCII) record DIR/NAME.cfg + .dat");
  auto a = std::make_shared<droopline::cli::RecordArgs>();
  a->start = std::chrono::floor<std::chrono::seconds>(std::chrono::system_clock::now());
  add_scenario(*sub, a->scenario_file);
  add_out(*sub, a->out_dir, "the output folder");
  add_real(*sub, "--from", a->from_s, 0, 1e9, "S", "the start of the window, simulated seconds (default 0)");
  add_real(*sub, "--to", a->to_s, 0, 1e9, "S", "the end of the window (default: the end of the run)");
  sub->add_option("--start", "the wall time of t = 0, UTC (default: now)")
      ->type_name("YYYY-MM-DDTHH:MM:SSZ")
      ->check([a](const std::string& v) { return parse_utc(v, a->start) ? std::string{} : "takes UTC as YYYY-MM-DDTHH:MM:SSZ"; });
  sub->add_option("--name", a->name, "the file name, without folders")
      ->type_name("NAME")
      ->capture_default_str()
      ->check([](const std::string& v) {
        return v.empty() || v.find_first_of("/\\") != std::string::npos ? "takes a file name without folders" : std::string{};
      });
  add_quiet(*sub, a->quiet);
  return {sub, [a] { return droopline::cli::record(*a); }};
}

/// A required option that may be given several times, each value kept.
CLI::Option* add_repeated(CLI::App& app, const std::string& name, std::vector<std::string>& values, const std::string& type,
                          const std::string& help) {
  return app.add_option(name, values, help)
      ->type_name(type)
      ->required()
      ->expected(1)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
}

/// The options that say how a recording is read.
void add_recording(CLI::App& sub, droopline::cli::RecordingArgs& r, bool one_power_column_per_unit) {
  sub.add_option("--time-column", r.time_column, "CSV: the time column (s)")->type_name("NAME")->capture_default_str();
  sub.add_option("--frequency-column", r.frequency_column, "the frequency column or channel (default AREA.f_hz)")
      ->type_name("NAME");
  sub.add_option("--power-column", r.power_columns,
                 one_power_column_per_unit ? "the output column or channel, one per --unit (default UNIT.p_mw)"
                                           : "the output column or channel (default UNIT.p_mw)")
      ->type_name("NAME")
      ->expected(1)
      ->multi_option_policy(CLI::MultiOptionPolicy::TakeAll);
  add_real(sub, "--base-mw", r.base_mw, 1e-9, 1e9, "MW", "values are per unit: the power base (with --base-hz)");
  add_real(sub, "--base-hz", r.base_hz, 1e-9, 1e6, "HZ", "values are per unit: the frequency base (with --base-mw)");
}

Command playback_command(CLI::App& root) {
  auto* sub = root.add_subcommand("playback", "drive units with a recorded frequency and compare their output");
  auto a = std::make_shared<droopline::cli::PlaybackArgs>();
  add_scenario(*sub, a->scenario_file);
  add_repeated(*sub, "--unit", a->units, "ID", "a unit to play back (repeatable: units of one plant)");
  sub->add_option("--measured", a->rec.measured, "the recording (.csv or COMTRADE .cfg)")
      ->type_name("REC")
      ->required()
      ->check(kFileExists);
  add_recording(*sub, a->rec, true);
  add_real(*sub, "--threshold-hz", a->threshold_hz, droopline::study::kMinThresholdHz, droopline::study::kMaxThresholdHz, "HZ",
           "an excursion is |f - f0| beyond this (default: the widest deadband + 0.01)");
  sub->add_option("--out-dir", a->out_dir, "write playback.csv, playback.json and plots here")->type_name("DIR");
  sub->add_flag("--json", a->json, "print the comparison as JSON");
  return {sub, [a] { return droopline::cli::playback(*a); }};
}

Command fit_command(CLI::App& root) {
  auto* sub = root.add_subcommand("fit", "fit a unit's parameters to a recording (a study result, not a plant setting)");
  auto a = std::make_shared<droopline::cli::FitArgs>();
  add_scenario(*sub, a->scenario_file);
  add_repeated(*sub, "--unit", a->units, "ID", "the unit (repeatable: one fit each)");
  add_repeated(*sub, "--measured", a->recordings, "REC", "the recording (repeatable: one fit each, paired with --unit in order)")
      ->check(kFileExists);
  add_recording(*sub, a->rec, true);
  add_repeated(*sub, "--param", a->params, "PATH=LO:HI", "a parameter, relative to the unit, and its bounds (repeatable)");
  add_count(*sub, "--starts", a->starts, 1u, 1000u, "local searches from a seeded Latin hypercube")->capture_default_str();
  add_count(*sub, "--seed", a->seed, std::uint64_t{0}, ~std::uint64_t{0} >> 1, "the starting points' seed")->capture_default_str();
  add_count(*sub, "--threads", a->threads, 1u, 999u, "parallel searches (default: one per core)");
  add_shard(*sub, a->shard, a->shards, "run only fits I, I+N, I+2N, ... of the list (1-based)");
  sub->add_option("--out-dir", a->out_dir, "write each fit's JSON, scenario fragment and plot here")->type_name("DIR");
  sub->add_flag("--json", a->json, "print the fit as JSON");
  return {sub, [a] { return droopline::cli::fit(*a); }};
}

Command inject_command(CLI::App& root) {
  auto* sub = root.add_subcommand("inject", "run frequency-injection tests on a unit model (exit 0 all passed, 3 some failed)");
  auto a = std::make_shared<droopline::cli::InjectArgs>();
  add_scenario(*sub, a->scenario_file);
  sub->add_option("--unit", a->unit, "the unit")->type_name("ID")->required();
  sub->add_option("--profile", a->profile, "the test profile (JSON)")->type_name("PROFILE")->required()->check(kFileExists);
  sub->add_option("--out-dir", a->out_dir, "write inject.json and a plot per test here")->type_name("DIR");
  sub->add_flag("--json", a->json, "print the results as JSON");
  return {sub, [a] { return droopline::cli::inject(*a); }};
}

/// Every subcommand by name, in the order `droopline --help` lists them.
const std::pair<std::string_view, Command (*)(CLI::App&)> kCommands[] = {
    {"check", check_command},   {"run", run_command},         {"serve", serve_command},   {"replay", replay_command},
    {"sweep", sweep_command},   {"merge", merge_command},     {"modes", modes_command},   {"assess", assess_command},
    {"record", record_command}, {"debrief", debrief_command}, {"playback", playback_command},
    {"fit", fit_command},       {"inject", inject_command}};

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"droopline - governor and droop sharing simulator (training and study tool)", "droopline"};
  app.footer("Exit codes: 0 success, 1 input/output failure, 2 invalid scenario or arguments,\n"
             "3 (assess) a requirement not met. `droopline COMMAND --help` shows one command's options.");
  app.option_defaults()->multi_option_policy(CLI::MultiOptionPolicy::TakeLast);  // a repeated option: the last wins
  app.require_subcommand(1);
  // DROOPLINE_KERNELS=avx512|avx2|baseline picks the integration kernels (all give the same bits;
  // the determinism test runs each); --version names the variant in use.
  const auto use_env_kernels = [] {
    const char* k = std::getenv("DROOPLINE_KERNELS");
    std::string err;
    if (!k || !*k || droopline::use_kernels(k, err)) return true;
    std::cerr << "droopline: DROOPLINE_KERNELS: " << err << "\n";
    return false;
  };
  app.set_version_flag("--version", [&] {
    if (!use_env_kernels()) throw CLI::RuntimeError(2);
    return std::string("droopline ") + DROOPLINE_VERSION + " (" + droopline::kernels_in_use() + " kernels" +
           (droopline::kernel_variants_built() ? "" : ", the only ones in this build") + ")";
  });
  // When the first argument names a subcommand only that one is set up: setting up all thirteen,
  // with their options and checks, was a quarter of the instructions a small `run` executed.
  // Anything else (help, --version, a misspelt command) sets them all up, to list or suggest them.
  std::vector<Command> commands;
  for (const auto& [name, set_up] : kCommands)
    if (argc > 1 && std::string_view(argv[1]) == name) commands.push_back(set_up(app));
  if (commands.empty())
    for (const auto& [name, set_up] : kCommands) commands.push_back(set_up(app));
  app.set_help_all_flag("--help-all", "every command's options");  // after the subcommands: theirs have none
  static char help_flag[] = "--help";
  if (argc > 1 && std::string(argv[1]) == "help") argv[1] = help_flag;  // `droopline help` is `droopline --help`
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    // --help anywhere wins over a bad value beside it, as before CLI11 (which checks values first).
    const std::function<bool(const CLI::App&)> asked = [&](const CLI::App& a) {
      if (a.get_help_ptr()->count() > 0) return true;
      for (const CLI::App* s : a.get_subcommands())
        if (asked(*s)) return true;
      return false;
    };
    if (asked(app)) return app.exit(CLI::CallForHelp());
    // No subcommand matched: name what was given rather than only "a subcommand is required".
    const bool unknown = app.get_subcommands().empty() && !app.remaining().empty();
    // Help and --version exit 0; CLI11's error codes (105, 106, ...) all mean invalid arguments: 2.
    return app.exit(unknown ? CLI::ExtrasError(app.remaining()) : e) == 0 ? 0 : 2;
  }
  if (!use_env_kernels()) return 2;
  for (const Command& c : commands)
    if (c.app->parsed()) return c.action();
  return 2;  // unreachable: one subcommand is required
}
