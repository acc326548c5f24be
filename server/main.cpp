// droopline: command-line entry point.
#include <algorithm>
#include <cstdlib>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <ctime>
#include <iostream>
#include <string>
#include <vector>

#include <spdlog/spdlog.h>

#include "cli_run.hpp"
#include "droopline/kernel_choice.hpp"
#include "cli_sweep.hpp"
#include "server.hpp"

namespace {

// One usage text per subcommand, kept here only: `droopline --help` prints them all,
// `droopline SUB --help` (or -h) and a usage error of SUB print SUB's own.
struct Subcommand {
  const char* name;
  const char* usage;  ///< its usage lines, each option with its meaning
};

constexpr Subcommand kSubcommands[] = {
    {"check", R"(  droopline check FILE             validate a scenario (exit 0 valid, 2 invalid)
)"},
    {"run", R"(  droopline run FILE --out DIR     simulate to the end; write DIR/series.csv, DIR/summary.json
        [--quiet]                  print nothing but errors
        [--threads N]              worker threads for fleets of 4096+ units (default: one per core)
)"},
    {"serve", R"(  droopline serve --scenario FILE  run the scenario in real time behind HTTP and WebSocket
        [--listen HOST:PORT]       default 127.0.0.1:8080; 0.0.0.0:PORT for a LAN
        [--token-file FILE]        instructor token (else $DROOPLINE_TOKEN, else generated)
        [--journal FILE]           append every accepted command to FILE (JSON lines)
        [--web DIR]                static files to serve (default: the web/ folder)
        [--speed X]                simulated seconds per wall second, 0.1-100 (default 1)
        [--frame-rate HZ]          telemetry frames per second (default 20)
        [--history S]              seconds of history kept for late joiners (default 600)
        [--allow-origin URL]       also accept WebSocket upgrades from this Origin (repeatable)
        [--max-connections N]      default 256
        [--log-level LEVEL]        trace, debug, info (default), warn, error
)"},
    {"replay", R"(  droopline replay JOURNAL --out DIR
                                   rebuild a live session's series from its journal
        [--run N]                  the Nth scenario of a journal with loads or resets (default: the last)
        [--quiet]                  print nothing but errors
)"},
    {"sweep", R"(  droopline sweep FILE --vary PATH=VALUES [--vary ...] --out DIR
                                   run every combination; one row of metrics per run
        VALUES                     V1,V2,... or START:STOP:STEP; PATH as units[V1].governor.droop
        [--sample N] [--seed S]    a seeded random sample of N combinations of the grid
        [--shard I/N]              run only slice I of N (join the slices with merge)
        [--threads N]              parallel runs (default: one per core)
        [--metric NAME]            the metric plotted in DIR/sweep.svg (default nadir_hz)
        [--quiet]                  print nothing but errors
)"},
    {"merge", R"(  droopline merge DIR... --out DIR
                                   join the shards of one sweep
        [--metric NAME]            the metric plotted in DIR/sweep.svg (default nadir_hz)
        [--quiet]                  print nothing but errors
)"},
    {"modes", R"(  droopline modes FILE             small-signal modes at the initial operating point
        [--damping-threshold X]    flag oscillatory modes damped below X (default 0.05 = 5 %)
        [--json]                   print the modes as JSON
)"},
    {"assess", R"(  droopline assess FILE --requirements REQ
                                   run and check against a requirements file
                                   (exit 0 all met, 3 some not met)
        [--json]                   print the table as JSON
)"},
    {"record", R"(  droopline record FILE --out DIR  run and write a COMTRADE (IEEE C37.111-1999 ASCII)
                                   disturbance record DIR/NAME.cfg + .dat
        [--from S] [--to S]        the time window, simulated seconds (default: the whole run)
        [--start YYYY-MM-DDTHH:MM:SSZ]
                                   the wall time of t = 0, UTC (default: now)
        [--name NAME]              the file name, without folders (default record)
        [--quiet]                  print nothing but errors
)"},
};

constexpr const char* kTitle = "droopline - governor and droop sharing simulator (training and study tool)\n";
constexpr const char* kExitCodes = R"(
Exit codes: 0 success, 1 input/output failure, 2 invalid scenario or arguments,
3 (assess) a requirement not met.
)";

/// The subcommand whose arguments are being read (its usage goes with an error), or none.
const Subcommand* current = nullptr;

const Subcommand* find_subcommand(const std::string& name) {
  for (const auto& c : kSubcommands)
    if (name == c.name) return &c;
  return nullptr;
}

