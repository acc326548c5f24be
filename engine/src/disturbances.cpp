#include "disturbances.hpp"

#include <algorithm>
#include <cmath>

#include "engine_impl.hpp"

namespace droopline::detail {
namespace {

constexpr double kPreWindowS = 16.0;      // mean before the event (BAL-003 "Value A" window)
constexpr double kSettleBeginS = 20.0;    // "Value B" window start after the event
constexpr double kSettleEndS = 52.0;      // "Value B" window end
constexpr double kRocofWindowS = 0.5;     // common practice: 500 ms RoCoF window
constexpr double kExtremeWindowS = 60.0;  // nadir search ends here or at the next disturbance

}  // namespace

DisturbanceTracker::DisturbanceTracker(std::size_t area_count, double step_s) {
  k_rocof_ = std::max<std::int64_t>(1, std::llround(kRocofWindowS / step_s));
  k_settle_begin_ = std::llround(kSettleBeginS / step_s);
  k_settle_end_ = std::llround(kSettleEndS / step_s);
  k10_ = std::llround(10.0 / step_s);
  k30_ = std::llround(30.0 / step_s);
  k_close_ = std::llround(kExtremeWindowS / step_s);
  ring_len_ = static_cast<std::size_t>(std::llround(kPreWindowS / step_s)) + 1;
  ring_.assign(ring_len_ * area_count, 0.0);
  df_scratch_.assign(area_count, 0.0);
}

// Centre-of-inertia deviation of the island `ids` (collapsed areas left out).
double DisturbanceTracker::coi_deviation(const EngineState& e, const std::vector<std::uint32_t>& ids,
                                         const double* df) const {
  double num = 0.0, den = 0.0;
  for (std::uint32_t a : ids) {
    if (e.areas[a].collapsed) continue;
    num += e.areas[a].m * df[a];
    den += e.areas[a].m;
  }
  return den > 0.0 ? num / den : 0.0;
}

void DisturbanceTracker::open(const EngineState& e, std::size_t area, double delta, CommandKind kind,
                              const Notice& cause) {
  std::vector<std::uint32_t> ids;
  for (std::size_t b = 0; b < e.na; ++b)
    if (e.areas[b].island == e.areas[area].island && !e.areas[b].collapsed)
      ids.push_back(static_cast<std::uint32_t>(b));
  // Same instant, same island: one disturbance with the imbalances added.
  for (Window& w : open_) {
    Disturbance& d = records_[w.record];
    if (w.n0 == e.n && d.areas == ids) {
      d.delta_mw += delta;
      d.causes.push_back(cause);
      finish_prediction(e, d, w);
      return;
    }
  }
  // A new disturbance ends the windows of earlier ones in the same island.
  for (std::size_t i = 0; i < open_.size();) {
    const Disturbance& d = records_[open_[i].record];
    const bool overlap = std::any_of(d.areas.begin(), d.areas.end(), [&](std::uint32_t a) {
      return std::find(ids.begin(), ids.end(), a) != ids.end();
    });
    if (overlap) {
      close(i);
    } else {
      ++i;
    }
  }
  Disturbance d;
  d.kind = kind;
  d.causes.push_back(cause);
  d.at_s = e.time();
  d.areas = ids;
  d.delta_mw = delta;
  // Pre-event mean over what the history holds of the last 16 s.
  const std::int64_t first = std::max<std::int64_t>(0, e.n - static_cast<std::int64_t>(ring_len_) + 1);
  double sum = 0.0;
  std::int64_t count = 0;
  for (std::int64_t i = first; i < e.n; ++i) {
    for (std::size_t a = 0; a < e.na; ++a) df_scratch_[a] = ring_[(static_cast<std::size_t>(i) % ring_len_) * e.na + a];
    sum += coi_deviation(e, ids, df_scratch_.data());
    ++count;
  }
  const double now = coi_deviation(e, ids, e.y.data());
  d.pre_hz = e.f0 + (count ? sum / static_cast<double>(count) : now);
  Window w;
  w.record = records_.size();
  w.n0 = e.n;
  w.f_start = e.f0 + now;
  for (std::size_t s = 0; s < e.nu; ++s) {
    const std::size_t u = e.unit_of_slot[s];
    if (!e.units[u].online) continue;
    if (std::find(ids.begin(), ids.end(), e.units[u].area) == ids.end()) continue;
    w.slots.push_back(s);
  }
  std::sort(w.slots.begin(), w.slots.end(),
            [&](std::size_t a, std::size_t b) { return e.unit_of_slot[a] < e.unit_of_slot[b]; });
  for (std::size_t s : w.slots) {
    UnitResponse r;
    r.unit = static_cast<std::uint32_t>(e.unit_of_slot[s]);
    r.p_at_start_mw = e.pm[s];
    d.units.push_back(r);
  }
  d.zenith = delta < 0.0;
  d.nadir_hz = w.f_start;
  d.nadir_at_s = d.at_s;
  records_.push_back(std::move(d));
  finish_prediction(e, records_.back(), w);
  open_.push_back(std::move(w));
}

// Static droop prediction: the frequency where the island's natural response covers delta.
void DisturbanceTracker::finish_prediction(const EngineState& e, Disturbance& d, const Window& w) const {
  double beta = 0.0;
  for (std::uint32_t a : d.areas) beta += e.areas[a].dmp;
  for (std::size_t s : w.slots) beta += e.kd[s];
  d.zenith = d.delta_mw < 0.0;
  d.predicted_settling_hz = beta > 0.0 ? d.pre_hz - d.delta_mw / beta : d.pre_hz;
  const double dev = d.pre_hz - d.predicted_settling_hz;
  for (std::size_t i = 0; i < w.slots.size(); ++i) d.units[i].predicted_mw = e.kd[w.slots[i]] * dev;
}

void DisturbanceTracker::close(std::size_t i) {
  records_[open_[i].record].open = false;
  open_.erase(open_.begin() + static_cast<std::ptrdiff_t>(i));
}

void DisturbanceTracker::close_all() {
  while (!open_.empty()) close(0);
}

bool DisturbanceTracker::wants_outputs(std::int64_t n) const {
  return std::any_of(open_.begin(), open_.end(), [&](const Window& w) {
    const std::int64_t kk = n - w.n0;
    return kk == k10_ || kk == k30_;
  });
}

void DisturbanceTracker::after_step(const EngineState& e) {
  const std::size_t row = (static_cast<std::size_t>(e.n) % ring_len_) * e.na;
  for (std::size_t a = 0; a < e.na; ++a) ring_[row + a] = e.y[a];
  for (std::size_t i = 0; i < open_.size();) {
    Window& w = open_[i];
    Disturbance& d = records_[w.record];
    const std::int64_t kk = e.n - w.n0;
    const double f = e.f0 + coi_deviation(e, d.areas, e.y.data());
    if (kk == k_rocof_) d.rocof_hz_per_s = (f - w.f_start) / (static_cast<double>(kk) * e.h);
    if (d.zenith ? f > *d.nadir_hz : f < *d.nadir_hz) {
      d.nadir_hz = f;
      d.nadir_at_s = e.time();
    }
    if (kk >= k_settle_begin_ && kk <= k_settle_end_) {
      w.settle_sum += f;
      ++w.settle_count;
      if (kk == k_settle_end_) {
        d.settling_hz = w.settle_sum / static_cast<double>(w.settle_count);
        const double dev = d.pre_hz - *d.settling_hz;
        if (std::fabs(dev) > 1e-12) d.response_mw_per_0p1hz = d.delta_mw / (10.0 * dev);
      }
    }
    if (kk == k10_ || kk == k30_) {  // the engine worked out the outputs (wants_outputs)
      for (std::size_t u = 0; u < w.slots.size(); ++u) {
        const double change = e.pm[w.slots[u]] - d.units[u].p_at_start_mw;
        (kk == k10_ ? d.units[u].response_10s_mw : d.units[u].response_30s_mw) = change;
      }
    }
    bool all_gone = true;
    for (std::uint32_t a : d.areas) all_gone = all_gone && e.areas[a].collapsed;
    if (kk >= k_close_ || all_gone) {
      close(i);
    } else {
      ++i;
    }
  }
}

}  // namespace droopline::detail
