#include "droopline/sweep.hpp"

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <cstdio>
#include <mutex>
#include <random>
#include <set>
#include <span>
#include <thread>

#include "droopline/batch.hpp"
#include "droopline/engine.hpp"
#include "droopline/ensemble.hpp"
#include "droopline/format.hpp"
#include "droopline/recording.hpp"
#include "droopline/scenario_io.hpp"
#include "sweep_run.hpp"

namespace droopline::study {
namespace {

using json = nlohmann::ordered_json;

std::string join_ids(const json& arr) {
  std::string out;
  int n = 0;
  for (const auto& e : arr) {
    if (!e.is_object() || !e.contains("id") || !e["id"].is_string()) continue;
    if (n == 6) return out + ", ...";
    out += (n++ ? ", " : "") + e["id"].get<std::string>();
  }
  return out;
}

// FNV-1a, 64 bit: a stable fingerprint across machines and builds.
std::uint64_t fnv1a(std::uint64_t h, const std::string& s) {
  for (unsigned char c : s) {
    h ^= c;
    h *= 1099511628211ULL;
  }
  return h;
}

}  // namespace

namespace sweep_detail {

std::optional<CheckedSystem> member_system(const SweepSpec& spec, std::uint64_t index,
                                           const std::vector<std::uint64_t>& strides, SweepRow& row) {
  row.index = index;
  json doc = spec.scenario;
  for (std::size_t k = 0; k < spec.vary.size(); ++k) {
    const auto& v = spec.vary[k].values;
    const double value = v[(index / strides[k]) % v.size()];
    row.values.push_back(value);
    std::string err;
    set_path(doc, spec.vary[k].path, value, err);  // resolved on the base already
  }
  LoadResult loaded = parse_scenario(doc.dump());
  if (!loaded.system) {
    row.status = "invalid";
    for (const Issue& i : loaded.issues) {
      if (i.warning) continue;
      row.error += (row.error.empty() ? "" : "; ") + i.text();
    }
  }
  return std::move(loaded.system);
}

void Extremes::sample(const Engine& at) {
  for (std::uint32_t a = 0; a < at.def().areas.size(); ++a) {
    const AreaState s = at.area(AreaId{a});
    if (s.collapsed) continue;
    lowest = std::min(lowest, s.f_hz);
    highest = std::max(highest, s.f_hz);
  }
}

void finish_row(const Engine& e, Extremes ex, SweepRow& row) {
  const SystemDef& def = e.def();
  double lowest = ex.lowest, highest = ex.highest;
  row.status = "ok";
  row.metrics.assign(m_count, std::nullopt);
  const auto& ds = e.disturbances();
  row.metrics[m_disturbances] = static_cast<double>(ds.size());
  const Disturbance* worst = nullptr;
  double worst_dev = -1.0;
  for (const Disturbance& d : ds) {
    if (!d.nadir_hz) continue;
    if (d.zenith)
      highest = std::max(highest, *d.nadir_hz);  // extremes between two samples
    else
      lowest = std::min(lowest, *d.nadir_hz);
    const double dev = std::abs(*d.nadir_hz - d.pre_hz);
    if (dev > worst_dev) {
      worst_dev = dev;
      worst = &d;
    }
  }
  if (worst) {
    row.worst_cause = describe_cause(def, *worst);
    row.metrics[m_delta] = worst->delta_mw;
    row.metrics[m_rocof] = worst->rocof_hz_per_s;
    row.metrics[m_nadir] = worst->nadir_hz;
    if (worst->nadir_at_s) row.metrics[m_nadir_after] = *worst->nadir_at_s - worst->at_s;
    row.metrics[m_settling] = worst->settling_hz;
    row.metrics[m_response] = worst->response_mw_per_0p1hz;
  }
  if (std::isfinite(lowest)) row.metrics[m_lowest] = lowest;
  if (std::isfinite(highest)) row.metrics[m_highest] = highest;
  double shed = 0.0, final_min = INFINITY;
  for (std::uint32_t a = 0; a < def.areas.size(); ++a) {
    const AreaState s = e.area(AreaId{a});
    shed += s.shed_mw;
    if (!s.collapsed) final_min = std::min(final_min, s.f_hz);
  }
  row.metrics[m_shed] = shed;
  double tripped = 0;
  for (std::uint32_t u = 0; u < def.units.size(); ++u) tripped += e.unit(UnitId{u}).status == UnitStatus::tripped;
  row.metrics[m_tripped] = tripped;
  if (std::isfinite(final_min)) row.metrics[m_final_min] = final_min;
}

void run_alone(Engine& e, SweepRow& row) {
  Extremes ex;
  BatchObservers obs;
  obs.row = [&ex](const Engine& at) { ex.sample(at); };
  BatchOptions to_end;
  to_end.row_at_end = true;
  run_batch(e, to_end, obs);
  finish_row(e, ex, row);
  row.path = "alone";
}

}  // namespace sweep_detail

namespace {

SweepRow run_one(const SweepSpec& spec, std::uint64_t index, const std::vector<std::uint64_t>& strides) {
  SweepRow row;
  const std::optional<CheckedSystem> system = sweep_detail::member_system(spec, index, strides, row);
  if (!system) return row;
  const std::unique_ptr<Engine> engine = Engine::create(*system);
  sweep_detail::run_alone(*engine, row);
  return row;
}

}  // namespace

const std::vector<std::string>& metric_names() {
  static const std::vector<std::string> names{
      "disturbances", "delta_mw", "rocof_hz_per_s", "nadir_hz", "nadir_after_s", "settling_hz",
      "response_mw_per_0p1hz", "lowest_hz", "highest_hz", "shed_mw", "units_tripped", "final_min_hz"};
  return names;
}

std::optional<Vary> parse_vary(const std::string& spec, std::string& error, std::size_t max_values) {
  const auto eq = spec.find('=');
  if (eq == std::string::npos || eq == 0 || eq + 1 == spec.size()) {
    error = "--vary \"" + spec + "\": expected PATH=V1,V2,... or PATH=START:STOP:STEP";
    return std::nullopt;
  }
  Vary v;
  v.path = spec.substr(0, eq);
  const std::string values = spec.substr(eq + 1);
  auto bad = [&](const std::string& what) {
    error = "--vary " + v.path + ": " + what;
    return std::nullopt;
  };
  if (values.find(':') != std::string::npos) {
    double a[3];
    std::size_t start = 0;
    for (int i = 0; i < 3; ++i) {
      const std::size_t end = i < 2 ? values.find(':', start) : values.size();
      if (end == std::string::npos || !detail::parse_number(values.substr(start, end - start), a[i]))
        return bad("\"" + values + "\" is not START:STOP:STEP with three numbers");
      start = end + 1;
    }
    if (!(a[2] > 0.0)) return bad("STEP must be > 0, got " + fmt_num(a[2]));
    if (a[1] < a[0]) return bad("STOP " + fmt_num(a[1]) + " is below START " + fmt_num(a[0]));
    const double count = std::floor((a[1] - a[0]) / a[2] + 1e-9) + 1.0;
    if (count > static_cast<double>(max_values))
      return bad(fmt_num(count) + " values, more than the " + fmt_num(static_cast<double>(max_values)) +
                 (max_values < kMaxVaryValues ? " left of a sweep's " + fmt_num(static_cast<double>(kMaxVaryValues))
                                              : std::string()));
    for (std::int64_t i = 0; i < static_cast<std::int64_t>(count); ++i)
      v.values.push_back(a[0] + static_cast<double>(i) * a[2]);  // no accumulated rounding
  } else {
    std::size_t start = 0;
    while (start <= values.size()) {
      std::size_t end = values.find(',', start);
      if (end == std::string::npos) end = values.size();
      double x;
      if (!detail::parse_number(values.substr(start, end - start), x))
        return bad("\"" + values.substr(start, end - start) + "\" is not a number");
      v.values.push_back(x);
      if (v.values.size() > max_values)
        return bad("more than the " + fmt_num(static_cast<double>(max_values)) + " values " +
                   (max_values < kMaxVaryValues ? "left of a sweep's " + fmt_num(static_cast<double>(kMaxVaryValues))
                                                : std::string("a field may take")));
      start = end + 1;
    }
  }
  std::set<double> distinct(v.values.begin(), v.values.end());
  if (distinct.size() != v.values.size()) return bad("a value is listed twice");
  return v;
}

std::optional<std::vector<Vary>> parse_varies(const std::vector<std::string>& specs, std::string& error) {
  if (specs.size() > kMaxVaried) {
    error = std::to_string(specs.size()) + " fields varied, at most " + std::to_string(kMaxVaried);
    return std::nullopt;
  }
  std::vector<Vary> out;
  std::size_t used = 0;
  for (const std::string& s : specs) {
    auto v = parse_vary(s, error, kMaxVaryValues - used);
    if (!v) return std::nullopt;
    used += v->values.size();
    out.push_back(std::move(*v));
  }
  return out;
}

std::string check_vary_paths(const json& scenario, const std::vector<Vary>& vary) {
  // Each path set to a value nothing else holds: where the scenario then differs is the field it
  // names, whatever selector reached it.
  std::vector<std::string> fields;
  for (const Vary& v : vary) {
    json probe = scenario;
    std::string error;
    if (!set_path(probe, v.path, -1.2345678912345e300, error)) return "--vary " + error;
    const json diff = json::diff(scenario, probe);
    fields.push_back(diff.empty() ? v.path : diff[0]["path"].get<std::string>());
    for (std::size_t k = 0; k + 1 < fields.size(); ++k)
      if (fields[k] == fields.back())
        return "--vary " + v.path + ": the same field as --vary " + vary[k].path + " (" + fields.back() +
               "); vary each field once";
  }
  return "";
}

bool set_path(json& scenario, const std::string& path, double value, std::string& error) {
  json* node = &scenario;
  std::string walked;
  std::size_t i = 0;
  auto fail = [&](const std::string& what) {
    error = path + ": " + what;
    return false;
  };
  while (i < path.size()) {
    std::size_t end = path.find_first_of(".[", i);
    const std::string key = path.substr(i, end == std::string::npos ? std::string::npos : end - i);
    if (key.empty()) return fail("empty name after \"" + walked + "\"");
    if (!node->is_object()) return fail("\"" + walked + "\" is not an object");
    walked += (walked.empty() ? "" : ".") + key;
    i = end == std::string::npos ? path.size() : end;
    const bool last = i == path.size();
    if (last) {
      if (!node->contains(key)) {
        std::string fields;
        for (auto it = node->begin(); it != node->end(); ++it)
          if (it.value().is_number()) fields += (fields.empty() ? "" : ", ") + it.key();
        return fail("no number \"" + walked + "\" in the scenario" + (fields.empty() ? "" : " (numbers here: " + fields + ")"));
      }
      if (!(*node)[key].is_number()) return fail("\"" + walked + "\" is not a number in the scenario");
      (*node)[key] = value;
      return true;
    }
    if (!node->contains(key)) return fail("no field \"" + walked + "\" in the scenario");
    node = &(*node)[key];
    while (i < path.size() && path[i] == '[') {
      const std::size_t close = path.find(']', i);
      if (close == std::string::npos) return fail("unclosed [");
      const std::string sel = path.substr(i + 1, close - i - 1);
      if (!node->is_array()) return fail("\"" + walked + "\" is not a list");
      json* found = nullptr;
      for (auto& el : *node)
        if (el.is_object() && el.contains("id") && el["id"].is_string() && el["id"].get<std::string>() == sel) found = &el;
      if (!found && !sel.empty() && sel.find_first_not_of("0123456789") == std::string::npos) {
        const std::size_t k = std::stoul(sel);
        if (k < node->size()) found = &(*node)[k];
      }
      if (!found) {
        const std::string ids = join_ids(*node);
        return fail("no element \"" + sel + "\" in " + walked + " (" + std::to_string(node->size()) + " element(s)" +
                    (ids.empty() ? "" : ": " + ids) + ")");
      }
      walked += "[" + sel + "]";
      node = found;
      i = close + 1;
    }
    if (i < path.size()) {
      if (path[i] != '.') return fail("expected . after \"" + walked + "\"");
      ++i;
      if (i == path.size()) return fail("ends with .");
    } else {
      return fail("\"" + walked + "\" names an element, not a number");
    }
  }
  return fail("empty path");
}

std::vector<std::uint64_t> selected_indices(const SweepSpec& spec, std::uint64_t grid_size) {
  std::vector<std::uint64_t> out;
  if (!spec.sample || *spec.sample >= grid_size) {
    out.resize(grid_size);
    for (std::uint64_t i = 0; i < grid_size; ++i) out[i] = i;
    return out;
  }
  // Floyd's algorithm on the raw 64-bit generator (specified by the standard, so every machine
  // draws the same sample for the same seed; the modulo bias is below 1e-12 for any real grid).
  std::mt19937_64 rng(spec.seed);
  std::set<std::uint64_t> chosen;
  for (std::uint64_t j = grid_size - *spec.sample; j < grid_size; ++j) {
    const std::uint64_t t = rng() % (j + 1);
    if (!chosen.insert(t).second) chosen.insert(j);
  }
  out.assign(chosen.begin(), chosen.end());
  return out;
}

std::string sweep_fingerprint(const SweepSpec& spec) {
  std::uint64_t h = 1469598103934665603ULL;
  h = fnv1a(h, spec.scenario.dump());
  for (const Vary& v : spec.vary) {
    h = fnv1a(h, "|" + v.path + "=");
    for (double x : v.values) h = fnv1a(h, fmt_exact(x) + ",");
  }
  h = fnv1a(h, spec.sample ? "|sample=" + std::to_string(*spec.sample) + "|seed=" + std::to_string(spec.seed) : "|grid");
  char buf[24];
  std::snprintf(buf, sizeof buf, "%016llx", static_cast<unsigned long long>(h));
  return buf;
}

SweepResult run_sweep(const SweepSpec& spec, std::string& error,
                      const std::function<void(std::uint64_t, std::uint64_t)>& progress, const std::atomic<bool>* cancel) {
  SweepResult res;
  if (spec.vary.empty()) {
    error = "nothing to vary: give at least one --vary PATH=VALUES";
    return res;
  }
  if (spec.shards < 1 || spec.shard < 1 || spec.shard > spec.shards) {
    error = "--shard " + std::to_string(spec.shard) + "/" + std::to_string(spec.shards) + ": I must lie within 1..N";
    return res;
  }
  if (error = check_vary_paths(spec.scenario, spec.vary); !error.empty()) return res;
  std::uint64_t grid = 1;
  std::vector<std::uint64_t> strides(spec.vary.size());
  for (std::size_t k = spec.vary.size(); k-- > 0;) {
    strides[k] = grid;
    grid *= spec.vary[k].values.size();
    if (grid > (1ULL << 40)) {
      error = "the grid has more than 2^40 combinations; use --sample N";
      return res;
    }
  }
  if (!spec.sample && grid > kMaxGridRuns) {
    error = "the grid has " + std::to_string(grid) + " combinations, more than the " + std::to_string(kMaxGridRuns) +
            " a sweep runs whole; use --sample N (or fewer values)";
    return res;
  }
  res.grid_size = grid;
  res.fingerprint = sweep_fingerprint(spec);
  const std::vector<std::uint64_t> all = selected_indices(spec, grid);
  res.selected = all.size();
  std::vector<std::uint64_t> mine;
  for (std::size_t p = 0; p < all.size(); ++p)
    if (p % spec.shards == spec.shard - 1) mine.push_back(all[p]);

  res.threads = spec.threads ? spec.threads : std::max(1u, std::thread::hardware_concurrency());
  res.threads = static_cast<unsigned>(std::min<std::size_t>(res.threads, std::max<std::size_t>(1, mine.size())));
  res.rows.resize(mine.size());
  std::atomic<std::size_t> next{0}, done{0};
  // The caller's thread reports progress every 200 ms and wakes as soon as the last run is done (a
  // plain sleep kept a sweep of 0.1 s waiting for 0.2 s).
  std::mutex finished_mutex;
  std::condition_variable finished;
  auto count_done = [&](std::size_t n) {
    if (done.fetch_add(n) + n < mine.size()) return;
    std::lock_guard lock(finished_mutex);
    finished.notify_all();
  };
  // Runs go in groups of consecutive combinations, stepped together when the ensemble is on (one
  // member per lane, sweep_ensemble.cpp), else one by one; either way every row is its one run's.
  const std::size_t group = spec.ensemble ? std::max<std::size_t>(1, Ensemble::lanes()) : 1;
  const auto t0 = std::chrono::steady_clock::now();
  {
    // The pool: each worker takes the next group; every row has one writer.
    std::vector<std::jthread> workers;
    for (unsigned w = 0; w < res.threads; ++w)
      workers.emplace_back([&] {
        for (std::size_t i; (i = next.fetch_add(group)) < mine.size();) {
          const std::size_t end = std::min(mine.size(), i + group);
          if (cancel && cancel->load()) {
            count_done(end - i);
            continue;  // leaves the rows empty
          }
          if (group == 1)
            res.rows[i] = run_one(spec, mine[i], strides);
          else
            sweep_detail::run_group(spec, std::span(mine).subspan(i, end - i), strides, &res.rows[i]);
          count_done(end - i);
        }
      });
    while (progress && done.load() < mine.size()) {
      progress(done.load(), mine.size());
      std::unique_lock lock(finished_mutex);
      finished.wait_for(lock, std::chrono::milliseconds(200), [&] { return done.load() >= mine.size(); });
    }
  }
  res.wall_s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  for (const SweepRow& row : res.rows) {
    if (row.path == "ensemble") ++res.ensemble_members;
    else if (row.path == "diverged") ++res.diverged_members;
    else if (row.path == "alone") ++res.alone_members;
  }
  if (cancel && cancel->load()) {
    res.cancelled = true;
    std::erase_if(res.rows, [](const SweepRow& r) { return r.status.empty(); });
  }
  return res;
}

json sweep_to_json(const SweepSpec& spec, const SweepResult& r) {
  json meta;
  meta["scenario"] = spec.scenario.value("name", "");
  meta["fingerprint"] = r.fingerprint;
  meta["vary"] = json::array();
  for (const Vary& v : spec.vary) meta["vary"].push_back({{"path", v.path}, {"values", v.values}});
  meta["grid_size"] = r.grid_size;
  meta["selected"] = r.selected;
  if (spec.sample) {
    meta["sample"] = *spec.sample;
    meta["seed"] = spec.seed;
  }
  meta["shard"] = spec.shard;
  meta["shards"] = spec.shards;
  meta["metrics"] = metric_names();
  json rows = json::array();
  for (const SweepRow& row : r.rows) {
    json j{{"index", row.index}, {"values", row.values}, {"status", row.status}};
    if (!row.error.empty()) j["error"] = row.error;
    if (!row.metrics.empty()) {
      json m = json::object();
      for (std::size_t k = 0; k < row.metrics.size(); ++k)
        m[metric_names()[k]] = row.metrics[k] ? json(*row.metrics[k]) : json(nullptr);
      j["metrics"] = std::move(m);
      j["worst_cause"] = row.worst_cause;
    }
    rows.push_back(std::move(j));
  }
  return json{{"sweep", meta}, {"rows", rows}};
}

bool rows_from_json(const json& doc, std::vector<SweepRow>& rows, std::string& error) {
  try {
    for (const auto& j : doc.at("rows")) {
      SweepRow row;
      row.index = j.at("index").get<std::uint64_t>();
      row.values = j.at("values").get<std::vector<double>>();
      row.status = j.at("status").get<std::string>();
      row.error = j.value("error", "");
      row.worst_cause = j.value("worst_cause", "");
      if (j.contains("metrics"))
        for (const std::string& name : metric_names()) {
          const auto& m = j["metrics"];
          row.metrics.push_back(m.contains(name) && m[name].is_number() ? std::optional<double>(m[name].get<double>())
                                                                        : std::nullopt);
        }
      rows.push_back(std::move(row));
    }
  } catch (const std::exception& ex) {
    error = std::string("not a sweep result: ") + ex.what();
    return false;
  }
  return true;
}

std::string sweep_to_csv(const std::vector<std::string>& paths, const std::vector<SweepRow>& rows) {
  auto quote = [](const std::string& s) {
    if (s.find_first_of(",\"\n") == std::string::npos) return s;
    std::string q = "\"";
    for (char c : s) q += c == '"' ? std::string("\"\"") : std::string(1, c);
    return q + "\"";
  };
  std::string out = "index";
  for (const auto& p : paths) out += "," + quote(p);
  out += ",status";
  for (const auto& m : metric_names()) out += "," + m;
  out += ",worst_cause,error\n";
  for (const SweepRow& r : rows) {
    out += std::to_string(r.index);
    for (double v : r.values) {
      out += ',';
      append_exact(out, v);
    }
    out += "," + r.status;
    for (std::size_t k = 0; k < metric_names().size(); ++k) {
      out += ',';
      if (k < r.metrics.size() && r.metrics[k]) append_exact(out, *r.metrics[k]);
    }
    out += "," + quote(r.worst_cause) + "," + quote(r.error) + "\n";
  }
  return out;
}

}  // namespace droopline::study
