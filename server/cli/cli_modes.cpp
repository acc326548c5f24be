// `droopline modes` (small-signal modes) and `droopline assess` (requirement checks).
#include <cstdio>
#include <iostream>

#include "cli_modes.hpp"
#include "droopline/format.hpp"
#include "cli_files.hpp"
#include "droopline/assess.hpp"
#include "droopline/batch.hpp"
#include "droopline/comtrade.hpp"
#include "droopline/engine.hpp"
#include "droopline/modes.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::cli {

int modes(const std::string& file, double damping_threshold, bool as_json) {
  LoadResult r = load_scenario_file(file);
  if (!r.system) {
    for (const Issue& i : r.issues) std::cerr << file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
    return 2;
  }
  study::ModesOptions opt;
  opt.damping_threshold = damping_threshold;
  const study::ModesResult res = study::small_signal(r.system->def(), opt);
  if (!res.error.empty()) {
    std::cerr << file << ": error: " << res.error << "\n";
    return 2;
  }
  if (as_json) {
    std::cout << to_text(study::modes_to_json(res, opt)) << "\n";
    return 0;
  }
  std::cout << "droopline: modes of \"" << r.system->def().name << "\" (" << res.states.size() << " states)\n";
  std::printf("%3s  %-12s %12s %14s %10s %10s  %s\n", "#", "kind", "real 1/s", "imag rad/s", "f Hz", "damping", "states taking part");
  int k = 0;
  for (const study::Mode& m : res.modes) {
    std::string parts;
    for (const auto& [s, p] : m.participation)
      if (p >= 0.05) parts += (parts.empty() ? "" : ", ") + s + " " + fmt_fixed(p * 100, 0) + "%";
    const std::string damp = m.kind == "oscillatory" ? fmt_fixed(m.damping_ratio * 100, 1) + " %"
                             : m.kind == "real"      ? "T " + fmt_num(m.time_constant_s) + " s"
                                                     : "-";
    std::printf("%3d%s %-12s %12.5f %14.5f %10s %10s  %s\n", ++k, m.flagged ? "!" : " ", m.kind.c_str(), m.lambda.real(),
                m.lambda.imag(), m.kind == "oscillatory" ? fmt_fixed(m.frequency_hz, 3).c_str() : "-", damp.c_str(), parts.c_str());
  }
  std::size_t flagged = 0;
  for (const auto& m : res.modes) flagged += m.flagged;
  std::cout << (flagged ? std::to_string(flagged) + " mode(s) flagged (!): unstable, or damped below " : "no mode unstable or damped below ")
            << fmt_num(damping_threshold * 100) << " %\n";
  for (const auto& n : res.notes) std::cout << "note: " << n << "\n";
  return 0;
}

int assess(const std::string& file, const std::string& requirements_file, bool as_json) {
  LoadResult r = load_scenario_file(file);
  if (!r.system) {
    for (const Issue& i : r.issues) std::cerr << file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
    return 2;
  }
  std::vector<Issue> unread;
  const std::optional<std::string> text = read_text_file(requirements_file, unread);
  if (!text) {
    std::cerr << requirements_file << ": error: " << unread.front().text() << "\n";
    return 2;
  }
  std::vector<Issue> issues;
  const auto req = study::parse_requirements(*text, issues);
  if (!req) {
    for (const Issue& i : issues) std::cerr << requirements_file << ": error: " << i.text() << "\n";
    return 2;
  }
  if (const std::vector<Issue> bad = study::requirement_issues(r.system->def(), *req); !bad.empty()) {
    for (const Issue& i : bad) std::cerr << requirements_file << ": error: " << i.text() << "\n";
    return 2;
  }
  const study::Assessment a = study::assess(r.system->def(), *req);
  if (as_json) {
    std::cout << to_text(study::assessment_to_json(a, *req)) << "\n";
    return a.passed ? 0 : 3;
  }
  std::cout << "droopline: \"" << r.system->def().name << "\" against \"" << req->name << "\"\n";
  std::printf("%-52s %-16s %-14s %-10s %-10s\n", "requirement", "limit", "measured", "margin", "result");
  for (const study::CheckRow& c : a.rows) {
    const int digits = c.unit == "Hz" ? 3 : 2;
    const std::string lim = c.relation + " " + fmt_fixed(c.limit, digits) + " " + c.unit;
    const std::string meas = c.measured ? fmt_fixed(*c.measured, digits) + " " + c.unit : "-";
    const std::string margin = c.measured ? (c.margin >= 0 ? "+" : "") + fmt_fixed(c.margin, digits) : "-";
    std::printf("%-52s %-16s %-14s %-10s %-10s\n", c.requirement.c_str(), lim.c_str(), meas.c_str(), margin.c_str(),
                c.result == "fail" ? "FAIL" : c.result.c_str());
    if (!c.detail.empty()) std::printf("    %s\n", c.detail.c_str());
  }
  std::cout << study::verdict_text(a) << " (sources: --json, or the requirements file)\n"
            << "A training and study result: settings are for qualified engineers to validate against plant models and the grid code.\n";
  return a.passed ? 0 : 3;
}

