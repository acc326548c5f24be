// The public API: create, step, read, commands and linear analysis, each a thin call into
// Engine::Impl (engine_impl.hpp and the files it lists).
#include "droopline/engine.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <stdexcept>

#include "engine_impl.hpp"

namespace droopline {

const char* to_string(UnitStatus s) {
  switch (s) {
    case UnitStatus::online: return "online";
    case UnitStatus::at_max: return "at_max";
    case UnitStatus::at_min: return "at_min";
    case UnitStatus::tripped: return "tripped";
    case UnitStatus::starting: return "starting";
    case UnitStatus::stopping: return "stopping";
    case UnitStatus::offline: return "offline";
  }
  return "?";
}

const char* to_string(NoticeKind k) {
  switch (k) {
    case NoticeKind::command: return "command";
    case NoticeKind::command_refused: return "command_refused";
    case NoticeKind::out_of_step: return "out_of_step";
    case NoticeKind::shedding: return "shedding";
    case NoticeKind::collapse: return "collapse";
    case NoticeKind::islanded: return "islanded";
    case NoticeKind::unit_synchronised: return "unit_synchronised";
    case NoticeKind::unit_stopped: return "unit_stopped";
  }
  return "?";
}

// -------------------------------------------------------------------- public interface

Engine::Engine(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Engine::~Engine() = default;

std::unique_ptr<Engine> Engine::create(const CheckedSystem& system) {
  return std::unique_ptr<Engine>(new Engine(std::make_unique<Impl>(system)));
}

std::unique_ptr<Engine> Engine::clone() const {
  auto copy = std::make_unique<Impl>(*impl_);
  // The copied kernel calls point into this engine's arrays. The key alone would not always tell:
  // a copy of a copy may be given the very addresses of an engine since destroyed.
  copy->calls_key[0] = nullptr;
  return std::unique_ptr<Engine>(new Engine(std::move(copy)));
}

void Engine::step() { impl_->step(); }
void Engine::step_imposed(std::span<const double> df_hz) {
  if (df_hz.size() != 4 * impl_->na)
    throw std::invalid_argument("step_imposed: " + std::to_string(4 * impl_->na) + " values expected (4 per area), got " +
                                std::to_string(df_hz.size()));
  impl_->step_imposed(df_hz);
}

void Engine::set_task_runner(TaskRunner* runner) { impl_->runner = runner; }

void Engine::run(std::int64_t max_steps) {
  for (std::int64_t i = 0; i < max_steps && impl_->n < impl_->n_total; ++i) impl_->step();
}

bool Engine::finished() const { return impl_->n >= impl_->n_total; }

void Engine::close_disturbances() { impl_->metrics.close_all(); }

ApplyResult Engine::apply(const Action& action) { return impl_->apply_checked(std::span<const Action>(&action, 1)); }

ApplyResult Engine::apply_all(std::span<const Action> actions) { return impl_->apply_checked(actions); }

ApplyResult Engine::check_all(std::span<const Action> actions) const { return impl_->check(actions); }

double Engine::time_s() const { return impl_->time(); }
std::int64_t Engine::step_index() const { return impl_->n; }
const SystemDef& Engine::def() const { return impl_->def; }
const CheckedSystem& Engine::system() const { return impl_->system; }

std::optional<AreaId> Engine::find_area(std::string_view id) const { return impl_->system.index().area(id); }
std::optional<UnitId> Engine::find_unit(std::string_view id) const { return impl_->system.index().unit(id); }
std::optional<TieId> Engine::find_tie(std::string_view id) const { return impl_->system.index().tie(id); }

AreaState Engine::area(AreaId id) const {
  if (id.index >= impl_->na) throw std::out_of_range("no area with index " + std::to_string(id.index));
  impl_->ensure_outputs();
  Impl& m = *impl_;
  const std::size_t a = id.index;
  const auto& ar = m.areas[a];
  AreaState s;
  s.f_hz = m.f0 + m.y[a];
  s.rocof_hz_per_s = m.rocof[a];
  s.demand_mw = m.current_load(a, m.time());
  s.generation_mw = m.out_gen[a];
  s.export_mw = m.out_net[a];
  s.scheduled_export_mw = ar.sched_export;
  s.ace_mw = m.ace(a);
  s.agc_mw = ar.agc_total;
  s.shed_mw = ar.shed_mw;
  s.inertia_mws_per_hz = ar.m;
  s.agc_enabled = ar.agc_on;
  s.agc_mode = ar.agc_mode;
  s.collapsed = ar.collapsed;
  s.island = ar.island;
  return s;
}

UnitState Engine::unit(UnitId id) const {
  if (id.index >= impl_->nu) throw std::out_of_range("no unit with index " + std::to_string(id.index));
  return impl_->unit_state(id.index);
}

TieState Engine::tie(TieId id) const {
  if (id.index >= impl_->nt) throw std::out_of_range("no tie with index " + std::to_string(id.index));
  impl_->ensure_outputs();
  const Impl& m = *impl_;
  const auto& tr = m.ties[id.index];
  TieState s;
  s.flow_mw = tr.flow;
  s.angle_deg = (m.y[m.na + tr.from] - m.y[m.na + tr.to]) * 180.0 / std::numbers::pi;
  s.scheduled_mw = tr.scheduled;
  s.in_service = tr.in_service;
  return s;
}

const std::vector<Disturbance>& Engine::disturbances() const { return impl_->metrics.records(); }

std::vector<Notice> Engine::take_notices() {
  std::vector<Notice> out;
  out.swap(impl_->notices);
  return out;
}

std::vector<double> Engine::state() const { return impl_->y; }
std::vector<std::string> Engine::state_names() const { return impl_->state_names(); }

void Engine::set_state(std::span<const double> x) {
  if (x.size() != impl_->y.size())
    throw std::invalid_argument("set_state: the state has " + std::to_string(impl_->y.size()) + " values");
  std::copy(x.begin(), x.end(), impl_->y.begin());
  impl_->invalidate_outputs();
}

bool Engine::finite() const {
  // The outputs are derived from the state (bounded sums and sines of it): checking the state
  // is enough, and it does not work out the outputs every step of a live loop.
  const std::vector<double>& y = impl_->y;
  return std::all_of(y.begin(), y.end(), [](double x) { return std::isfinite(x); });
}
void Engine::step_state(std::span<const double> x, std::span<double> next) {
  if (x.size() != impl_->y.size() || next.size() != impl_->y.size())
    throw std::invalid_argument("step_state: the state has " + std::to_string(impl_->y.size()) + " values");
  impl_->step_state(x, next);
}

std::size_t Engine::series_width() const { return 1 + impl_->na + impl_->nu + impl_->nt; }

std::vector<std::string> Engine::series_columns() const {
  std::vector<std::string> cols{"t_s"};
  for (const AreaDef& a : impl_->def.areas) cols.push_back(a.id + ".f_hz");
  for (const UnitDef& u : impl_->def.units) cols.push_back(u.id + ".p_mw");
  for (const TieDef& t : impl_->def.ties) cols.push_back(t.id + ".flow_mw");
  return cols;
}

void Engine::sample(std::span<double> row) const {
  impl_->ensure_outputs();
  const Impl& m = *impl_;
  if (row.size() < series_width()) throw std::out_of_range("series row too short");
  std::size_t i = 0;
  row[i++] = m.time();
  for (std::size_t a = 0; a < m.na; ++a) row[i++] = m.f0 + m.y[a];
  for (std::size_t u = 0; u < m.nu; ++u) row[i++] = m.pm[m.units[u].slot];
  for (std::size_t t = 0; t < m.nt; ++t) row[i++] = m.ties[t].flow;
}

}  // namespace droopline
