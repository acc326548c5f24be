// Integration: one RK4 step of the areas (scalar code here) and the units (the per-model kernels,
// over work pieces that a task runner may spread), and what runs between steps.
#include <algorithm>
#include <cmath>
#include <numbers>

#include "engine_impl.hpp"
#include "kernels.hpp"

namespace droopline {
namespace {
constexpr double kTwoPi = 2.0 * std::numbers::pi;
}  // namespace

void Engine::Impl::run_task(void* self, std::size_t task, std::size_t tasks) {
  auto* m = static_cast<Impl*>(self);
  for (std::size_t p = task; p < m->pieces.size(); p += tasks) m->run_piece(p);
}

void Engine::Impl::run_piece(std::size_t p) {
  const detail::PieceCall& c = calls[p];
  const detail::StageInfo info{stage_now, stage_c, h / 6.0, c.iso};
  detail::model_stage(c.type, c.len, dfv[c.area], c.g, c.tp, c.arr, info, c.out);
  // Below eight values ordered_sum adds them one after the other from +0.0 (its partial sums
  // start only at eight): the same sum, the same bits, without the call.
  if (c.len < 8) {
    double sum = 0.0;
    for (std::size_t i = 0; i < c.len; ++i) sum += c.out[i];
    piece_gen[p] = sum;
  } else {
    piece_gen[p] = detail::ordered_sum(c.len, c.out);
  }
}

// The pointers of every piece's kernel call. They go stale when the pieces change, when the state
// arrays move (step_state swaps y with its copy) and in a clone (a copy of another engine's).
void Engine::Impl::refresh_calls() {
  for (std::size_t p = 0; p < pieces.size(); ++p) {
    const detail::Piece& pc = pieces[p];
    detail::Block& b = blocks[pc.block];
    const std::size_t s0 = b.first_slot + pc.begin, j = pc.begin;
    detail::PieceCall& c = calls[p];
    c.g = {&pref0[s0], &kd[s0], &kiso[s0], &dbs[s0], &inv_lag[s0], &ramp[s0], &pmin[s0], &pmax[s0]};
    c.tp = {};
    for (std::size_t i = 0; i < detail::kMaxParams; ++i) c.tp.p[i] = &b.params[i][j];
    c.arr = {};
    for (std::size_t i = 0; i < b.nstate; ++i) {
      const std::size_t o = b.off + i * b.n + j;
      c.arr.y[i] = &y[o];
      c.arr.k[i] = &k[o];
      c.arr.acc[i] = &acc[o];
    }
    c.out = &pm_stage[s0];
    c.len = pc.end - pc.begin;
    c.area = pc.area;
    c.type = b.type;
    c.iso = pc.iso;
  }
  calls_key[0] = this;
  calls_key[1] = y.data();
  calls_key[2] = k.data();
}

// Stage 1 reads y; stages 2-4 read y + c * (previous slope). Areas are done here in scalar code,
// units by the per-model kernels (which also write the new unit state in stage 4).
void Engine::Impl::stage(int st) {
  const double c = st == 1 ? 0.0 : (st == 4 ? h : 0.5 * h);
  const double frac = st == 1 ? 0.0 : (st == 4 ? 1.0 : 0.5);
  for (std::size_t a = 0; a < na; ++a) {
    // Imposed (playback): the recording's deviation at this stage point instead of the state's.
    dfv[a] = imposed_df ? imposed_df[4 * a + static_cast<std::size_t>(st - 1)]
                        : (st == 1 ? y[a] : y[a] + c * k[a]);
    thv[a] = st == 1 ? y[na + a] : y[na + a] + c * k[na + a];
    net_out[a] = 0.0;
    gen[a] = 0.0;
  }
  for (int t : active_ties) {
    const detail::TieRt& tr = ties[t];
    const double f = tr.pmax * std::sin(thv[tr.from] - thv[tr.to]) + tr.dt * (dfv[tr.from] - dfv[tr.to]);
    net_out[tr.from] += f;
    net_out[tr.to] -= f;
  }
  stage_now = st;
  stage_c = c;
  if (calls_key[0] != this || calls_key[1] != y.data() || calls_key[2] != k.data()) refresh_calls();
  const std::size_t tasks = runner && nu >= kParallelMinUnits ? std::min(runner->concurrency(), pieces.size()) : 1;
  // Pieces are summed in a fixed order: the result does not depend on how many ran in parallel.
  if (tasks > 1) {
    runner->run(tasks, &Impl::run_task, this);
    for (std::size_t p = 0; p < pieces.size(); ++p) gen[pieces[p].area] += piece_gen[p];
  } else {
    for (std::size_t p = 0; p < pieces.size(); ++p) {
      run_piece(p);
      gen[calls[p].area] += piece_gen[p];
    }
  }
  for (std::size_t a = 0; a < na; ++a) {
    double d_df = 0.0, d_th = 0.0;
    if (!areas[a].collapsed) {
      const double load = lc0[a] + (lc1[a] - lc0[a]) * frac + areas[a].dmp * dfv[a];
      d_df = (gen[a] - load - net_out[a]) * inv_m[a];
      d_th = kTwoPi * dfv[a];
    }
    if (imposed_df) d_df = (imposed_df[4 * a + 3] - imposed_df[4 * a]) / h;
    for (auto [i, d] : {std::pair{a, d_df}, std::pair{na + a, d_th}}) {
      if (st == 1) {
        k[i] = d;
        acc[i] = d;
      } else if (st < 4) {
        k[i] = d;
        acc[i] = acc[i] + 2.0 * d;
      } else {
        y[i] = y[i] + (h / 6.0) * (acc[i] + d);
      }
    }
    // The step ends on the last stage's imposed value (what protection and metrics then read).
    if (imposed_df && st == 4) y[a] = imposed_df[4 * a + 3];
  }
}

double Engine::Impl::extra_load(const detail::AreaRt& ar, double t) const {
  double mw = ar.steps_mw;
  for (const detail::Ramp& r : ar.ramps) mw += r.mw * std::clamp((t - r.start_s) / r.over_s, 0.0, 1.0);
  return mw;
}

void Engine::Impl::step() {
  begin_step();
  for (int st = 1; st <= 4; ++st) stage(st);
  finish_step();
}

// A step is split in three so an ensemble (ensemble.cpp) can run the stages of several engines
// together between each engine's own begin and finish.
void Engine::Impl::begin_step() {
  while (next_event < schedule.size() && schedule[next_event].first <= n) {
    const Action& c = schedule[next_event].second;
    ApplyResult r = apply_checked(std::span<const Action>(&c, 1));
    if (!r.ok) {
      Notice refused = detail::notice_at(time(), NoticeKind::command_refused, c);
      refused.issues = std::move(r.issues);
      notices.push_back(std::move(refused));
    }
    ++next_event;
  }
  const double t0 = time();
  for (std::size_t a = 0; a < na; ++a) {
    detail::AreaRt& ar = areas[a];
    // Fold finished ramps into the constant part.
    for (std::size_t i = 0; i < ar.ramps.size();) {
      if (t0 >= ar.ramps[i].start_s + ar.ramps[i].over_s) {
        ar.steps_mw += ar.ramps[i].mw;
        ar.ramps.erase(ar.ramps.begin() + static_cast<std::ptrdiff_t>(i));
      } else {
        ++i;
      }
    }
    if (ar.noise_sigma > 0.0) {
      const double phi = std::exp(-h / ar.noise_tau);
      ar.noise_next = phi * ar.noise_mw + ar.noise_sigma * std::sqrt(1.0 - phi * phi) * ar.rng.next();
    } else {
      ar.noise_next = 0.0;
    }
    const double base = ar.pd0 - ar.shed_mw;
    lc0[a] = base + extra_load(ar, t0) + ar.noise_mw;
    lc1[a] = base + extra_load(ar, t0 + h) + ar.noise_next;
  }
}

void Engine::Impl::finish_step() {
  ++n;
  for (detail::AreaRt& ar : areas) ar.noise_mw = ar.noise_next;
  post_step();
}

void Engine::Impl::step_imposed(std::span<const double> df_hz) {
  imposed_df = df_hz.data();
  step();
  imposed_df = nullptr;
}

void Engine::Impl::step_state(std::span<const double> x, std::span<double> next) {
  saved_y = y;
  std::copy(x.begin(), x.end(), y.begin());
  const double t0 = time();
  for (std::size_t a = 0; a < na; ++a) {
    const detail::AreaRt& ar = areas[a];
    lc0[a] = lc1[a] = ar.pd0 - ar.shed_mw + extra_load(ar, t0);
  }
  for (int st = 1; st <= 4; ++st) stage(st);
  std::copy(y.begin(), y.end(), next.begin());
  y.swap(saved_y);
  invalidate_outputs();
}

// Between steps: protection, schedule ramps, secondary control on its cycle, setpoint ramps,
// units synchronising or ending a stop, then the metrics.
void Engine::Impl::post_step() {
  invalidate_outputs();
  check_out_of_step();
  advance_schedules();
  for (std::size_t a = 0; a < na; ++a) {
    if (areas[a].collapsed) continue;
    check_shedding(a);
    if (areas[a].agc_on && n % areas[a].period_steps == 0) run_agc(a);
  }
  for (std::size_t i = 0; i < ramping.size();) {
    detail::UnitRt& ur = units[ramping[i]];
    const std::size_t s = ur.slot;
    const double dmax = ur.target_rate * h;
    if (ur.target_rate <= 0.0 || std::fabs(ur.target_mw - pset[s]) <= dmax) {
      if (ur.target_rate > 0.0) pset[s] = ur.target_mw;
      ur.target_rate = 0.0;
      ramping.erase(ramping.begin() + static_cast<std::ptrdiff_t>(i));
    } else {
      pset[s] += ur.target_mw > pset[s] ? dmax : -dmax;
      ++i;
    }
    pref0[s] = pset[s] + pagc[s];
  }
  advance_units();
  if (metrics.wants_outputs(n)) ensure_outputs();
  metrics.after_step(*this);
}

}  // namespace droopline