int record(const RecordArgs& args) {
  LoadResult r = load_scenario_file(args.scenario_file);
  if (!r.system) {
    for (const Issue& i : r.issues)
      std::cerr << args.scenario_file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
    return 2;
  }
  const std::unique_ptr<Engine> created = Engine::create(*r.system);
  Engine& e = *created;
  const double duration = r.system->def().duration_s, to = std::min(args.to_s, duration);
  if (args.from_s >= duration) {
    std::cerr << "droopline: --from " << fmt_num(args.from_s) << " lies at or after the end of the run (duration_s "
              << fmt_num(duration) << " s)\n";
    return 2;
  }
  if (!(args.from_s < to)) {
    std::cerr << "droopline: --from " << fmt_num(args.from_s) << " must lie before --to " << fmt_num(args.to_s) << "\n";
    return 2;
  }
  if (args.to_s < 1e300 && args.to_s > duration)
    std::cerr << "droopline: warning: --to " << fmt_num(args.to_s) << " lies after the end of the run: the record ends at "
              << fmt_num(duration) << " s (duration_s)\n";
  study::ComtradeInput in;
  in.station = r.system->def().name;
  in.columns = e.series_columns();
  in.sample_hz = 1.0 / r.system->def().output_every_s;
  in.nominal_hz = r.system->def().nominal_hz;
  in.start = args.start;
  std::vector<double> row(e.series_width());
  study::BatchObservers obs;
  obs.row = [&](const Engine& at) {
    const double t = at.time_s();
    if (t < args.from_s - 1e-9 || t > to + 1e-9) return;
    at.sample(row);
    in.rows.insert(in.rows.end(), row.begin(), row.end());
  };
  study::BatchOptions until_to;
  until_to.end_time_s = to;
  until_to.row_at_end = true;
  until_to.close_disturbances = false;
  study::run_batch(e, until_to, obs);
  in.trigger_s = args.from_s;
  for (const Disturbance& d : e.disturbances())
    if (d.at_s >= args.from_s) {
      in.trigger_s = d.at_s;
      break;
    }
  const study::ComtradeRecord rec = study::make_comtrade(in);
  if (!rec.error.empty()) {
    std::cerr << "droopline: " << rec.error << "\n";
    return 2;
  }
  std::error_code ec;
  fs::create_directories(args.out_dir, ec);
  AtomicFile cfg(fs::path(args.out_dir) / (args.name + ".cfg")), dat(fs::path(args.out_dir) / (args.name + ".dat"));
  if (ec || !cfg.ok() || !dat.ok()) {
    std::cerr << "droopline: cannot write in \"" << args.out_dir << "\"\n";
    return 1;
  }
  cfg.stream() << rec.cfg;
  dat.stream() << rec.dat;
  if (!dat.commit() || !cfg.commit()) {
    std::cerr << "droopline: writing the record in \"" << args.out_dir << "\" failed\n";
    return 1;
  }
  if (!args.quiet)
    std::cout << "droopline: wrote " << (fs::path(args.out_dir) / (args.name + ".cfg")).string() << " and .dat: "
              << in.columns.size() - 1 << " analog channels, " << in.rows.size() / in.columns.size() << " samples at "
              << fmt_num(in.sample_hz) << " Hz (IEEE C37.111-1999 ASCII)\n";
  return 0;
}

}  // namespace droopline::cli
