#pragma once
/// Parameter sweeps: many runs of one scenario, each with some numeric fields changed, reduced to
/// one row of disturbance metrics per combination. Runs go in parallel, one engine per run and
/// nothing mutable shared; a deterministic shard of the combinations can run on each machine
/// and the shards be merged afterwards.
#include <atomic>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

namespace droopline::study {

/// One varied field: a path into the scenario file and the values it takes.
///
/// Paths name fields as they appear in the file: `units[V1].governor.droop`,
/// `ties[osk_dre].pmax_mw`, `areas[oskany].demand_mw`, `events[0].mw`, `step_s`. An array
/// element is chosen by its `id`, or by its index when it has none or the selector is a number.
struct Vary {
  std::string path;
  std::vector<double> values;
};

/// Parses `PATH=V1,V2,...` or `PATH=START:STOP:STEP` (STOP included when the steps reach it), of
/// at most `max_values` values (a range is counted before it is expanded). Returns nullopt with
/// `error` set when malformed.
std::optional<Vary> parse_vary(const std::string& spec, std::string& error, std::size_t max_values = 1000000);

/// At most this many varied fields in a sweep, with at most this many values over all of them
/// (every value is held before the first run), and without a sample at most this many runs.
inline constexpr std::size_t kMaxVaried = 16;
inline constexpr std::size_t kMaxVaryValues = 1000000;
inline constexpr std::uint64_t kMaxGridRuns = 10000000;

/// Parses every `PATH=VALUES` of a sweep within those limits: nullopt with `error` on the first problem.
std::optional<std::vector<Vary>> parse_varies(const std::vector<std::string>& specs, std::string& error);

/// "" when every path names a number of `scenario` and no two name the same one (`units[V1]` and
/// `units[0]` may be one unit); else the problem, naming the paths.
std::string check_vary_paths(const nlohmann::ordered_json& scenario, const std::vector<Vary>& vary);

/// Sets the field a path names; false with `error` saying which part did not resolve.
bool set_path(nlohmann::ordered_json& scenario, const std::string& path, double value, std::string& error);

/// The names of the metric columns, in order (see README, "Parameter sweeps").
const std::vector<std::string>& metric_names();

struct SweepSpec {
  nlohmann::ordered_json scenario;  ///< the base scenario as read from its file
  std::vector<Vary> vary;
  std::optional<std::uint64_t> sample;  ///< a random sample of this many combinations, else the full grid
  std::uint64_t seed = 1;
  std::uint32_t shard = 1, shards = 1;  ///< this is shard `shard` of `shards` (1-based)
  unsigned threads = 0;                 ///< 0 = one per core
  /// Step runs of one structure together, one per SIMD lane (droopline/ensemble.hpp); the rows
  /// are the same bits either way (`--no-ensemble` turns it off for comparison).
  bool ensemble = true;
};

/// One run's outcome.
struct SweepRow {
  std::uint64_t index = 0;      ///< position in the full grid (last varied field fastest)
  std::vector<double> values;   ///< one per varied field
  std::string status;           ///< `ok`, `invalid` (the combination fails validation)
  std::string error;            ///< why, when not ok
  std::vector<std::optional<double>> metrics;  ///< metric_names() order; empty when not reached
  std::string worst_cause;      ///< the disturbance the metrics describe
  /// How the run went (kept in memory, not written): `ensemble` (in the lanes from start to
  /// end), `diverged` (left them on a structural change of its own, then went on alone),
  /// `alone` (its structure differed, or the ensemble was off); empty for an invalid row.
  std::string path;
};

struct SweepResult {
  std::uint64_t grid_size = 0;  ///< combinations in the full grid
  std::uint64_t selected = 0;   ///< combinations in the sweep (grid or sample), all shards
  std::string fingerprint;      ///< identifies scenario + vary + sample + seed (for merging shards)
  std::vector<SweepRow> rows;   ///< this shard's rows, by index
  double wall_s = 0.0;
  unsigned threads = 1;
  bool cancelled = false;
  std::uint64_t ensemble_members = 0;  ///< rows whose run stayed in an ensemble's lanes to the end
  std::uint64_t diverged_members = 0;  ///< rows whose run left the lanes part-way and ended alone
  std::uint64_t alone_members = 0;     ///< rows run alone from the start (fell back, or ensemble off)
};

/// The combinations of the sweep, all shards together, as grid indices in ascending order.
std::vector<std::uint64_t> selected_indices(const SweepSpec& spec, std::uint64_t grid_size);
/// Fingerprint of what makes two shards parts of the same sweep.
std::string sweep_fingerprint(const SweepSpec& spec);

/// Validates the spec (every path resolves on the base scenario, the grid is not empty) and
/// runs this shard. `progress(done, total)` is called from the calling thread now and then.
/// Errors in the spec come back in `error` with nothing run. When `cancel` turns true the
/// workers take no new combination; the rows not run are dropped and `cancelled` is set.
SweepResult run_sweep(const SweepSpec& spec, std::string& error,
                      const std::function<void(std::uint64_t, std::uint64_t)>& progress = {},
                      const std::atomic<bool>* cancel = nullptr);

/// The result as JSON (`sweep`: meta, `rows`) and CSV text, and back from JSON (for merging).
nlohmann::ordered_json sweep_to_json(const SweepSpec& spec, const SweepResult& result);
std::string sweep_to_csv(const std::vector<std::string>& paths, const std::vector<SweepRow>& rows);
bool rows_from_json(const nlohmann::ordered_json& doc, std::vector<SweepRow>& rows, std::string& error);

/// An SVG plot of one metric against one varied field (a line) or two (a heat map); empty when
/// there are more fields or no metric of that name.
std::string sweep_svg(const std::vector<std::string>& paths, const std::vector<std::vector<double>>& axis_values,
                      const std::vector<SweepRow>& rows, const std::string& metric, const std::string& title);

}  // namespace droopline::study
