// `droopline playback`, `droopline fit` and `droopline inject`: a unit model against a recording,
// fitted to it, and against injected test deviations.
#include "cli_validation.hpp"

#include <algorithm>
#include <cstdio>
#include <fstream>
#include <iostream>
#include <optional>
#include <sstream>

#include "cli_files.hpp"
#include "droopline/fit.hpp"
#include "droopline/format.hpp"
#include "droopline/inject.hpp"
#include "droopline/playback.hpp"
#include "droopline/recording.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::cli {
namespace {

using json = nlohmann::ordered_json;

std::optional<SystemDef> load(const std::string& file) {
  LoadResult r = load_scenario_file(file);
  if (!r.system) {
    for (const Issue& i : r.issues)
      std::cerr << file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
    return std::nullopt;
  }
  return r.system->def();
}

// The recording of `units` from `path`: droopline's own column names unless others are given.
std::optional<study::Recording> read_for(const SystemDef& def, const std::vector<std::string>& units,
                                         const std::string& path, const RecordingArgs& a) {
  std::string error;
  if (!study::playback_scenario(def, units, def.duration_s, error)) {  // the units named exist
    std::cerr << "droopline: error: " << error << "\n";
    return std::nullopt;
  }
  study::RecordingOptions o;
  o.time_column = a.time_column;
  o.frequency_column = a.frequency_column;
  o.power_columns = a.power_columns;
  o = study::default_columns(def, units, std::move(o));
  if (a.base_mw > 0.0 || a.base_hz > 0.0) {
    o.units = study::RecordingUnits::per_unit;
    o.base_mw = a.base_mw;
    o.base_hz = a.base_hz;
  }
  std::vector<Issue> issues;
  auto rec = study::read_recording(path, o, issues);
  for (const Issue& i : issues) std::cerr << "droopline: " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
  return rec;
}

// Writes each (name, text) into `dir` atomically; all or nothing is reported.
int write_files(const std::string& dir, const std::vector<std::pair<std::string, std::string>>& files) {
  if (dir.empty()) return 0;
  std::error_code ec;
  fs::create_directories(dir, ec);
  std::vector<std::unique_ptr<AtomicFile>> out;
  for (const auto& [name, text] : files) {
    out.push_back(std::make_unique<AtomicFile>(fs::path(dir) / name));
    if (!out.back()->ok()) {
      std::cerr << "droopline: cannot write in \"" << dir << "\"\n";
      return 1;
    }
    out.back()->stream() << text;
  }
  for (auto& f : out)
    if (!f->commit()) {
      std::cerr << "droopline: writing the results in \"" << dir << "\" failed (disk full?)\n";
      return 1;
    }
  return 0;
}

std::string opt_mw(const std::optional<double>& v) { return v ? fmt_fixed(*v, 2) : std::string("-"); }

}  // namespace

int playback(const PlaybackArgs& args) {
  const auto def = load(args.scenario_file);
  if (!def) return 2;
  auto rec = read_for(*def, args.units, args.rec.measured, args.rec);
  if (!rec) return 2;
  study::PlaybackSpec spec;
  spec.def = *def;
  spec.units = args.units;
  spec.recording = std::move(*rec);
  if (args.threshold_hz > 0.0) spec.threshold_hz = args.threshold_hz;
  std::string error;
  const auto r = study::run_playback(spec, error);
  if (!r) {
    std::cerr << "droopline: error: " << error << "\n";
    return 2;
  }
  if (const int rc = write_files(args.out_dir, {{"playback.csv", study::playback_csv(*r, args.units)},
                                                {"playback.json", to_text(study::playback_to_json(*r)) + "\n"},
                                                {"playback_time.svg", study::playback_time_svg(*r)},
                                                {"playback_droop.svg", study::playback_droop_svg(*r)}});
      rc != 0)
    return rc;
  if (args.json) {
    std::cout << to_text(study::playback_to_json(*r)) << "\n";
    return 0;
  }
  std::cout << "droopline: playback of " << r->t_s.size() << " samples into " << args.units.size()
            << " unit(s); excursions beyond " << fmt_num(r->threshold_hz * 1000) << " mHz\n";
  for (const study::UnitFit& u : r->units) {
    std::cout << u.unit << ": RMSE " << fmt_num(u.rmse_mw) << " MW, largest error " << fmt_num(u.max_error_mw)
              << " MW at " << fmt_num(u.max_error_at_s) << " s\n";
    for (const study::Excursion& x : u.excursions)
      std::cout << "  excursion at " << fmt_num(x.at_s) << " s (" << fmt_num(x.df_hz * 1000) << " mHz): +10 s measured "
                << opt_mw(x.measured_10s_mw) << " MW, simulated " << opt_mw(x.simulated_10s_mw)
                << " MW; +30 s measured " << opt_mw(x.measured_30s_mw) << " MW, simulated "
                << opt_mw(x.simulated_30s_mw) << " MW\n";
  }
  for (const std::string& w : r->warnings) std::cout << "warning: " << w << "\n";
  if (!args.out_dir.empty()) std::cout << "wrote " << args.out_dir << "/playback.csv, playback.json, playback_*.svg\n";
  return 0;
}

