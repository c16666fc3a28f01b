// Deterministic random numbers for the demo town: the same seed gives the same numbers on every
// platform and standard library (std:: distributions are implementation-defined, so we do not
// use them). SplitMix64 (Steele, Lea & Flood, OOPSLA 2014) for seeding and hashing, xoshiro256**
// (Blackman & Vigna, 2018) for streams. Not thread-safe: one Rng per thread or per object.
#pragma once

#include <cmath>
#include <cstdint>

namespace sightfix::demo {

inline uint64_t SplitMix64(uint64_t x) {
  x += 0x9e3779b97f4a7c15ULL;
  x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9ULL;
  x = (x ^ (x >> 27)) * 0x94d049bb133111ebULL;
  return x ^ (x >> 31);
}

// Hash of several integers, for per-object seeds ("object 17 of street 3 of seed 1").
inline uint64_t HashSeed(uint64_t a, uint64_t b, uint64_t c = 0, uint64_t d = 0) {
  return SplitMix64(SplitMix64(SplitMix64(SplitMix64(a) ^ b) ^ c) ^ d);
}

class Rng {
 public:
  explicit Rng(uint64_t seed) {
    for (uint64_t& s : s_) s = seed = SplitMix64(seed);
  }
  uint64_t Next() {
    const uint64_t result = Rotl(s_[1] * 5, 7) * 9;
    const uint64_t t = s_[1] << 17;
    s_[2] ^= s_[0];
    s_[3] ^= s_[1];
    s_[1] ^= s_[2];
    s_[0] ^= s_[3];
    s_[2] ^= t;
    s_[3] = Rotl(s_[3], 45);
    return result;
  }
  // Uniform in [0, 1).
  double Unit() { return static_cast<double>(Next() >> 11) * 0x1.0p-53; }
  double Uniform(double lo, double hi) { return lo + (hi - lo) * Unit(); }
  // Uniform integer in [lo, hi].
  int Int(int lo, int hi) {
    return lo + static_cast<int>(Next() % static_cast<uint64_t>(hi - lo + 1));
  }
  bool Chance(double p) { return Unit() < p; }
  // Standard normal (Box-Muller; one value per call for simplicity).
  double Normal() {
    const double u1 = 1.0 - Unit(), u2 = Unit();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * M_PI * u2);
  }

 private:
  static uint64_t Rotl(uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }
  uint64_t s_[4];
};

}  // namespace sightfix::demo
