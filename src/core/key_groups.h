// Grouping items by a 128-bit key in parallel (hash partitions), with a
// result that does not depend on the number of threads.
//
// GroupRepeatedKeys(keys, pool) looks at items 0..n-1 with keys[i] and returns
// the groups of items that share a key with at least one other item: members
// in increasing item order, groups in order of their first member (the order a
// serial scan with a hash map would find them). Items whose key is unique are
// only counted (KeyGroups::distinct counts every distinct key).
//
// How: items are scattered into 256 partitions by the key's top byte (in item
// order, chunk by chunk), each partition is sorted by (key, item) on its own,
// and the partitions' groups are merged by first member. Every step's output is
// a pure function of `keys`, so any thread count gives the same groups.
//
// Thread-safety: uses `pool` (one ParallelFor at a time, from the calling
// thread); pure otherwise. REQUIRES: keys.size() < 2^32.
#pragma once

#include <cstdint>
#include <span>
#include <vector>

#include "core/hash.h"

namespace prefsift {

class ThreadPool;

struct KeyGroups {
  // Group g's members are members[offsets[g] .. offsets[g + 1]), item indexes.
  std::vector<uint32_t> offsets{0};
  std::vector<uint32_t> members;
  uint64_t distinct = 0;  // distinct keys among all items (groups of one included)

  size_t size() const { return offsets.size() - 1; }
  std::span<const uint32_t> operator[](size_t g) const {
    return std::span<const uint32_t>(members.data() + offsets[g], offsets[g + 1] - offsets[g]);
  }
};

KeyGroups GroupRepeatedKeys(std::span<const Hash128> keys, ThreadPool& pool);

}  // namespace prefsift