/// The whole usage, or one subcommand's.
std::string usage_text(const Subcommand* only) {
  std::string out = std::string(kTitle) + "\nusage:\n";
  if (only) {
    out += only->usage;
    out += "  droopline --help                 every command\n";
  } else {
    for (const auto& c : kSubcommands) out += c.usage;
    out += "  droopline --version | --help\n";
    out += "  droopline COMMAND --help         one command's usage\n";
  }
  return out + kExitCodes;
}

int usage_error(const std::string& what) {
  std::cerr << "droopline: " << what << "\n\n" << usage_text(current);
  return 2;
}

bool parse_number(const std::string& text, double lo, double hi, double& out) {
  char* end = nullptr;
  out = std::strtod(text.c_str(), &end);
  return !text.empty() && end == text.c_str() + text.size() && out >= lo && out <= hi;
}

int serve_command(const std::vector<std::string>& args) {
  droopline::server::Options o;
  o.web_root = DROOPLINE_WEB_ROOT;
  std::string level = "info";
  for (std::size_t i = 1; i < args.size(); ++i) {
    const std::string& a = args[i];
    auto value = [&](std::string& out) {
      if (i + 1 >= args.size()) return false;
      out = args[++i];
      return true;
    };
    std::string v;
    double x = 0;
    if (a == "--scenario" && value(o.scenario_file)) continue;
    if (a == "--token-file" && value(o.token_file)) continue;
    if (a == "--journal" && value(o.journal)) continue;
    if (a == "--web" && value(o.web_root)) continue;
    if (a == "--log-level" && value(level)) continue;
    if (a == "--allow-origin" && value(v)) {
      o.allow_origins.push_back(v);
      continue;
    }
    if (a == "--listen" && value(v)) {
      const auto colon = v.rfind(':');
      if (colon == std::string::npos || !parse_number(v.substr(colon + 1), 0, 65535, x))
        return usage_error("--listen takes HOST:PORT, got \"" + v + "\"");
      o.host = v.substr(0, colon);
      if (o.host.size() > 2 && o.host.front() == '[' && o.host.back() == ']') o.host = o.host.substr(1, o.host.size() - 2);
      o.port = static_cast<unsigned short>(x);
      continue;
    }
    if (a == "--speed" && value(v)) {
      if (!parse_number(v, 0.1, 100, o.speed)) return usage_error("--speed takes 0.1 to 100, got \"" + v + "\"");
      continue;
    }
    if (a == "--frame-rate" && value(v)) {
      if (!parse_number(v, 0.1, 100, o.frame_hz)) return usage_error("--frame-rate takes 0.1 to 100, got \"" + v + "\"");
      continue;
    }
    if (a == "--history" && value(v)) {
      if (!parse_number(v, 1, 86400, o.history_s)) return usage_error("--history takes 1 to 86400 seconds, got \"" + v + "\"");
      continue;
    }
    if (a == "--max-connections" && value(v)) {
      if (!parse_number(v, 1, 100000, x)) return usage_error("--max-connections takes 1 to 100000, got \"" + v + "\"");
      o.max_connections = static_cast<std::size_t>(x);
      continue;
    }
    return usage_error("unknown or incomplete option \"" + a + "\" for serve");
  }
  if (o.scenario_file.empty()) return usage_error("serve needs --scenario FILE");
  const auto lvl = spdlog::level::from_str(level);
  if (lvl == spdlog::level::off && level != "off") return usage_error("--log-level: unknown level \"" + level + "\"");
  spdlog::set_level(lvl);
  return droopline::server::serve(o);
}

bool whole_number(const std::string& v, std::uint64_t lo, std::uint64_t hi, std::uint64_t& out) {
  if (v.empty() || v.size() > 12 || v.find_first_not_of("0123456789") != std::string::npos) return false;
  out = std::stoull(v);
  return out >= lo && out <= hi;
}

