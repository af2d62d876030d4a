// SortedKeys: an immutable set of 64-bit keys (already hashes) kept sorted,
// with a directory over the keys' top bits so that a membership test or a
// rank costs two directory reads and a short scan instead of a binary search.
//
// The near detector's template shingles (docs/leakage.md, "Template text")
// are looked up once per training shingle; with a binary search over ten
// thousand keys that was the largest part of the per-prompt check on
// template text ("Per-prompt check" there). A key's rank is its position in
// keys(), the same as std::lower_bound over the sorted vector gives; unlike
// HashPostings no key is merged with another (0 is a key like any other).
//
// Layout: keys_ ascending and distinct; dir_ has 2^b + 1 entries, dir_[j]
// the first key whose top b bits are >= j, b chosen for one to two keys a
// bucket (4 bytes of directory for about 1.5 keys: 2.7 bytes a key; 4.7
// with the filter below). A bucket crowded by keys that are not hashes falls
// back to a binary search.
// Before the directory, a KeyFilter (key_filter.h, two bytes a key) turns
// away most absent keys: the directory and the keys of a large set are far
// larger than the cache, and most keys looked up are absent.
// Thread-safety: Build once on one thread; const members may then run concurrently.
#pragma once

#include <algorithm>
#include <cstdint>
#include <span>
#include <utility>
#include <vector>

#include "stages/leakage/key_filter.h"

namespace prefsift {

class SortedKeys {
 public:
  // REQUIRES: `keys` ascending and distinct. `keys_per_bucket`: the mean
  // bucket size the directory aims at (a power of two; 2 by default; 8 for
  // HashPostings, which trades lookups for memory).
  void Build(std::vector<uint64_t> keys, size_t keys_per_bucket = 2) {
    keys_ = std::move(keys);
    int bits = 1;
    while ((size_t{1} << bits) * keys_per_bucket < keys_.size() && bits < 32) ++bits;
    shift_ = 64 - bits;
    const size_t buckets = size_t{1} << bits;
    std::vector<uint32_t>(buckets + 1).swap(dir_);
    size_t k = 0;
    for (size_t j = 0; j <= buckets; ++j) {
      while (k < keys_.size() && (keys_[k] >> shift_) < j) ++k;
      dir_[j] = static_cast<uint32_t>(k);
    }
    filter_.Build(keys_);
  }

  // The position of `key` in keys(), or -1 when absent.
  int64_t Rank(uint64_t key) const {
    if (!filter_.MayContain(key)) return -1;  // (always so when empty)
    const auto [lo, hi] = Bucket(key);
    return Search(key, lo, hi);
  }
  bool Contains(uint64_t key) const { return Rank(key) >= 0; }

  // The steps of Rank, for callers that look up many keys at once and keep
  // several reads in flight (HashPostings::Ordinals): MayContain first (a
  // false means absent), then the bucket. REQUIRES: !empty().
  bool MayContain(uint64_t key) const { return filter_.MayContain(key); }
  void PrefetchFilter(uint64_t key) const { filter_.Prefetch(key); }
  void PrefetchBucket(uint64_t key) const { __builtin_prefetch(dir_.data() + (key >> shift_)); }
  std::pair<uint32_t, uint32_t> Bucket(uint64_t key) const {
    const size_t b = static_cast<size_t>(key >> shift_);
    return {dir_[b], dir_[b + 1]};
  }
  void PrefetchRun(uint32_t lo) const { __builtin_prefetch(keys_.data() + lo); }
  // `key` among keys()[lo, hi), its bucket's run: its position or -1.
  int64_t Search(uint64_t key, uint32_t lo, uint32_t hi) const {
    const uint64_t* const base = keys_.data();
    const uint64_t* p = base + lo;
    const uint64_t* const end = base + hi;
    if (end - p > kLinearRun) p = std::lower_bound(p, end, key);  // a crowded bucket (keys that are not hashes)
    for (; p < end; ++p) {
      if (*p >= key) return *p == key ? p - base : -1;
    }
    return -1;
  }

  std::span<const uint64_t> keys() const { return keys_; }
  size_t size() const { return keys_.size(); }
  bool empty() const { return keys_.empty(); }
  // Heap bytes held (capacities, without the allocator's overhead).
  uint64_t bytes() const { return keys_.capacity() * 8 + dir_.capacity() * 4 + filter_.bytes(); }

 private:
  static constexpr ptrdiff_t kLinearRun = 16;
  std::vector<uint64_t> keys_;
  std::vector<uint32_t> dir_;
  KeyFilter filter_;  // over keys_
  int shift_ = 63;
};

}  // namespace prefsift
