#pragma once
// Ensemble stepping: engines that share a structure (the same areas, ties, units in the same slots, blocks and work
// pieces, the same step and duration; numeric values may differ) are stepped together, one member per lane of the
// interleaved arrays (structure of arrays across members). Each member keeps its own engine for everything between the
// RK4 stages (events, loads, shedding, trips, protection, secondary control, metrics); the stages run once for all
// lanes, doing per lane exactly the operations a single run does in the same order, so every member's results are
// bit-identical to stepping it alone. A unit trip or a shedding stage in one member changes only that lane's numbers
// (gathered again from its engine). A member whose layout stops matching (a tie tripped, an area collapsed, a governor
// mode changed in some members only) leaves the lanes and goes on alone through its engine from that step, its state
// being complete there.
#include <cstddef>
#include <cstdint>
#include <memory>
#include <string>
#include <vector>

#include "droopline/engine.hpp"

namespace droopline {

class Ensemble {
 public:
  /// Members stepped side by side with the kernels in use (kernel_choice.hpp): 8 for AVX-512, 4 for AVX2, 4 for
  /// baseline.
  static std::size_t lanes();
  /// Why `other` cannot be stepped together with `first` (empty when it can): the first structural difference found, in
  /// words.
  static std::string differs(const Engine& first, const Engine& other);

  /// Takes the members (not owned; they must outlive the ensemble and be driven only through it until it is gone).
  /// Every member must share the first's structure (`differs` is empty) and be at the same step; throws
  /// std::invalid_argument naming the member otherwise. Members' notices are left in their engines (take them after the
  /// run).
  explicit Ensemble(std::vector<Engine*> members);
  ~Ensemble();
  Ensemble(const Ensemble&) = delete;
  Ensemble& operator=(const Ensemble&) = delete;

  /// One step of every member: those in the lanes together, those that left alone.
  void step();
  /// True once the members' duration is reached (they share it).
  bool finished() const;
  /// Number of members.
  std::size_t size() const;
  /// The step at which member i left the lanes (-1: still in them).
  std::int64_t left_at(std::size_t i) const;

 private:
  struct Lanes;
  void begin_members();
  bool touched(std::size_t m) const;
  void drop_diverged();
  void gather();
  void stage(int st);
  void lay_out_pieces();
  void run_pieces(int st, double c);
  void finish_members();
  std::unique_ptr<Lanes> s_;
};

}  // namespace droopline
