// A group of sweep runs stepped as one ensemble: what run_batch does for one engine (a row at the start, every
// output_every steps and at the end; the metric windows closed at the end), done for every member after each ensemble
// step, so each member sees what its run alone would.
#include <memory>

#include "droopline/batch.hpp"
#include "droopline/ensemble.hpp"
#include "sweep_run.hpp"

namespace droopline::study::sweep_detail {

void run_group(const SweepSpec& spec, std::span<const std::uint64_t> indices, const std::vector<std::uint64_t>& strides,
               SweepRow* rows) {
  std::vector<std::unique_ptr<Engine>> engines(indices.size());
  std::vector<Engine*> members;
  std::vector<std::size_t> row_of;  // member -> position in the group
  for (std::size_t i = 0; i < indices.size(); ++i) {
    const std::optional<CheckedSystem> system = member_system(spec, indices[i], strides, rows[i]);
    if (!system) continue;
    engines[i] = Engine::create(*system);
    if (!members.empty() && !Ensemble::differs(*members[0], *engines[i]).empty()) {
      run_alone(*engines[i],
                rows[i]);  // a different structure: the ordinary engine
      engines[i].reset();
      continue;
    }
    members.push_back(engines[i].get());
    row_of.push_back(i);
  }
  if (members.size() == 1) {
    run_alone(*members[0], rows[row_of[0]]);
    return;
  }
  if (members.empty()) return;
  Ensemble ensemble(members);
  std::vector<Extremes> extremes(members.size());
  std::vector<std::int64_t> every(members.size());
  for (std::size_t m = 0; m < members.size(); ++m) {
    every[m] = output_every(members[m]->def());
    extremes[m].sample(*members[m]);
  }
  std::vector<unsigned char> last_was_row(members.size(), 1);
  while (!ensemble.finished()) {
    ensemble.step();
    for (std::size_t m = 0; m < members.size(); ++m) {
      last_was_row[m] = members[m]->step_index() % every[m] == 0;
      if (last_was_row[m]) extremes[m].sample(*members[m]);
    }
  }
  for (std::size_t m = 0; m < members.size(); ++m) {
    if (!last_was_row[m]) extremes[m].sample(*members[m]);
    members[m]->close_disturbances();
    SweepRow& row = rows[row_of[m]];
    finish_row(*members[m], extremes[m], row);
    row.path = ensemble.left_at(m) < 0 ? "ensemble" : "diverged";
  }
}

}  // namespace droopline::study::sweep_detail
