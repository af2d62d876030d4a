// The Murmur3 64-bit finaliser (Appleby, MurmurHash3 "fmix64"): a bijection on
// 64-bit words with full avalanche, used to derive independent hash values
// from one shingle hash (MinHash slots, key sketches).
// Thread-safety: a pure function.
#pragma once

#include <cstdint>

namespace prefsift::sketch {

inline uint64_t Mix(uint64_t x) {
  x ^= x >> 33;
  x *= 0xff51afd7ed558ccdULL;
  x ^= x >> 33;
  x *= 0xc4ceb9fe1a85ec53ULL;
  x ^= x >> 33;
  return x;
}

}  // namespace prefsift::sketch
