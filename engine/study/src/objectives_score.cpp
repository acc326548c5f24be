// Scoring: one linear rule from a target (full marks) to a zero point (none), each result with its
// arithmetic spelled out so that a trainee can check it; a seat's score is the weighted mean.
#include <algorithm>
#include <cmath>
#include <nlohmann/json.hpp>

#include "droopline/format.hpp"
#include "droopline/objectives.hpp"

namespace droopline::study {

namespace {

// Score figures: one decimal, as shown to trainees.
std::string one(double v) { return fmt_fixed(v, 1); }

}  // namespace

Scored score_value(std::optional<double> measured, double target, double zero_at, bool higher_better) {
  Scored s;
  if (!measured) {
    s.arithmetic = "not measured yet";
    return s;
  }
  const double m = *measured;
  s.margin = higher_better ? m - target : target - m;
  s.met = s.margin >= 0.0;
  // Lower is better: 100 (zero_at - m) / (zero_at - target); higher is better: 100 (m - zero_at) /
  // (target - zero_at). Both read "how far from the zero point towards the target".
  const double raw =
      higher_better ? 100.0 * (m - zero_at) / (target - zero_at) : 100.0 * (zero_at - m) / (zero_at - target);
  s.score = std::clamp(raw, 0.0, 100.0);
  s.arithmetic = higher_better ? "100 × (" + fmt_num(m) + " − " + fmt_num(zero_at) + ") / (" + fmt_num(target) + " − " +
                                     fmt_num(zero_at) + ") = " + one(raw)
                               : "100 × (" + fmt_num(zero_at) + " − " + fmt_num(m) + ") / (" + fmt_num(zero_at) +
                                     " − " + fmt_num(target) + ") = " + one(raw);
  if (raw != s.score) s.arithmetic += ", within 0..100: " + one(s.score);
  return s;
}

std::vector<SeatScore> ObjectiveMonitor::scores(const AlarmMonitor* alarms) const {
  std::vector<SeatScore> out;
  if (defs_.empty()) return out;
  for (std::size_t s = 0; s < seats_.size(); ++s) {
    SeatScore ss;
    ss.seat = seats_[s].id;
    for (const Track& t : tracks_)
      if (t.seat == s) ss.objectives.push_back(result(t, alarms));
    if (ss.objectives.empty()) {
      ss.score = 100.0;
      ss.arithmetic = "no objectives for this seat";
      out.push_back(std::move(ss));
      continue;
    }
    double num = 0.0, den = 0.0;
    std::string terms, weights;
    for (const ObjectiveResult& r : ss.objectives) {
      num += r.weight * r.score;
      den += r.weight;
      terms += (terms.empty() ? "" : " + ") + one(r.score) + "×" + fmt_num(r.weight);
      weights += (weights.empty() ? "" : " + ") + fmt_num(r.weight);
    }
    ss.score = num / den;
    ss.arithmetic = "(" + terms + ") / (" + weights + ") = " + one(ss.score);
    out.push_back(std::move(ss));
  }
  return out;
}

nlohmann::ordered_json objective_result_to_json(const ObjectiveResult& r) {
  using json = nlohmann::ordered_json;
  json samples = json::array();
  for (double v : r.samples) samples.push_back(v);
  return json{{"objective", r.objective},
              {"seat", r.seat},
              {"measure", to_string(r.measure)},
              {"label", r.label},
              {"unit", r.unit},
              {"measured", r.measured ? json(*r.measured) : json(nullptr)},
              {"target", r.target},
              {"zero_at", r.zero_at},
              {"weight", r.weight},
              {"score", r.score},
              {"margin", r.margin},
              {"met", r.met},
              {"arithmetic", r.arithmetic},
              {"samples", samples}};
}

nlohmann::ordered_json seat_score_to_json(const SeatScore& s) {
  using json = nlohmann::ordered_json;
  json objectives = json::array();
  for (const ObjectiveResult& r : s.objectives) objectives.push_back(objective_result_to_json(r));
  return json{{"seat", s.seat}, {"score", s.score}, {"arithmetic", s.arithmetic}, {"objectives", objectives}};
}

}  // namespace droopline::study
