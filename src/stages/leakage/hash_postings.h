// HashPostings: an immutable multimap from 64-bit keys (already hashes) to
// 32-bit values, built once and then only read. Open addressing with linear
// probing over the distinct keys; a lookup of an absent key touches one or two
// cache lines, which is what the leakage detectors do millions of times.
//
// Keys 0 and 1 are stored as the same key (0 marks an empty slot); with hashed
// keys that merges two of 2^64 values.
// Thread-safety: Build once on one thread; Find may then run concurrently.
#pragma once

#include <algorithm>
#include <cstdint>
#include <span>
#include <utility>
#include <vector>

namespace prefsift {

class HashPostings {
 public:
  // Builds from (key, value) pairs; repeated pairs are kept once and each
  // key's values are returned in ascending order.
  void Build(std::vector<std::pair<uint64_t, uint32_t>> entries) {
    for (auto& e : entries) e.first = Fix(e.first);
    std::sort(entries.begin(), entries.end());
    entries.erase(std::unique(entries.begin(), entries.end()), entries.end());
    values_.resize(entries.size());
    starts_.clear();
    std::vector<uint64_t> keys;
    for (size_t i = 0; i < entries.size(); ++i) {
      if (i == 0 || entries[i].first != entries[i - 1].first) {
        keys.push_back(entries[i].first);
        starts_.push_back(static_cast<uint32_t>(i));
      }
      values_[i] = entries[i].second;
    }
    starts_.push_back(static_cast<uint32_t>(entries.size()));
    std::vector<std::pair<uint64_t, uint32_t>>().swap(entries);  // free before the slots are made
    size_t cap = 16;
    while (cap * 7 < keys.size() * 10) cap *= 2;  // load factor <= 0.7
    mask_ = cap - 1;
    slot_keys_.assign(cap, 0);
    slot_index_.assign(cap, 0);
    for (uint32_t d = 0; d < keys.size(); ++d) {
      size_t s = Slot(keys[d]);
      while (slot_keys_[s] != 0) s = (s + 1) & mask_;
      slot_keys_[s] = keys[d];
      slot_index_[s] = d;
    }
  }

  // The values stored under `key` (empty when absent).
  std::span<const uint32_t> Find(uint64_t key) const {
    const int64_t d = Ordinal(key);
    return d < 0 ? std::span<const uint32_t>() : Values(static_cast<uint32_t>(d));
  }

  // The rank of `key` among the distinct keys in ascending order (keys 0 and
  // 1 counted as 1), or -1 when absent. A caller can use it as a dense id.
  int64_t Ordinal(uint64_t key) const {
    if (slot_keys_.empty()) return -1;
    key = Fix(key);
    for (size_t s = Slot(key);; s = (s + 1) & mask_) {
      uint64_t k = slot_keys_[s];
      if (k == 0) return -1;
      if (k == key) return slot_index_[s];
    }
  }

  // The values of the key of rank `ordinal` (REQUIRES: ordinal < keys()).
  std::span<const uint32_t> Values(uint32_t ordinal) const {
    return std::span<const uint32_t>(values_.data() + starts_[ordinal], starts_[ordinal + 1] - starts_[ordinal]);
  }

  size_t entries() const { return values_.size(); }
  size_t keys() const { return starts_.empty() ? 0 : starts_.size() - 1; }
  // Heap bytes held (capacities; docs/leakage.md "Memory").
  uint64_t bytes() const {
    return (slot_keys_.capacity() * 8 + slot_index_.capacity() * 4 + starts_.capacity() * 4 + values_.capacity() * 4);
  }

 private:
  static uint64_t Fix(uint64_t k) { return k == 0 ? 1 : k; }
  size_t Slot(uint64_t k) const { return static_cast<size_t>((k * 0x9E3779B97F4A7C15ULL) >> 20) & mask_; }
  std::vector<uint64_t> slot_keys_;
  std::vector<uint32_t> slot_index_;
  std::vector<uint32_t> starts_;
  std::vector<uint32_t> values_;
  size_t mask_ = 0;
};

}  // namespace prefsift
