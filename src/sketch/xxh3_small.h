// XXH3_64bits_withSeed with its length dispatch inlined at the call site.
//
// XXH3_64bits_withSeed is one out-of-line function that picks a path by the
// input's length (0-16, 17-128, 129-240 bytes, longer). The shingler hashes
// short inputs in tight loops (a word, an n-gram of word hashes: 40 bytes at
// n = 5), where the call and the dispatch cost about as much as the hash.
// Xxh3Seeded takes the same paths in the same order (xxhash.h's
// XXH3_64bits_internal), inlined, so with a length known at compile time only
// one path is left: the same value as XXH3_64bits_withSeed for every input
// (a test compares the two at every length up to 300 bytes).
//
// Thread-safety: a pure function.
#pragma once

#include <cstddef>
#include <cstdint>

#ifndef XXH_INLINE_ALL
#define XXH_INLINE_ALL
#endif
#include <xxhash.h>

namespace prefsift::sketch {

inline uint64_t Xxh3Seeded(const void* data, size_t len, uint64_t seed) {
  const auto* in = static_cast<const xxh_u8*>(data);
  if (len <= 16) return XXH3_len_0to16_64b(in, len, XXH3_kSecret, seed);
  if (len <= 128) return XXH3_len_17to128_64b(in, len, XXH3_kSecret, sizeof(XXH3_kSecret), seed);
  return XXH3_64bits_withSeed(data, len, seed);
}

}  // namespace prefsift::sketch
