// A small deterministic random number generator (xoshiro256**, seeded through splitmix64) with
// its own uniform and normal draws, so generated data is the same with every standard library.
#pragma once

#include <cmath>    // std::log, std::sqrt, std::cos
#include <cstdint>  // std::uint64_t
#include <utility>  // std::swap
#include <vector>   // std::vector

namespace pare::internal {

/// splitmix64 step (Steele, Lea & Flood 2014): also used to derive independent stream seeds.
inline std::uint64_t splitmix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9E3779B97F4A7C15ULL);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

/// xoshiro256** (Blackman & Vigna 2018).
class Rng {
 public:
  /// A stream for (seed, stream): different streams are independent for practical purposes.
  explicit Rng(std::uint64_t seed, std::uint64_t stream = 0) {
    std::uint64_t sm = seed ^ (stream * 0xD1B54A32D192ED03ULL + 0x8CB92BA72F3D8DD7ULL);
    for (auto& s : s_) s = splitmix64(sm);
  }

  std::uint64_t next() {
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

  /// Uniform on [0, 1) with 53 random bits.
  double uniform() { return static_cast<double>(next() >> 11) * 0x1.0p-53; }
  double uniform(double lo, double hi) { return lo + (hi - lo) * uniform(); }
  /// Uniform integer in [0, n).
  std::uint64_t below(std::uint64_t n) { return static_cast<std::uint64_t>(uniform() * static_cast<double>(n)); }

  /// Standard normal by the Box–Muller transform (one draw per call; the pair's twin is kept).
  double normal() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    double u = 0;
    while (u <= 0) u = uniform();
    const double v = uniform();
    const double r = std::sqrt(-2.0 * std::log(u));
    constexpr double kTwoPi = 6.283185307179586476925286766559;
    spare_ = r * std::sin(kTwoPi * v);
    has_spare_ = true;
    return r * std::cos(kTwoPi * v);
  }

 private:
  static std::uint64_t rotl(std::uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }
  std::uint64_t s_[4];
  double spare_ = 0;
  bool has_spare_ = false;
};

/// Fisher–Yates shuffle from the back, drawing from `rng`.
template <typename T>
void shuffle(std::vector<T>& v, Rng& rng) {
  for (std::size_t i = v.size(); i > 1; --i) std::swap(v[i - 1], v[rng.below(i)]);
}

}  // namespace pare::internal
