// Disjoint-set forest; see union_find.h.
#include "sketch/union_find.h"

#include <numeric>
#include <utility>

namespace prefsift::sketch {

UnionFind::UnionFind(uint32_t n) : parent_(n), set_size_(n, 1) {
  std::iota(parent_.begin(), parent_.end(), 0u);
}

uint32_t UnionFind::Find(uint32_t x) {
  while (parent_[x] != x) {
    parent_[x] = parent_[parent_[x]];  // path halving
    x = parent_[x];
  }
  return x;
}

bool UnionFind::Union(uint32_t a, uint32_t b) {
  a = Find(a);
  b = Find(b);
  if (a == b) return false;
  if (set_size_[a] < set_size_[b]) std::swap(a, b);
  parent_[b] = a;
  set_size_[a] += set_size_[b];
  return true;
}

uint32_t UnionFind::SetSize(uint32_t x) { return set_size_[Find(x)]; }

}  // namespace prefsift::sketch