int fit(const FitArgs& args) {
  const auto def = load(args.scenario_file);
  if (!def) return 2;
  if (args.units.size() > 1 && args.recordings.size() > 1 && args.units.size() != args.recordings.size()) {
    std::cerr << "droopline: error: " << args.units.size() << " units and " << args.recordings.size()
              << " recordings: give one of each, several of one, or as many of both (paired in order)\n";
    return 2;
  }
  std::vector<study::FitParam> params;
  for (const std::string& p : args.params) {
    std::string error;
    auto fp = study::parse_fit_param(p, error);
    if (!fp) {
      std::cerr << "droopline: error: " << error << "\n";
      return 2;
    }
    if (std::any_of(params.begin(), params.end(), [&](const study::FitParam& q) { return q.path == fp->path; })) {
      std::cerr << "droopline: error: --param " << fp->path << " is given twice: fit each parameter once\n";
      return 2;
    }
    params.push_back(*fp);
  }
  const std::size_t count = std::max(args.units.size(), args.recordings.size());
  std::vector<study::FitSpec> specs;
  std::vector<std::string> names;
  bool bad = false;
  for (std::size_t k = 0; k < count; ++k) {
    if (k % args.shards != args.shard - 1) continue;  // this shard's fits only
    const std::string unit = args.units[args.units.size() > 1 ? k : 0];
    const std::string path = args.recordings[args.recordings.size() > 1 ? k : 0];
    RecordingArgs ra = args.rec;
    ra.power_columns.clear();
    if (!args.rec.power_columns.empty())
      ra.power_columns = {args.rec.power_columns[std::min(k, args.rec.power_columns.size() - 1)]};
    auto rec = read_for(*def, {unit}, path, ra);
    if (!rec) {
      bad = true;
      continue;
    }
    study::FitSpec s;
    s.playback.def = *def;
    s.playback.units = {unit};
    s.playback.recording = std::move(*rec);
    s.params = params;
    s.starts = args.starts;
    s.seed = args.seed;
    std::string error;
    if (!study::check_fit(s, error)) {
      std::cerr << "droopline: error: fit of " << unit << " on " << path << ":\n  ";
      for (char c : error) std::cerr << c << (c == '\n' ? "  " : "");
      std::cerr << "\n";
      bad = true;
      continue;
    }
    specs.push_back(std::move(s));
    names.push_back(count > 1 ? unit + "_" + std::to_string(k + 1) : unit);
  }
  if (bad) return 2;
  std::vector<std::string> errors;
  const auto results = study::run_fits(specs, args.threads, errors);
  json all = json::array();
  std::vector<std::pair<std::string, std::string>> files;
  for (std::size_t j = 0; j < results.size(); ++j) {
    if (!results[j]) {
      std::cerr << "droopline: error: " << errors[j] << "\n";
      return 2;
    }
    const study::FitResult& r = *results[j];
    json doc = study::fit_to_json(r);
    files.push_back({"fit_" + names[j] + ".json", to_text(doc) + "\n"});
    files.push_back({"fit_" + names[j] + ".fragment.json", to_text(r.fragment) + "\n"});
    files.push_back({"fit_" + names[j] + ".svg", study::fit_svg(r)});
    all.push_back(std::move(doc));
    if (args.json) continue;
    std::cout << "fit of " << r.unit << " (" << r.samples << " samples, " << r.evaluations << " runs):\n";
    for (std::size_t k = 0; k < r.paths.size(); ++k)
      std::printf("  %-28s %12s +- %-10s (was %s)\n", r.paths[k].c_str(), fmt_num(r.values[k]).c_str(),
                  std::isfinite(r.sigma[k]) ? fmt_num(r.sigma[k]).c_str() : "?", fmt_num(r.initial[k]).c_str());
    std::cout << "  RMSE " << fmt_num(r.rmse_before_mw) << " MW -> " << fmt_num(r.rmse_after_mw) << " MW, R^2 "
              << fmt_fixed(r.r2_before, 4) << " -> " << fmt_fixed(r.r2_after, 4) << "\n";
    for (const std::string& w : r.warnings) std::cout << "  warning: " << w << "\n";
  }
  if (const int rc = write_files(args.out_dir, files); rc != 0) return rc;
  if (args.json) {
    std::cout << to_text(all.size() == 1 ? all[0] : json{{"fits", all}}) << "\n";
  } else {
    std::cout << "A fitted model is a study result, not a plant setting.\n";
    if (!args.out_dir.empty()) std::cout << "wrote " << args.out_dir << "/fit_*.json, fit_*.fragment.json, fit_*.svg\n";
  }
  return 0;
}

int inject(const InjectArgs& args) {
  const auto def = load(args.scenario_file);
  if (!def) return 2;
  std::vector<Issue> issues;
  const auto text = read_text_file(args.profile, issues);
  const auto profile = text ? study::parse_inject_profile(*text, issues) : std::nullopt;
  if (!profile) {
    for (const Issue& i : issues) std::cerr << args.profile << ": error: " << i.text() << "\n";
    return 2;
  }
  std::string error;
  const auto out = study::run_injection(*def, args.unit, *profile, error);
  if (!out) {
    std::cerr << "droopline: error: " << error << "\n";
    return 2;
  }
  bool passed = true;
  std::vector<std::pair<std::string, std::string>> files{{"inject.json", to_text(study::inject_to_json(*out)) + "\n"}};
  for (std::size_t i = 0; i < out->size(); ++i) {
    passed = passed && (*out)[i].passed;
    files.push_back({"inject_" + std::to_string(i + 1) + ".svg", study::inject_svg((*out)[i])});
  }
  if (const int rc = write_files(args.out_dir, files); rc != 0) return rc;
  if (args.json) {
    std::cout << to_text(study::inject_to_json(*out)) << "\n";
  } else {
    std::cout << "droopline: injection tests \"" << profile->name << "\" on " << args.unit << "\n"
              << study::inject_table(*out);
    if (!profile->note.empty()) std::cout << "note: " << profile->note << "\n";
    if (!args.out_dir.empty()) std::cout << "wrote " << args.out_dir << "/inject.json, inject_N.svg\n";
  }
  return passed ? 0 : 3;
}

}  // namespace droopline::cli