int sweep_command(const std::vector<std::string>& args) {
  const bool merging = args[0] == "merge";
  droopline::cli::SweepArgs a;
  std::vector<std::string> dirs;
  for (std::size_t i = 1; i < args.size(); ++i) {
    const std::string& o = args[i];
    const bool has = i + 1 < args.size();
    std::uint64_t n = 0;
    if (o == "--out" && has) {
      a.out_dir = args[++i];
    } else if (o == "--metric" && has) {
      a.metric = args[++i];
    } else if (o == "--quiet") {
      a.quiet = true;
    } else if (!merging && o == "--vary" && has) {
      a.vary.push_back(args[++i]);
    } else if (!merging && o == "--sample" && has) {
      if (!whole_number(args[++i], 1, 1ULL << 40, n)) return usage_error("--sample takes a count of runs, got \"" + args[i] + "\"");
      a.sample = n;
    } else if (!merging && o == "--seed" && has) {
      if (!whole_number(args[++i], 0, ~0ULL >> 1, n)) return usage_error("--seed takes a whole number, got \"" + args[i] + "\"");
      a.seed = n;
    } else if (!merging && o == "--threads" && has) {
      if (!whole_number(args[++i], 1, 999, n)) return usage_error("--threads takes 1 to 999, got \"" + args[i] + "\"");
      a.threads = static_cast<unsigned>(n);
    } else if (!merging && o == "--shard" && has) {
      const std::string& v = args[++i];
      const auto slash = v.find('/');
      std::uint64_t s = 0;
      if (slash == std::string::npos || !whole_number(v.substr(0, slash), 1, 100000, s) ||
          !whole_number(v.substr(slash + 1), 1, 100000, n) || s > n)
        return usage_error("--shard takes I/N with 1 <= I <= N, got \"" + v + "\"");
      a.shard = static_cast<std::uint32_t>(s);
      a.shards = static_cast<std::uint32_t>(n);
    } else if (!o.empty() && o[0] == '-') {
      return usage_error("unknown option \"" + o + "\" for " + args[0]);
    } else if (merging) {
      dirs.push_back(o);
    } else if (a.scenario_file.empty()) {
      a.scenario_file = o;
    } else {
      return usage_error("sweep takes one scenario FILE, got \"" + o + "\" too");
    }
  }
  if (a.out_dir.empty()) return usage_error(args[0] + " needs --out DIR");
  if (merging) {
    if (dirs.empty()) return usage_error("merge needs the shard directories");
    return droopline::cli::merge(dirs, a.out_dir, a.metric, a.quiet);
  }
  if (a.scenario_file.empty()) return usage_error("sweep needs a scenario FILE");
  if (a.vary.empty()) return usage_error("sweep needs at least one --vary PATH=VALUES");
  return droopline::cli::sweep(a);
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  if (args.empty()) return usage_error("a command is required");
  const std::string cmd = args[0];
  if (cmd == "--help" || cmd == "-h" || cmd == "help") {
    std::cout << usage_text(nullptr);
    return 0;
  }
  current = find_subcommand(cmd);
  // `SUB --help` or `SUB -h` anywhere among SUB's arguments: its usage, nothing else runs.
  if (current && std::find_if(args.begin() + 1, args.end(), [](const std::string& a) { return a == "--help" || a == "-h"; }) != args.end()) {
    std::cout << usage_text(current);
    return 0;
  }
  // DROOPLINE_KERNELS=avx512|avx2|baseline picks the integration kernels (all give the same bits;
  // the determinism test runs each).
  if (const char* k = std::getenv("DROOPLINE_KERNELS"); k && *k) {
    std::string err;
    if (!droopline::use_kernels(k, err)) {
      std::cerr << "droopline: DROOPLINE_KERNELS: " << err << "\n";
      return 2;
    }
  }
  if (cmd == "--version") {
    std::cout << "droopline " << DROOPLINE_VERSION << " (" << droopline::kernels_in_use() << " kernels"
              << (droopline::kernel_variants_built() ? "" : ", the only ones in this build") << ")\n";
    return 0;
  }
  if (cmd == "check") {
    if (args.size() != 2) return usage_error("check takes exactly one FILE");
    return droopline::cli::check(args[1]);
  }
  if (cmd == "serve") return serve_command(args);
  if (cmd == "sweep" || cmd == "merge") return sweep_command(args);
  if (cmd == "record") {
    droopline::cli::RecordArgs a;
    a.start = std::chrono::floor<std::chrono::seconds>(std::chrono::system_clock::now());
    for (std::size_t i = 1; i < args.size(); ++i) {
      const bool has = i + 1 < args.size();
      if (args[i] == "--out" && has) {
        a.out_dir = args[++i];
      } else if (args[i] == "--name" && has) {
        a.name = args[++i];
        if (a.name.empty() || a.name.find_first_of("/\\") != std::string::npos)
          return usage_error("--name takes a file name without folders, got \"" + a.name + "\"");
      } else if ((args[i] == "--from" || args[i] == "--to") && has) {
        double v = 0;
        if (!parse_number(args[i + 1], 0.0, 1e9, v)) return usage_error(args[i] + " takes seconds, got \"" + args[i + 1] + "\"");
        (args[i] == "--from" ? a.from_s : a.to_s) = v;
        ++i;
      } else if (args[i] == "--start" && has) {
        std::tm tm{};
        const std::string& v = args[++i];
        char z = 0;
        if (std::sscanf(v.c_str(), "%4d-%2d-%2dT%2d:%2d:%2d%c", &tm.tm_year, &tm.tm_mon, &tm.tm_mday, &tm.tm_hour, &tm.tm_min,
                        &tm.tm_sec, &z) < 6 || (z != 0 && z != 'Z') || tm.tm_mon < 1 || tm.tm_mon > 12 || tm.tm_mday < 1 ||
            tm.tm_mday > 31 || tm.tm_hour > 23 || tm.tm_min > 59 || tm.tm_sec > 60)
          return usage_error("--start takes UTC as YYYY-MM-DDTHH:MM:SSZ, got \"" + v + "\"");
        tm.tm_year -= 1900;
        tm.tm_mon -= 1;
        a.start = std::chrono::system_clock::from_time_t(timegm(&tm));
      } else if (args[i] == "--quiet") {
        a.quiet = true;
      } else if (!args[i].empty() && args[i][0] == '-') {
        return usage_error("unknown option \"" + args[i] + "\" for record");
      } else if (a.scenario_file.empty()) {
        a.scenario_file = args[i];
      } else {
        return usage_error("record takes one scenario FILE");
      }
    }
    if (a.scenario_file.empty()) return usage_error("record needs a scenario FILE");
    if (a.out_dir.empty()) return usage_error("record needs --out DIR");
    return droopline::cli::record(a);
  }
  if (cmd == "assess") {
    std::string file, req;
    bool as_json = false;
    for (std::size_t i = 1; i < args.size(); ++i) {
      if (args[i] == "--requirements" && i + 1 < args.size()) req = args[++i];
      else if (args[i] == "--json") as_json = true;
      else if (!args[i].empty() && args[i][0] == '-') return usage_error("unknown option \"" + args[i] + "\" for assess");
      else if (file.empty()) file = args[i];
      else return usage_error("assess takes one scenario FILE");
    }
    if (file.empty()) return usage_error("assess needs a scenario FILE");
    if (req.empty()) return usage_error("assess needs --requirements FILE");
    return droopline::cli::assess(file, req, as_json);
  }
  if (cmd == "modes") {
    std::string file;
    double threshold = 0.05;
    bool as_json = false;
    for (std::size_t i = 1; i < args.size(); ++i) {
      if (args[i] == "--damping-threshold" && i + 1 < args.size()) {
        if (!parse_number(args[++i], 0.0, 1.0, threshold))
          return usage_error("--damping-threshold takes a ratio from 0 to 1, got \"" + args[i] + "\"");
      } else if (args[i] == "--json") {
        as_json = true;
      } else if (!args[i].empty() && args[i][0] == '-') {
        return usage_error("unknown option \"" + args[i] + "\" for modes");
      } else if (file.empty()) {
        file = args[i];
      } else {
        return usage_error("modes takes one FILE");
      }
    }
    if (file.empty()) return usage_error("modes needs a scenario FILE");
    return droopline::cli::modes(file, threshold, as_json);
  }
  if (cmd == "run" || cmd == "replay") {
    std::string file, out;
    bool quiet = false;
    unsigned threads = 0;
    int run_number = 0;
    for (std::size_t i = 1; i < args.size(); ++i) {
      if (args[i] == "--out" && i + 1 < args.size()) {
        out = args[++i];
      } else if (cmd == "run" && args[i] == "--threads" && i + 1 < args.size()) {
        const std::string& v = args[++i];
        if (v.empty() || v.size() > 3 || v.find_first_not_of("0123456789") != std::string::npos ||
            std::stoi(v) < 1)
          return usage_error("--threads takes a whole number from 1 to 999, got \"" + v + "\"");
        threads = static_cast<unsigned>(std::stoi(v));
      } else if (cmd == "replay" && args[i] == "--run" && i + 1 < args.size()) {
        const std::string& v = args[++i];
        if (v.empty() || v.size() > 6 || v.find_first_not_of("0123456789") != std::string::npos)
          return usage_error("--run takes a run number, got \"" + v + "\"");
        run_number = std::stoi(v);
      } else if (args[i] == "--quiet") {
        quiet = true;
      } else if (!args[i].empty() && args[i][0] == '-') {
        return usage_error("unknown option \"" + args[i] + "\" for " + cmd);
      } else if (file.empty()) {
        file = args[i];
      } else {
        return usage_error(cmd + " takes one FILE, got \"" + args[i] + "\" too");
      }
    }
    if (file.empty()) return usage_error(cmd + " needs a " + (cmd == "run" ? "scenario FILE" : "JOURNAL"));
    if (out.empty()) return usage_error(cmd + " needs --out DIR");
    if (cmd == "replay") return droopline::cli::replay(file, out, run_number, quiet);
    return droopline::cli::run(file, out, quiet, threads);
  }
  return usage_error("unknown command \"" + cmd + "\"");
}
