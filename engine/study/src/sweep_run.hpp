#pragma once
// The parts of one sweep run that a run alone (sweep.cpp) and a group stepped as an ensemble (sweep_ensemble.cpp)
// share: the member's system, the extremes sampled at each output row, the row of metrics.
#include <cmath>
#include <cstdint>
#include <optional>
#include <span>
#include <vector>

#include "droopline/engine.hpp"
#include "droopline/sweep.hpp"

namespace droopline::study::sweep_detail {

enum Metric : std::size_t {
  m_disturbances,
  m_delta,
  m_rocof,
  m_nadir,
  m_nadir_after,
  m_settling,
  m_response,
  m_lowest,
  m_highest,
  m_shed,
  m_tripped,
  m_final_min,
  m_count
};

/// The checked system of combination `index`, with the row's index and values filled in; nullopt with the row marked
/// invalid (and why) when the combination fails validation.
std::optional<CheckedSystem> member_system(const SweepSpec& spec, std::uint64_t index,
                                           const std::vector<std::uint64_t>& strides, SweepRow& row);

/// The lowest and highest area frequency seen at output rows (Hz).
struct Extremes {
  double lowest = INFINITY, highest = -INFINITY;
  void sample(const Engine& at);
};

/// The row's metrics from the engine at the end of its run.
void finish_row(const Engine& e, Extremes ex, SweepRow& row);

/// Runs `e` alone to its end (run_batch) and fills in the row.
void run_alone(Engine& e, SweepRow& row);

/// Runs the combinations `indices` into rows[0 .. indices.size()): those sharing the first valid one's structure as one
/// ensemble, the others alone.
void run_group(const SweepSpec& spec, std::span<const std::uint64_t> indices, const std::vector<std::uint64_t>& strides,
               SweepRow* rows);

}  // namespace droopline::study::sweep_detail
