// HashPostings: an immutable multimap from 64-bit keys (already hashes) to
// 32-bit values, built once and then only read.
//
// Layout (docs/leakage.md, "Memory"): the distinct keys sorted ascending in
// one array, so a key's ordinal (its rank, the dense id callers use) is its
// position and needs no array of its own; a directory of 2^b bucket starts
// over the keys' top b bits (b chosen for 4 to 8 keys a bucket, so the
// directory is about half a byte a key and mostly stays in cache); each key's
// values as compressed rows (starts_, values_). A lookup reads the two
// directory entries of the key's bucket and compares full keys in that
// bucket's run of sorted keys (one or two cache lines for hashed keys;
// a binary search when many keys share a bucket, as unhashed keys can).
// Before that, SortedKeys' filter (key_filter.h, 2 bytes a key) turns away
// almost every absent key, most of what the leakage check looks up.
// About 10.5 bytes a key plus 4 a key and 4 a value, against 17 to 34 bytes a
// key for the slots of an open-addressing table at a load factor of 0.35-0.7.
//
// Keys 0 and 1 are stored as the same key (1); with hashed keys that merges
// two of 2^64 values.
//
// A caller that needs only part of the table for a while can free the rest:
// DropValues (lookups of ordinals only) and DropKeys (values by ordinal only),
// and later SetValues (rows made again from the caller's own data).
// Thread-safety: Build once on one thread; const members may then run concurrently.
#pragma once

#include <algorithm>
#include <cstdint>
#include <span>
#include <utility>
#include <tuple>
#include <vector>

#include "stages/leakage/sorted_keys.h"

namespace prefsift {

class HashPostings {
 public:
  // Builds from (key, value) pairs; repeated pairs are kept once and each
  // key's values are returned in ascending order.
  void Build(std::vector<std::pair<uint64_t, uint32_t>> entries) {
    for (auto& e : entries) e.first = Fix(e.first);
    std::sort(entries.begin(), entries.end());
    entries.erase(std::unique(entries.begin(), entries.end()), entries.end());
    size_t distinct = 0;
    for (size_t i = 0; i < entries.size(); ++i) distinct += i == 0 || entries[i].first != entries[i - 1].first;
    std::vector<uint64_t> keys(distinct);
    std::vector<uint32_t>(distinct + 1).swap(starts_);
    std::vector<uint32_t>(entries.size()).swap(values_);
    size_t d = 0;
    for (size_t i = 0; i < entries.size(); ++i) {
      if (i == 0 || entries[i].first != entries[i - 1].first) {
        keys[d] = entries[i].first;
        starts_[d++] = static_cast<uint32_t>(i);
      }
      values_[i] = entries[i].second;
    }
    starts_[distinct] = static_cast<uint32_t>(entries.size());
    num_keys_ = distinct;
    num_entries_ = entries.size();
    std::vector<std::pair<uint64_t, uint32_t>>().swap(entries);
    keys_.Build(std::move(keys), 8);
  }

  // The values stored under `key` (empty when absent).
  // REQUIRES: neither DropKeys nor DropValues since the last Build.
  std::span<const uint32_t> Find(uint64_t key) const {
    const int64_t d = Ordinal(key);
    return d < 0 ? std::span<const uint32_t>() : Values(static_cast<uint32_t>(d));
  }

  // The rank of `key` among the distinct keys in ascending order (keys 0 and
  // 1 counted as 1), or -1 when absent. A caller can use it as a dense id.
  // REQUIRES: no DropKeys since the last Build.
  int64_t Ordinal(uint64_t key) const {
    return keys_.Rank(Fix(key));
  }

