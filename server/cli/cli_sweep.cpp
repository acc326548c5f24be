#include "cli_sweep.hpp"

#include <algorithm>
#include <cmath>
#include <iostream>
#include <set>

#include <nlohmann/json.hpp>

#include "cli_files.hpp"
#include "droopline/ensemble.hpp"
#include "droopline/format.hpp"
#include "droopline/json_input.hpp"
#include "droopline/kernel_choice.hpp"
#include "droopline/scenario_io.hpp"

namespace droopline::cli {
namespace {

using json = nlohmann::ordered_json;
using study::SweepRow;

// Writes sweep.csv, sweep.json and (one or two fields) sweep.svg, each atomically.
int write_outputs(const std::string& out_dir, const json& doc, const std::vector<SweepRow>& rows, const std::string& metric) {
  std::vector<std::string> paths;
  std::vector<std::vector<double>> axes;
  for (const auto& v : doc["sweep"]["vary"]) {
    paths.push_back(v["path"].get<std::string>());
    axes.push_back(v["values"].get<std::vector<double>>());
  }
  std::error_code ec;
  fs::create_directories(out_dir, ec);
  AtomicFile csv(fs::path(out_dir) / "sweep.csv"), js(fs::path(out_dir) / "sweep.json");
  const std::string title = doc["sweep"].value("scenario", std::string("sweep")) + ": " + metric;
  const std::string svg = study::sweep_svg(paths, axes, rows, metric, title);
  std::optional<AtomicFile> plot;
  if (!svg.empty()) plot.emplace(fs::path(out_dir) / "sweep.svg");
  if (ec || !csv.ok() || !js.ok() || (plot && !plot->ok())) {
    std::cerr << "droopline: cannot write in \"" << out_dir << "\"\n";
    return 1;
  }
  csv.stream() << study::sweep_to_csv(paths, rows);
  js.stream() << to_text(doc);
  if (plot) plot->stream() << svg;
  if (!csv.commit() || !js.commit() || (plot && !plot->commit())) {
    std::cerr << "droopline: writing the results in \"" << out_dir << "\" failed (disk full?)\n";
    return 1;
  }
  return 0;
}

void print_extremes(const std::vector<SweepRow>& rows, const std::vector<std::string>& paths, const std::string& metric) {
  const auto& names = study::metric_names();
  const std::size_t mi = static_cast<std::size_t>(std::find(names.begin(), names.end(), metric) - names.begin());
  const SweepRow *lo = nullptr, *hi = nullptr;
  std::size_t invalid = 0;
  for (const SweepRow& r : rows) {
    if (r.status != "ok") ++invalid;
    if (r.status != "ok" || mi >= r.metrics.size() || !r.metrics[mi]) continue;
    if (!lo || *r.metrics[mi] < *lo->metrics[mi]) lo = &r;
    if (!hi || *r.metrics[mi] > *hi->metrics[mi]) hi = &r;
  }
  auto where = [&](const SweepRow& r) {
    std::string s;
    for (std::size_t k = 0; k < paths.size(); ++k) s += (k ? ", " : "") + paths[k] + " = " + fmt_num(r.values[k]);
    return s;
  };
  if (lo) std::cout << "  lowest  " << metric << " " << fmt_num(*lo->metrics[mi]) << " at " << where(*lo) << "\n";
  if (hi) std::cout << "  highest " << metric << " " << fmt_num(*hi->metrics[mi]) << " at " << where(*hi) << "\n";
  if (invalid) std::cout << "  " << invalid << " combination(s) invalid (see the error column)\n";
}

}  // namespace

int sweep(const SweepArgs& args) {
  const auto& names = study::metric_names();
  if (std::find(names.begin(), names.end(), args.metric) == names.end()) {
    std::string list;
    for (const auto& n : names) list += (list.empty() ? "" : ", ") + n;
    std::cerr << "droopline: --metric \"" << args.metric << "\": must be one of " << list << "\n";
    return 2;
  }
  LoadResult base = load_scenario_file(args.scenario_file);
  if (!base.system) {
    for (const Issue& i : base.issues)
      std::cerr << args.scenario_file << ": " << (i.warning ? "warning: " : "error: ") << i.text() << "\n";
    return 2;
  }
  study::SweepSpec spec;
  spec.scenario = scenario_to_json(base.system->def());  // defaults explicit: every field can be varied
  spec.sample = args.sample;
  spec.seed = args.seed;
  spec.shard = args.shard;
  spec.shards = args.shards;
  spec.threads = args.threads;
  spec.ensemble = args.ensemble;
  {
    std::string error;
    auto parsed = study::parse_varies(args.vary, error);
    if (!parsed) {
      std::cerr << "droopline: " << error << "\n";
      return 2;
    }
    spec.vary = std::move(*parsed);
  }
  std::string error;
  Progress progress(!args.quiet && ::isatty(STDERR_FILENO), "runs", "");
  const study::SweepResult res = study::run_sweep(spec, error, [&](std::uint64_t done, std::uint64_t total) {
    progress.update(static_cast<double>(done), static_cast<double>(total));
  });
  if (!error.empty()) {
    std::cerr << "droopline: " << error << "\n";
    return 2;
  }
  const json doc = study::sweep_to_json(spec, res);
  if (const int rc = write_outputs(args.out_dir, doc, res.rows, args.metric); rc != 0) return rc;
  if (!args.quiet) {
    std::cout << "droopline: " << res.rows.size() << " run(s) of \"" << base.system->def().name << "\"";
    if (spec.shards > 1) std::cout << " (shard " << spec.shard << "/" << spec.shards << " of " << res.selected << ")";
    else if (spec.sample) std::cout << " (a sample of " << res.grid_size << ")";
    std::cout << " on " << res.threads << " thread(s) in " << fmt_fixed(res.wall_s, 2) << " s; wrote " << args.out_dir << "/sweep.csv\n";
    std::cout << "droopline: ensemble_members " << res.ensemble_members << ", diverged_members " << res.diverged_members
              << ", fallback_members " << res.alone_members << " (" << Ensemble::lanes() << " lanes, "
              << kernels_in_use() << " kernels" << (spec.ensemble ? "" : ", ensemble off") << ")\n";
    std::vector<std::string> paths;
    for (const auto& v : spec.vary) paths.push_back(v.path);
    print_extremes(res.rows, paths, args.metric);
  }
  return 0;
}

int merge(const std::vector<std::string>& shard_dirs, const std::string& out_dir, const std::string& metric, bool quiet) {
  json first;
  std::vector<SweepRow> rows;
  std::set<std::uint32_t> shards_seen;
  json all = json::array();
  for (const std::string& dir : shard_dirs) {
    const std::string file = (fs::path(dir) / "sweep.json").string();
    std::vector<Issue> unread;
    const std::optional<std::string> text = read_text_file(file, unread);
    std::string bad = text ? "" : unread.front().text();
    const auto parsed = text ? parse_untrusted_json(*text, bad) : std::nullopt;
    const json doc = parsed ? *parsed : json(json::value_t::discarded);
    if (doc.is_discarded() || !doc.is_object() || !doc.contains("sweep")) {
      std::cerr << file << ": error: not a sweep result (" << (bad.empty() ? "missing, or no \"sweep\" object" : bad) << ")\n";
      return 2;
    }
    const json& meta = doc["sweep"];
    if (first.is_null()) {
      first = doc;
    } else if (meta.value("fingerprint", "") != first["sweep"].value("fingerprint", "") ||
               meta.value("shards", 0) != first["sweep"].value("shards", 0)) {
      std::cerr << file << ": error: a shard of a different sweep (fingerprint " << meta.value("fingerprint", "?") << ", "
                << meta.value("shards", 0) << " shards; the first has " << first["sweep"].value("fingerprint", "?") << ", "
                << first["sweep"].value("shards", 0) << ")\n";
      return 2;
    }
    const std::uint32_t shard = meta.value("shard", 0u);
    if (!shards_seen.insert(shard).second) {
      std::cerr << file << ": error: shard " << shard << " is given twice\n";
      return 2;
    }
    std::string error;
    if (!study::rows_from_json(doc, rows, error)) {
      std::cerr << file << ": error: " << error << "\n";
      return 2;
    }
    for (auto& r : doc["rows"]) all.push_back(std::move(r));
  }
  if (first.is_null()) {
    std::cerr << "droopline: merge needs at least one shard directory\n";
    return 2;
  }
  const std::uint32_t shards = first["sweep"].value("shards", 1u);
  std::string missing;
  for (std::uint32_t s = 1; s <= shards; ++s)
    if (!shards_seen.count(s)) missing += (missing.empty() ? "" : ", ") + std::to_string(s);
  if (!missing.empty()) {
    std::cerr << "droopline: error: shard(s) " << missing << " of " << shards << " missing\n";
    return 2;
  }
  std::sort(rows.begin(), rows.end(), [](const SweepRow& a, const SweepRow& b) { return a.index < b.index; });
  if (rows.size() != first["sweep"].value("selected", std::uint64_t{0}) ||
      std::adjacent_find(rows.begin(), rows.end(), [](const SweepRow& a, const SweepRow& b) { return a.index == b.index; }) !=
          rows.end()) {
    std::cerr << "droopline: error: the shards hold " << rows.size() << " rows, the sweep " << first["sweep"].value("selected", 0)
              << " (a shard was cut short or edited)\n";
    return 2;
  }
  json doc = first;
  doc["sweep"]["shard"] = 1;
  doc["sweep"]["shards"] = 1;
  doc["sweep"]["merged_from"] = shards;
  std::sort(all.begin(), all.end(), [](const json& a, const json& b) { return a["index"].get<std::uint64_t>() < b["index"].get<std::uint64_t>(); });
  doc["rows"] = std::move(all);
  if (const int rc = write_outputs(out_dir, doc, rows, metric); rc != 0) return rc;
  if (!quiet) {
    std::cout << "droopline: merged " << shards << " shard(s), " << rows.size() << " row(s), into " << out_dir << "/sweep.csv\n";
    std::vector<std::string> paths;
    for (const auto& v : doc["sweep"]["vary"]) paths.push_back(v["path"].get<std::string>());
    print_extremes(rows, paths, metric);
  }
  return 0;
}

}  // namespace droopline::cli
