#pragma once
// The validation toolkit shared by the definition checks (validate.cpp), the command checks
// (check_command.cpp) and the shared rules (resolved.cpp): physical bounds, lazily joined
// paths, and the Checker that turns failed checks into issues.
#include <cmath>
#include <map>
#include <string>
#include <string_view>
#include <vector>

#include "droopline/format.hpp"
#include "droopline/validate.hpp"

namespace droopline::detail {

inline constexpr double kStepFraction = 5.0;  // step must be at most 1/5 of the fastest time constant

// Physical bounds: what a real power system can have, generously. A finite value beyond them is
// a typing slip or an attack, and it is refused rather than simulated into garbage.
namespace bound {
constexpr double kNominalHzMin = 10.0;    // below any supply frequency in use (16.7 Hz rail supplies)
constexpr double kNominalHz = 1000.0;     // above any supply frequency in use
constexpr double kDroopMinPu = 0.001;     // 0.1 %: below it a unit is isochronous in all but name
constexpr double kStepS = 1.0;            // a fixed step longer than any governor time constant
constexpr double kDurationS = 1e7;        // about 115 days of simulated time
constexpr double kPowerMw = 2e6;          // demand, rating, limits: above the largest interconnection
constexpr double kTimeS = 1e4;            // any lag, reset or delay
constexpr double kInertiaS = 100.0;       // H on own rating (aggregates included)
constexpr double kRampMwPerS = 1e6;       // any ramp limit or ramp command
constexpr double kDroopPu = 1.0;          // 100 % droop
constexpr double kDeadbandHz = 5.0;       // half-width
constexpr double kGainPerPu = 100.0;      // secondary-control gains, load damping, temporary droop
constexpr double kMwPerHz = 1e7;          // bias and tie damping
constexpr double kEnergyMwh = 1e6;        // battery energy
constexpr double kAreaStepFactor = 10.0;  // a load step or ramp within ten times the area's size
constexpr double kStartUpS = 1e5;         // about 28 h: past a cold start of a large steam unit
}  // namespace bound

// A path made of a prefix and a field, joined only when a message needs it: validating a large
// fleet checks hundreds of thousands of values and reports few.
struct Where {
  std::string_view base;
  const char* suffix;
  bool dot = false;                                          // insert '.' between base and suffix
  Where(const std::string& b) : base(b), suffix(nullptr) {}  // NOLINT: implicit on purpose
  Where(const char* b) : base(b), suffix(nullptr) {}         // NOLINT: implicit on purpose
  Where(const std::string& b, const char* s, bool d) : base(b), suffix(s), dot(d) {}
  std::string str() const {
    std::string out(base);
    if (suffix) {
      if (dot) out += '.';
      out += suffix;
    }
    return out;
  }
};

inline Where at(const std::string& base, const char* suffix, bool dot = false) { return {base, suffix, dot}; }

// A refused value as a message shows it: in full when the short form would read like the bound it
// broke (900.0000001 is not "900").
inline std::string shown(double v, double lo, double hi) {
  const std::string s = fmt_num(v);
  return (s == fmt_num(lo) || s == fmt_num(hi)) ? fmt_exact(v) : s;
}

class Checker {
 public:
  explicit Checker(std::vector<Issue>& out) : out_(out) {}

  void error(const Where& path, const std::string& message) { out_.push_back({path.str(), message, false}); }
  void warn(const Where& path, const std::string& message) { out_.push_back({path.str(), message, true}); }
  void positive(const Where& path, double v) {
    if (!(v > 0.0)) error(path, "must be > 0, got " + fmt_num(v));
  }
  void non_negative(const Where& path, double v) {
    if (!(v >= 0.0)) error(path, "must be >= 0, got " + fmt_num(v));
  }
  void finite(const Where& path, double v) {
    if (!std::isfinite(v)) error(path, "must be a finite number");
  }
  /// Refuses a value above what a real system can have (NaN and infinity included).
  void at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v <= hi))
      error(path, "must be at most " + fmt_num(hi) + unit + " (beyond what a real system can have), got " + fmt_num(v));
  }
  /// `positive` and `at_most` together: the usual bound of a physical quantity.
  void positive_at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v > 0.0))
      error(path, "must be > 0, got " + fmt_num(v));
    else
      at_most(path, v, hi, unit);
  }
  void non_negative_at_most(const Where& path, double v, double hi, const char* unit) {
    if (!(v >= 0.0))
      error(path, "must be >= 0, got " + fmt_num(v));
    else
      at_most(path, v, hi, unit);
  }
  void within(const Where& path, double v, double lo, double hi) {
    if (!(v >= lo && v <= hi))
      error(path, "must lie within [" + fmt_num(lo) + ", " + fmt_num(hi) + "], got " + shown(v, lo, hi));
  }
  /// Warns when a valid value lies outside its typical range (section 9 of the model notes).
  void typical(const Where& path, double v, double lo, double hi, const char* what) {
    if (v > 0.0 && (v < lo || v > hi))
      warn(path, fmt_num(v) + " is outside the typical range " + fmt_num(lo) + "-" + fmt_num(hi) + " of " + what);
  }

 private:
  std::vector<Issue>& out_;
};

/// Dense index of every id of one list.
using IdIndex = SystemIndex::Ids;

/// The size of each area (MW): the larger of its demand and its units' ratings.
std::vector<double> area_sizes(const SystemDef& def, const IdIndex& areas);

/// Static checks of one command against a definition: references, physical bounds, the step
/// against a new droop. The one checker the loader's events and the live commands share.
void check_command(Checker& ck, const SystemDef& def, const Command& c, const std::string& p, const IdIndex& areas,
                   const IdIndex& units, const IdIndex& ties, const std::vector<double>& area_size_mw);

/// The typed form of a command that passed check_command against `index` (ids looked up only).
Action to_action(const SystemIndex& index, const Command& c);

}  // namespace droopline::detail
