// Ensemble stepping (droopline/ensemble.hpp): the RK4 stages of several engines of one structure run once over
// interleaved arrays (value i of the lane-l member at [i * lanes + l]), areas and ties here lane by lane in the scalar
// order of Engine::Impl::stage, units through the kernels' lanes_stage. Everything between stages stays in each
// member's own engine (begin_step and finish_step), so events, protection, secondary control and metrics are the single
// run's code.
#include "droopline/ensemble.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>
#include <optional>
#include <stdexcept>

#include "engine_impl.hpp"
#include "kernels.hpp"

namespace droopline {
namespace {

constexpr double kTwoPi = 2.0 * std::numbers::pi;

bool same_pieces(const std::vector<detail::Piece>& a, const std::vector<detail::Piece>& b) {
  return std::equal(a.begin(), a.end(), b.begin(), b.end(), [](const detail::Piece& x, const detail::Piece& y) {
    return x.block == y.block && x.area == y.area && x.begin == y.begin && x.end == y.end && x.iso == y.iso;
  });
}

std::vector<unsigned char> collapsed_areas(const detail::EngineState& e) {
  std::vector<unsigned char> out(e.na);
  for (std::size_t a = 0; a < e.na; ++a) out[a] = e.areas[a].collapsed;
  return out;
}

bool same_collapsed(const detail::EngineState& e, const std::vector<unsigned char>& collapsed) {
  for (std::size_t a = 0; a < e.na; ++a)
    if (e.areas[a].collapsed != static_cast<bool>(collapsed[a])) return false;
  return true;
}

// What the stages depend on beyond numbers: which pieces run, which ties flow, which areas are integrated. A member
// whose layout stops matching the lanes' leaves them.
struct Layout {
  std::vector<detail::Piece> pieces;
  std::vector<int> active_ties;
  std::vector<unsigned char> collapsed;
  explicit Layout(const detail::EngineState& e)
      : pieces(e.pieces), active_ties(e.active_ties), collapsed(collapsed_areas(e)) {}
  bool matches(const detail::EngineState& e) const {
    return same_pieces(e.pieces, pieces) && e.active_ties == active_ties && same_collapsed(e, collapsed);
  }
};

// Interleaves member array `from` into lane l of `to` (stride lanes).
void put_lane(const std::vector<double>& from, std::vector<double>& to, std::size_t l, std::size_t lanes) {
  for (std::size_t i = 0; i < from.size(); ++i) to[i * lanes + l] = from[i];
}

}  // namespace

struct Ensemble::Lanes {
  std::vector<Engine*> all;
  std::vector<std::int64_t> left_at;         // per member: the step it left the lanes, -1 while in them
  std::vector<std::size_t> seen;             // per member: its notice count when last gathered
  std::vector<unsigned char> dirty;          // per member: gather its whole state before the next stages
  std::vector<std::size_t> in;               // lane l holds member in[l]
  std::size_t g = 0;                         // lanes in use (in.size())
  bool relayout = true;                      // lay the lanes out anew before the next stages
  const detail::EngineState* ref = nullptr;  // the first member in the lanes (blocks, ties)
  std::optional<Layout> layout;              // the layout the lanes share
  double h = 0.0;
  std::size_t na = 0, nu = 0, ny = 0;
  // Interleaved state and work arrays, per-slot governor parameters, per-block model parameters
  std::vector<double> y, k, acc, pm;
  std::vector<double> pref0, kd, kiso, dbs, inv_lag, ramp, pmin, pmax;
  std::vector<std::array<std::vector<double>, detail::kMaxParams>> params;
  // Per area and lane at the stage point; per tie and lane; per piece and lane
  std::vector<double> dfv, thv, gen, net_out, lc0, lc1, inv_m, dmp, tie_pmax, tie_dt, piece_gen;
  // Per area, its df at the stage point repeated for each element of its widest piece
  std::vector<double> df_elem;
  std::size_t widest = 0;
  // Per piece, its kernel arguments into the arrays above (set when the lanes are laid out)
  struct PieceArgs {
    detail::GovernorParams g;
    detail::ModelParams t;
    detail::SegmentArrays a;
    double* out;
    const double* df;
  };
  std::vector<PieceArgs> args;
};

std::size_t Ensemble::lanes() { return detail::ensemble_lanes(); }

std::string Ensemble::differs(const Engine& first, const Engine& other) {
  const Engine::Impl& a = *first.impl_;
  const Engine::Impl& b = *other.impl_;
  if (a.h != b.h) return "a different step_s";
  if (a.n != b.n || a.n_total != b.n_total) return "a different step count or duration";
  if (a.na != b.na || a.nt != b.nt || a.nu != b.nu || a.y.size() != b.y.size())
    return "a different number of areas, ties, units or states";
  if (a.imposed_df || b.imposed_df) return "a frequency imposed";
  for (std::size_t t = 0; t < a.nt; ++t)
    if (a.ties[t].from != b.ties[t].from || a.ties[t].to != b.ties[t].to) return "ties between different areas";
  if (a.blocks.size() != b.blocks.size()) return "different turbine types";
  for (std::size_t i = 0; i < a.blocks.size(); ++i) {
    const detail::Block& x = a.blocks[i];
    const detail::Block& y = b.blocks[i];
    if (x.type != y.type || x.first_slot != y.first_slot || x.n != y.n || x.off != y.off || x.nstate != y.nstate)
      return "units of different turbine types, or in a different order";
  }
  if (!same_pieces(a.pieces, b.pieces)) return "units in different areas or governor modes";
  if (a.active_ties != b.active_ties) return "different ties in service";
  if (!same_collapsed(b, collapsed_areas(a))) return "different areas collapsed";
  return {};
}

Ensemble::Ensemble(std::vector<Engine*> members) : s_(std::make_unique<Lanes>()) {
  Lanes& s = *s_;
  if (members.empty()) throw std::invalid_argument("an ensemble needs at least one member");
  for (std::size_t i = 1; i < members.size(); ++i) {
    const std::string why = differs(*members[0], *members[i]);
    if (!why.empty())
      throw std::invalid_argument("ensemble member " + std::to_string(i) + " differs from the first: " + why);
  }
  s.all = std::move(members);
  const std::size_t count = s.all.size();
  s.left_at.assign(count, -1);
  s.seen.assign(count, 0);
  s.dirty.assign(count, 1);
  for (std::size_t i = 0; i < count; ++i) s.in.push_back(i);
  const Engine::Impl& m0 = *s.all[0]->impl_;
  s.ref = &m0;
  s.h = m0.h;
  s.na = m0.na;
  s.nu = m0.nu;
  s.ny = m0.y.size();
  s.params.resize(m0.blocks.size());
}

Ensemble::~Ensemble() = default;

std::size_t Ensemble::size() const { return s_->all.size(); }
std::int64_t Ensemble::left_at(std::size_t i) const { return s_->left_at.at(i); }
bool Ensemble::finished() const { return s_->all[0]->finished(); }

void Ensemble::step() {
  Lanes& s = *s_;
  for (std::size_t i = 0; i < s.all.size(); ++i)
    if (s.left_at[i] >= 0) s.all[i]->impl_->step();
  begin_members();
  drop_diverged();
  if (s.in.empty()) return;
  gather();
  for (int st = 1; st <= 4; ++st) stage(st);
  finish_members();
}

void Ensemble::begin_members() {
  for (std::size_t m : s_->in) s_->all[m]->impl_->begin_step();
}

// Members whose layout no longer matches the lanes' leave them (checked after begin_step, which also sees what the
// previous finish_step changed). The lanes keep the layout of the most members among the previous one and the first
// member's (a change all members share, such as the same trip at the same instant everywhere, keeps them together). A
// member leaving after begin_step finishes that step alone: its stages, then finish_step.
void Ensemble::drop_diverged() {
  Lanes& s = *s_;
  if (s.in.empty()) return;
  if (!s.layout) s.layout.emplace(*s.all[s.in[0]]->impl_);
  // The layout changes only with something that leaves a notice (a command, a tie trip, a collapse) or while units
  // start or stop: the usual case is that no member needs looking at.
  if (std::none_of(s.in.begin(), s.in.end(), [this](std::size_t m) { return touched(m); })) return;
  if (std::all_of(s.in.begin(), s.in.end(), [&s](std::size_t m) { return s.layout->matches(*s.all[m]->impl_); }))
    return;
  const Layout first(*s.all[s.in[0]]->impl_);
  std::size_t same_kept = 0, same_first = 0;
  for (std::size_t m : s.in) {
    same_kept += s.layout->matches(*s.all[m]->impl_);
    same_first += first.matches(*s.all[m]->impl_);
  }
  if (same_first > same_kept) s.layout = first;
  s.relayout = true;  // new pieces, or fewer lanes
  std::vector<std::size_t> stay;
  for (std::size_t m : s.in) {
    Engine::Impl& e = *s.all[m]->impl_;
    if (s.layout->matches(e)) {
      stay.push_back(m);
      continue;
    }
    s.left_at[m] = e.n;
    for (int st = 1; st <= 4; ++st) e.stage(st);
    e.finish_step();
  }
  s.in = std::move(stay);
  s.ref = s.in.empty() ? nullptr : s.all[s.in[0]]->impl_.get();
}

// True when member m's engine did something since its lanes were last gathered, or has units starting or stopping.
bool Ensemble::touched(std::size_t m) const {
  const Engine::Impl& e = *s_->all[m]->impl_;
  return s_->dirty[m] || e.notices.size() != s_->seen[m] || e.changing_units > 0;
}

// Interleaves what the stages read: always what secondary control and loads change every step, everything for a member
// whose engine did something else since (a notice tells: events, trips, shedding) or whose units are starting or
// stopping.
void Ensemble::gather() {
  Lanes& s = *s_;
  const std::size_t g = s.in.size();
  const Engine::Impl& r = *s.all[s.in[0]]->impl_;
  const bool relayout = s.relayout || g != s.g;
  if (relayout) {
    s.relayout = false;
    s.g = g;
    for (auto* v : {&s.y, &s.k, &s.acc}) v->assign(s.ny * g, 0.0);
    for (auto* v : {&s.pm, &s.pref0, &s.kd, &s.kiso, &s.dbs, &s.inv_lag, &s.ramp, &s.pmin, &s.pmax})
      v->assign(s.nu * g, 0.0);
    for (auto* v : {&s.dfv, &s.thv, &s.gen, &s.net_out, &s.lc0, &s.lc1, &s.inv_m, &s.dmp}) v->assign(s.na * g, 0.0);
    s.tie_pmax.assign(r.nt * g, 0.0);
    s.tie_dt.assign(r.nt * g, 0.0);
    for (std::size_t b = 0; b < r.blocks.size(); ++b)
      for (std::size_t i = 0; i < detail::kMaxParams; ++i) s.params[b][i].assign(r.blocks[b].params[i].size() * g, 0.0);
    s.widest = 0;
    for (const detail::Piece& p : r.pieces) s.widest = std::max(s.widest, p.end - p.begin);
    s.df_elem.assign(s.na * s.widest * g, 0.0);
    lay_out_pieces();
  }
  s.piece_gen.assign(r.pieces.size() * g, 0.0);
  for (std::size_t l = 0; l < g; ++l) {
    const std::size_t m = s.in[l];
    const Engine::Impl& e = *s.all[m]->impl_;
    if (relayout || touched(m)) {
      put_lane(e.y, s.y, l, g);
      put_lane(e.kd, s.kd, l, g);
      put_lane(e.kiso, s.kiso, l, g);
      put_lane(e.dbs, s.dbs, l, g);
      put_lane(e.inv_lag, s.inv_lag, l, g);
      put_lane(e.ramp, s.ramp, l, g);
      put_lane(e.pmin, s.pmin, l, g);
      put_lane(e.pmax, s.pmax, l, g);
      for (std::size_t b = 0; b < e.blocks.size(); ++b)
        for (std::size_t i = 0; i < detail::kMaxParams; ++i) put_lane(e.blocks[b].params[i], s.params[b][i], l, g);
      for (std::size_t t = 0; t < e.nt; ++t) {
        s.tie_pmax[t * g + l] = e.ties[t].pmax;
        s.tie_dt[t * g + l] = e.ties[t].dt;
      }
      s.dirty[m] = 0;
      s.seen[m] = e.notices.size();
    }
    put_lane(e.pref0, s.pref0, l, g);
    for (std::size_t a = 0; a < s.na; ++a) {
      s.lc0[a * g + l] = e.lc0[a];
      s.lc1[a * g + l] = e.lc1[a];
      s.inv_m[a * g + l] = e.inv_m[a];
      s.dmp[a * g + l] = e.areas[a].dmp;
    }
  }
}

// Engine::Impl::stage, lane by lane: the same expressions in the same order for each lane.
void Ensemble::stage(int st) {
  Lanes& s = *s_;
  const detail::EngineState& r = *s.ref;
  const std::size_t g = s.g, na = s.na;
  const double h = s.h;
  const double c = st == 1 ? 0.0 : (st == 4 ? h : 0.5 * h);
  const double frac = st == 1 ? 0.0 : (st == 4 ? 1.0 : 0.5);
  for (std::size_t a = 0; a < na; ++a)
    for (std::size_t l = 0; l < g; ++l) {
      const std::size_t i = a * g + l, it = (na + a) * g + l;
      s.dfv[i] = st == 1 ? s.y[i] : s.y[i] + c * s.k[i];
      s.thv[i] = st == 1 ? s.y[it] : s.y[it] + c * s.k[it];
      s.net_out[i] = 0.0;
      s.gen[i] = 0.0;
    }
  for (int t : r.active_ties) {
    const detail::TieRt& tr = r.ties[static_cast<std::size_t>(t)];
    for (std::size_t l = 0; l < g; ++l) {
      const std::size_t ti = static_cast<std::size_t>(t) * g + l, fr = tr.from * g + l, to = tr.to * g + l;
      const double f = s.tie_pmax[ti] * std::sin(s.thv[fr] - s.thv[to]) + s.tie_dt[ti] * (s.dfv[fr] - s.dfv[to]);
      s.net_out[fr] += f;
      s.net_out[to] -= f;
    }
  }
  run_pieces(st, c);
  for (std::size_t p = 0; p < r.pieces.size(); ++p)
    for (std::size_t l = 0; l < g; ++l) s.gen[r.pieces[p].area * g + l] += s.piece_gen[p * g + l];
  for (std::size_t a = 0; a < na; ++a) {
    const bool collapsed = r.areas[a].collapsed;
    for (std::size_t l = 0; l < g; ++l) {
      const std::size_t ia = a * g + l;
      double d_df = 0.0, d_th = 0.0;
      if (!collapsed) {
        const double load = s.lc0[ia] + (s.lc1[ia] - s.lc0[ia]) * frac + s.dmp[ia] * s.dfv[ia];
        d_df = (s.gen[ia] - load - s.net_out[ia]) * s.inv_m[ia];
        d_th = kTwoPi * s.dfv[ia];
      }
      for (auto [i, d] : {std::pair{ia, d_df}, std::pair{(na + a) * g + l, d_th}}) {
        if (st == 1) {
          s.k[i] = d;
          s.acc[i] = d;
        } else if (st < 4) {
          s.k[i] = d;
          s.acc[i] = s.acc[i] + 2.0 * d;
        } else {
          s.y[i] = s.y[i] + (h / 6.0) * (s.acc[i] + d);
        }
      }
    }
  }
}

// Engine::Impl::run_piece's arguments over the lanes: each piece's units times the lanes.
void Ensemble::lay_out_pieces() {
  Lanes& s = *s_;
  const detail::EngineState& r = *s.ref;
  const std::size_t g = s.g;
  s.args.clear();
  for (const detail::Piece& pc : r.pieces) {
    const detail::Block& b = r.blocks[pc.block];
    const std::size_t s0 = (b.first_slot + pc.begin) * g, j = pc.begin;
    Lanes::PieceArgs pa{};
    pa.g = {&s.pref0[s0], &s.kd[s0], &s.kiso[s0], &s.dbs[s0], &s.inv_lag[s0], &s.ramp[s0], &s.pmin[s0], &s.pmax[s0]};
    for (std::size_t i = 0; i < detail::kMaxParams; ++i)
      pa.t.p[i] = s.params[pc.block][i].empty() ? nullptr : &s.params[pc.block][i][j * g];
    for (std::size_t i = 0; i < b.nstate; ++i) {
      const std::size_t o = (b.off + i * b.n + j) * g;
      pa.a.y[i] = &s.y[o];
      pa.a.k[i] = &s.k[o];
      pa.a.acc[i] = &s.acc[o];
    }
    pa.out = &s.pm[s0];
    pa.df = &s.df_elem[pc.area * s.widest * g];
    s.args.push_back(pa);
  }
}

// Engine::Impl::run_piece over the lanes: each piece's units times the lanes in one kernel call.
void Ensemble::run_pieces(int st, double c) {
  Lanes& s = *s_;
  const detail::EngineState& r = *s.ref;
  const std::size_t g = s.g, per_area = s.widest * g;
  for (std::size_t a = 0; a < s.na; ++a)
    for (std::size_t u = 0; u < s.widest; ++u) std::copy_n(&s.dfv[a * g], g, &s.df_elem[a * per_area + u * g]);
  for (std::size_t p = 0; p < r.pieces.size(); ++p) {
    const detail::Piece& pc = r.pieces[p];
    const Lanes::PieceArgs& pa = s.args[p];
    const detail::StageInfo info{st, c, s.h / 6.0, pc.iso};
    detail::lanes_stage(r.blocks[pc.block].type, (pc.end - pc.begin) * g, pa.df, pa.g, pa.t, pa.a, info, pa.out);
    detail::ordered_sums(pc.end - pc.begin, g, pa.out, &s.piece_gen[p * g]);
  }
}

// The new state goes back to each member, which then finishes its step (post_step: protection, secondary control,
// metrics) with its own code.
void Ensemble::finish_members() {
  Lanes& s = *s_;
  const std::size_t g = s.g;
  for (std::size_t l = 0; l < g; ++l) {
    Engine::Impl& e = *s.all[s.in[l]]->impl_;
    for (std::size_t i = 0; i < s.ny; ++i) e.y[i] = s.y[i * g + l];
    e.finish_step();
  }
}

}  // namespace droopline
