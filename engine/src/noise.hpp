#pragma once
// Reproducible Gaussian noise. The standard library's distributions are implementation-defined,
// so the same seed could give other numbers with another library; these are fixed algorithms
// (splitmix64 seeding, xoshiro256**, Box-Muller), identical everywhere.
#include <cmath>
#include <cstdint>
#include <numbers>

namespace droopline::detail {

class NormalSource {
 public:
  explicit NormalSource(std::uint64_t seed = 0) {
    std::uint64_t z = seed;
    for (auto& s : s_) s = splitmix(z);
  }

  /// A standard normal deviate.
  double next() {
    if (have_spare_) {
      have_spare_ = false;
      return spare_;
    }
    // u1 in (0, 1], u2 in [0, 1)
    const double u1 = (static_cast<double>(next_u64() >> 11) + 1.0) * 0x1.0p-53;
    const double u2 = static_cast<double>(next_u64() >> 11) * 0x1.0p-53;
    const double r = std::sqrt(-2.0 * std::log(u1));
    spare_ = r * std::sin(2.0 * std::numbers::pi * u2);
    have_spare_ = true;
    return r * std::cos(2.0 * std::numbers::pi * u2);
  }

 private:
  static std::uint64_t splitmix(std::uint64_t& z) {
    std::uint64_t r = (z += 0x9e3779b97f4a7c15ULL);
    r = (r ^ (r >> 30)) * 0xbf58476d1ce4e5b9ULL;
    r = (r ^ (r >> 27)) * 0x94d049bb133111ebULL;
    return r ^ (r >> 31);
  }
  static std::uint64_t rotl(std::uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }
  std::uint64_t next_u64() {
    const std::uint64_t result = rotl(s_[1] * 5, 7) * 9;
    const std::uint64_t t = s_[1] << 17;
    s_[2] ^= s_[0];
    s_[3] ^= s_[1];
    s_[1] ^= s_[2];
    s_[0] ^= s_[3];
    s_[2] ^= t;
    s_[3] = rotl(s_[3], 45);
    return result;
  }

  std::uint64_t s_[4];
  double spare_ = 0.0;
  bool have_spare_ = false;
};

}  // namespace droopline::detail
