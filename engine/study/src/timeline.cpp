#include "droopline/timeline.hpp"

#include <algorithm>
#include <cmath>

namespace droopline::study {

SavedState SavedState::copy() const { return {engine->clone(), counters, script, alarms, objectives}; }

std::size_t Timeline::copy_bytes(const Engine& engine) {
  // The engine's layout (engine/src/engine_impl.hpp): per slot about 20 arrays of doubles and a
  // unit record, per integrated state the state and three RK4 work arrays, per area a record and
  // about ten work arrays, plus the disturbance tracker's frequency history (16 s per area).
  const SystemDef& def = engine.def();
  const double steps_16s = 16.0 / def.step_s;
  const double bytes =
      8.0 * (4.0 * static_cast<double>(engine.state().size()) + 48.0 * static_cast<double>(def.units.size()) +
             (32.0 + steps_16s) * static_cast<double>(def.areas.size())) +
      4096.0;
  return static_cast<std::size_t>(bytes);
}

void Timeline::start(const SavedState& state, TimelineOptions options) {
  const double step_s = state.engine->def().step_s;
  keep_ = std::max<std::int64_t>(1, std::llround(options.keep_s / step_s));
  // As many copies as the budget allows (at least 4), no denser than every_s.
  const std::size_t fits = options.budget_bytes / std::max<std::size_t>(1, copy_bytes(*state.engine));
  const std::int64_t copies =
      std::max<std::int64_t>(4, static_cast<std::int64_t>(std::min<std::size_t>(fits, 1u << 20)));
  const std::int64_t wanted = std::max<std::int64_t>(1, std::llround(options.every_s / step_s));
  every_ = std::max(wanted, (keep_ + copies - 3) / (copies - 2));  // keep/every + 2 copies at most
  now_ = {};
  saves_.clear();
  next_id_ = 1;
  now_.ring.push_back({std::make_shared<const SavedState>(state.copy())});
}

void Timeline::checkpoint(SavedState state) {
  const std::int64_t now = state.step();
  const auto held = static_cast<std::size_t>(
      std::count_if(now_.log.begin(), now_.log.end(), [&](const LoggedActions& l) { return l.step == now; }));
  now_.ring.push_back({std::make_shared<const SavedState>(std::move(state)), held});
  // Keep the latest checkpoint at or before now - keep, and everything after it.
  while (now_.ring.size() >= 2 && now_.ring[1].step() <= now - keep_) now_.ring.pop_front();
  const std::int64_t oldest = now_.ring.front().step();
  auto first_kept =
      std::find_if(now_.log.begin(), now_.log.end(), [&](const LoggedActions& l) { return l.step >= oldest; });
  now_.log.erase(now_.log.begin(), first_kept);
}

void Timeline::applied(std::int64_t step, std::vector<Action> actions, std::string author) {
  now_.log.push_back({step, std::move(actions), std::move(author)});
}

void Timeline::truncate(std::int64_t step) {
  // A checkpoint of that step holding some of its actions holds what is forgotten.
  while (now_.ring.size() > 1 &&
         (now_.ring.back().step() > step || (now_.ring.back().step() == step && now_.ring.back().applied_here > 0)))
    now_.ring.pop_back();
  while (!now_.log.empty() && now_.log.back().step >= step) now_.log.pop_back();
}

const SavePoint& Timeline::save(std::string name, SavedState state) {
  SavePoint sp;
  sp.id = next_id_++;
  sp.name = std::move(name);
  sp.step = state.step();
  sp.t_s = state.engine->time_s();
  sp.state = std::make_shared<const SavedState>(std::move(state));
  sp.lineage = now_;  // the checkpoints are shared, not copied
  saves_.push_back(std::move(sp));
  return saves_.back();
}

const SavePoint* Timeline::find(std::uint64_t id) const {
  for (const SavePoint& sp : saves_)
    if (sp.id == id) return &sp;
  return nullptr;
}

std::optional<SavedState> Timeline::restore(std::uint64_t id) {
  const SavePoint* sp = find(id);
  if (!sp) return std::nullopt;
  now_ = sp->lineage;
  return sp->state->copy();
}

std::int64_t Timeline::earliest_step(std::int64_t now_step) const {
  return std::max({now_step - keep_, now_.ring.front().step(), std::int64_t{0}});
}

SavedState Timeline::rewind(std::int64_t to_step, const Resimulation& hooks) {
  // The latest checkpoint before the state asked for (the first one is always at or before it: the
  // caller checked earliest_step). One of that very step holding some of its actions is past it.
  auto from = std::find_if(now_.ring.rbegin(), now_.ring.rend(), [&](const auto& c) {
    return c.step() < to_step || (c.step() == to_step && c.applied_here == 0);
  });
  const Checkpoint& start = from == now_.ring.rend() ? now_.ring.front() : *from;
  SavedState state = start.state->copy();
  if (hooks.begin) hooks.begin(state);
  // Actions logged at the checkpoint's own step and not in it were applied after it was taken.
  auto next =
      std::find_if(now_.log.begin(), now_.log.end(), [&](const LoggedActions& l) { return l.step >= state.step(); });
  for (std::size_t held = 0; held < start.applied_here && next != now_.log.end() && next->step == state.step(); ++held)
    ++next;
  while (state.step() < to_step) {
    for (; next != now_.log.end() && next->step == state.step(); ++next) {
      state.engine->apply_all(next->actions);  // it applied on this lineage: it applies again
      if (hooks.applied) hooks.applied(state, *next);
    }
    state.engine->step();
    if (hooks.stepped) hooks.stepped(state);
  }
  truncate(to_step);
  return state;
}

}  // namespace droopline::study