  // Ordinal of each of `keys` into out[i] (out.size() == keys.size()): the
  // same results as one Ordinal call each. Keys the filter turns away (most
  // absent keys) are done first; the rest have the reads of up to 16 keys in
  // flight at once (prefetched directory entries, then key runs), which
  // matters when the table is far larger than the cache.
  void Ordinals(std::span<const uint64_t> keys, std::span<int64_t> out) const {
    if (keys_.empty()) {
      std::fill(out.begin(), out.end(), int64_t{-1});
      return;
    }
    constexpr size_t kBatch = 16;
    uint64_t key[kBatch];
    uint32_t at[kBatch], lo[kBatch], hi[kBatch];
    // The first batch's filter words, then each batch asks for the next
    // batch's while it checks its own (prefetches: the answers are the same).
    for (size_t j = 0; j < std::min(kBatch, keys.size()); ++j) keys_.PrefetchFilter(Fix(keys[j]));
    for (size_t base = 0; base < keys.size(); base += kBatch) {
      const size_t m = std::min(kBatch, keys.size() - base);
      const size_t next_end = std::min(keys.size(), base + 2 * kBatch);
      for (size_t j = base + kBatch; j < next_end; ++j) keys_.PrefetchFilter(Fix(keys[j]));
      // The keys that pass the filter, packed without branches (the filter's
      // reads are independent, so they overlap too).
      size_t live = 0;
      for (size_t j = 0; j < m; ++j) {
        const uint64_t k = Fix(keys[base + j]);
        out[base + j] = -1;
        key[live] = k;
        at[live] = static_cast<uint32_t>(j);
        live += keys_.MayContain(k);
      }
      for (size_t j = 0; j < live; ++j) keys_.PrefetchBucket(key[j]);
      for (size_t j = 0; j < live; ++j) {
        std::tie(lo[j], hi[j]) = keys_.Bucket(key[j]);
        keys_.PrefetchRun(lo[j]);
      }
      for (size_t j = 0; j < live; ++j) out[base + at[j]] = keys_.Search(key[j], lo[j], hi[j]);
    }
  }

  // The values of the key of rank `ordinal` (REQUIRES: ordinal < keys(), and
  // no DropValues since the last Build or SetValues).
  std::span<const uint32_t> Values(uint32_t ordinal) const {
    return std::span<const uint32_t>(values_.data() + starts_[ordinal], starts_[ordinal + 1] - starts_[ordinal]);
  }

  // Frees the keys, the directory and the filter: Values still work, Ordinal and Find not.
  void DropKeys() {
    keys_ = SortedKeys();  // (a move: the old vectors' blocks are freed)
  }
  // Frees the values: Ordinal still works, Values and Find not.
  void DropValues() {
    std::vector<uint32_t>().swap(starts_);
    std::vector<uint32_t>().swap(values_);
  }
  // Sets the values again (after DropValues): key of rank d holds
  // values[starts[d], starts[d + 1]). REQUIRES: starts.size() == keys() + 1,
  // starts ascending from 0 to values.size(), each row ascending and distinct.
  void SetValues(std::vector<uint32_t> starts, std::vector<uint32_t> values) {
    starts_ = std::move(starts);
    values_ = std::move(values);
  }

  // Distinct (key, value) pairs, and distinct keys (kept by DropKeys and DropValues).
  size_t entries() const { return num_entries_; }
  size_t keys() const { return num_keys_; }
  // Heap bytes held (capacities; docs/leakage.md "Memory").
  uint64_t bytes() const { return key_bytes() + value_bytes(); }
  uint64_t key_bytes() const { return keys_.bytes(); }
  uint64_t value_bytes() const { return starts_.capacity() * 4 + values_.capacity() * 4; }

 private:
  static uint64_t Fix(uint64_t k) { return k == 0 ? 1 : k; }

  SortedKeys keys_;                // distinct keys, ascending; ordinal = position (8 keys a bucket)
  std::vector<uint32_t> starts_;  // key of rank d: values_[starts_[d], starts_[d + 1])
  std::vector<uint32_t> values_;
  size_t num_keys_ = 0, num_entries_ = 0;
};

}  // namespace prefsift
