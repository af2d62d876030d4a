// Memory accounting for the leakage index (docs/leakage.md, "Memory"): the
// bytes each structure holds, counted from capacities, with the heap's own
// overhead per block estimated (a block of n bytes takes n + 8 rounded up to
// 16, at least 32: glibc's malloc on 64-bit, from memory). Used by the
// benchmark that prints the index's breakdown; no decision depends on it. And
// FreeVector, to give a vector's block back.
// Thread-safety: pure functions.
#pragma once

#include <algorithm>
#include <cstdint>
#include <string>
#include <vector>

namespace prefsift {

struct MemoryPart {
  std::string name;
  uint64_t bytes = 0;
};

// Frees a vector's heap block (`v = {}` keeps the capacity: it assigns an
// empty initializer list).
template <typename T>
void FreeVector(std::vector<T>& v) {
  std::vector<T>().swap(v);
}

// One heap block of `n` bytes (0 for none).
inline uint64_t HeapBlock(uint64_t n) { return n == 0 ? 0 : std::max<uint64_t>(32, (n + 8 + 15) / 16 * 16); }

template <typename T>
uint64_t VectorBytes(const std::vector<T>& v) {
  return HeapBlock(v.capacity() * sizeof(T));
}

// A vector of vectors: the outer block, and each inner block.
template <typename T>
uint64_t NestedBytes(const std::vector<std::vector<T>>& v) {
  uint64_t b = VectorBytes(v);
  for (const auto& x : v) b += VectorBytes(x);
  return b;
}

// A vector of strings: the outer block, and each string's heap block when it
// does not fit the string itself (15 bytes in libstdc++).
inline uint64_t StringsBytes(const std::vector<std::string>& v) {
  uint64_t b = VectorBytes(v);
  for (const auto& s : v) b += s.capacity() > 15 ? HeapBlock(s.capacity() + 1) : 0;
  return b;
}

}  // namespace prefsift
