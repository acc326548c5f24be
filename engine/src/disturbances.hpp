#pragma once
// Disturbance metrics (model notes, section 8) as a tracker fed after each step: it keeps the
// frequency history for the pre-event mean, opens a record when a disturbance happens, and fills
// in RoCoF, nadir, settling frequency and unit responses as their windows pass.
#include <cstdint>
#include <string>
#include <vector>

#include "droopline/engine.hpp"

namespace droopline::detail {

struct EngineState;

/// Records of every disturbance and the windows still open.
class DisturbanceTracker {
 public:
  DisturbanceTracker() = default;
  /// Sizes the history for `area_count` areas at a step of `step_s` (s).
  DisturbanceTracker(std::size_t area_count, double step_s);

  /// Opens a record for an imbalance of `delta_mw` (positive = deficit) in the island of `area`,
  /// or adds it to one opened at the same instant in the same island.
  void open(const EngineState& e, std::size_t area, double delta_mw, CommandKind kind, const Notice& cause);
  /// True when the next update reads unit outputs (a 10 s or 30 s response is due).
  bool wants_outputs(std::int64_t n) const;
  /// Feeds the state after step `n`: history, extremes, averaging windows, responses.
  void after_step(const EngineState& e);
  /// Ends every open window (end of run).
  void close_all();
  /// Every record so far, in order of time.
  const std::vector<Disturbance>& records() const { return records_; }

 private:
  struct Window {
    std::size_t record = 0;
    std::int64_t n0 = 0;
    double f_start = 0.0, settle_sum = 0.0;
    std::int64_t settle_count = 0;
    std::vector<std::size_t> slots;  // parallel to Disturbance::units
  };

  double coi_deviation(const EngineState& e, const std::vector<std::uint32_t>& ids, const double* df) const;
  void finish_prediction(const EngineState& e, Disturbance& d, const Window& w) const;
  void close(std::size_t i);

  std::vector<Disturbance> records_;
  std::vector<Window> open_;
  std::vector<double> ring_;  // per-area frequency deviation history for the pre-event mean
  std::size_t ring_len_ = 0;
  std::vector<double> df_scratch_;  // one history row (pre-sized)
  std::int64_t k_rocof_ = 0, k_settle_begin_ = 0, k_settle_end_ = 0, k10_ = 0, k30_ = 0, k_close_ = 0;
};

}  // namespace droopline::detail
