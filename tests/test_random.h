#pragma once
// Deterministic pseudo-random numbers for test data (a 64-bit linear congruential generator with
// Knuth's MMIX constants, normals by Box–Muller), so that tests need no library generator whose
// sequence could change between versions.

#include <cmath>
#include <cstdint>
#include <numbers>

namespace statewise::testing {

struct DeterministicRandom {
  std::uint64_t state;
  double uniform() {
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<double>(state >> 11) * 0x1.0p-53;
  }
  double normal() {
    const double u1 = uniform() + 1e-300, u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }
};

}  // namespace statewise::testing
