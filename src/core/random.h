// Seeded, portable random numbers for every deterministic choice in prefsift
// (bootstrap resamples, cross-validation folds, rebalancing): the same seed
// gives the same numbers on every platform and standard library.
// Thread-safety: pure functions of the state passed in.
#pragma once

#include <cstdint>

namespace prefsift {

// splitmix64 step (Steele, Lea & Flood 2014, "Fast splittable pseudorandom
// number generators", OOPSLA; constants from memory): advances *state and
// returns the next output.
inline uint64_t SplitMix64(uint64_t* state) {
  uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

// Uniform integer in [0, bound) by rejection (no modulo bias); 0 when bound <= 1.
inline uint64_t UniformBelow(uint64_t* state, uint64_t bound) {
  if (bound <= 1) return 0;
  const uint64_t limit = UINT64_MAX - UINT64_MAX % bound;
  uint64_t r;
  do {
    r = SplitMix64(state);
  } while (r >= limit);
  return r % bound;
}

}  // namespace prefsift
