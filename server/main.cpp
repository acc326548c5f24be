// droopline: command-line entry point.
#include <cstring>
#include <iostream>
#include <string>
#include <vector>

#include "cli_run.hpp"

namespace {

constexpr const char* kUsage = R"(droopline - governor and droop sharing simulator (training and study tool)

usage:
  droopline check FILE             validate a scenario (exit 0 valid, 2 invalid)
  droopline run FILE --out DIR     simulate to the end; write DIR/series.csv, DIR/summary.json
        [--quiet]                  print nothing but errors
        [--threads N]              worker threads for fleets of 4096+ units (default: one per core)
  droopline --version | --help

Exit codes: 0 success, 1 input/output failure, 2 invalid scenario or arguments.
)";

int usage_error(const std::string& what) {
  std::cerr << "droopline: " << what << "\n\n" << kUsage;
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  if (args.empty()) return usage_error("a command is required");
  const std::string cmd = args[0];
  if (cmd == "--help" || cmd == "-h" || cmd == "help") {
    std::cout << kUsage;
    return 0;
  }
  if (cmd == "--version") {
    std::cout << "droopline " << DROOPLINE_VERSION << "\n";
    return 0;
  }
  if (cmd == "check") {
    if (args.size() != 2) return usage_error("check takes exactly one FILE");
    return droopline::cli::check(args[1]);
  }
  if (cmd == "run") {
    std::string file, out;
    bool quiet = false;
    unsigned threads = 0;
    for (std::size_t i = 1; i < args.size(); ++i) {
      if (args[i] == "--out" && i + 1 < args.size()) {
        out = args[++i];
      } else if (args[i] == "--threads" && i + 1 < args.size()) {
        const std::string& v = args[++i];
        if (v.empty() || v.size() > 3 || v.find_first_not_of("0123456789") != std::string::npos ||
            std::stoi(v) < 1)
          return usage_error("--threads takes a whole number from 1 to 999, got \"" + v + "\"");
        threads = static_cast<unsigned>(std::stoi(v));
      } else if (args[i] == "--quiet") {
        quiet = true;
      } else if (!args[i].empty() && args[i][0] == '-') {
        return usage_error("unknown option \"" + args[i] + "\" for run");
      } else if (file.empty()) {
        file = args[i];
      } else {
        return usage_error("run takes one FILE, got \"" + args[i] + "\" too");
      }
    }
    if (file.empty()) return usage_error("run needs a scenario FILE");
    if (out.empty()) return usage_error("run needs --out DIR");
    return droopline::cli::run(file, out, quiet, threads);
  }
  return usage_error("unknown command \"" + cmd + "\"");
}
