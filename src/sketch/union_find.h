// Disjoint-set forest with path halving and union by size.
//
// Memory: 8 bytes per element. Thread-safety: not thread-safe; one owner.
#pragma once

#include <cstdint>
#include <vector>

namespace prefsift::sketch {

class UnionFind {
 public:
  explicit UnionFind(uint32_t n);

  uint32_t size() const { return static_cast<uint32_t>(parent_.size()); }

  // Representative of x's set. REQUIRES: x < size().
  uint32_t Find(uint32_t x);

  // Merges the sets of a and b; returns false if they were already one set.
  // REQUIRES: a, b < size().
  bool Union(uint32_t a, uint32_t b);

  // Number of elements in x's set. REQUIRES: x < size().
  uint32_t SetSize(uint32_t x);

 private:
  std::vector<uint32_t> parent_;
  std::vector<uint32_t> set_size_;
};

}  // namespace prefsift::sketch
