// Grouping by key in hash partitions; see key_groups.h.
#include "core/key_groups.h"

#include <algorithm>

#include "core/thread_pool.h"

namespace prefsift {
namespace {

constexpr size_t kPartitions = 256;

size_t PartitionOf(const Hash128& k) { return static_cast<size_t>(k.hi >> 56); }

struct Keyed {
  Hash128 key;
  uint32_t item;
};

// One partition's groups of two or more: flat members, and where each starts.
struct PartGroups {
  std::vector<uint32_t> starts, members;  // starts: offsets into members
  uint64_t distinct = 0;
};

}  // namespace

KeyGroups GroupRepeatedKeys(std::span<const Hash128> keys, ThreadPool& pool) {
  const size_t n = keys.size();
  KeyGroups out;
  if (n == 0) return out;
  // 1. Scatter items into partitions, keeping item order inside each: count
  // per (chunk, partition), place chunk by chunk.
  const size_t chunks = std::min<size_t>(std::max<size_t>(1, n / 65536), 64);
  const size_t per_chunk = (n + chunks - 1) / chunks;
  std::vector<uint32_t> count(chunks * kPartitions, 0);
  pool.ParallelFor(chunks, [&](size_t c, unsigned) {
    const size_t end = std::min(n, (c + 1) * per_chunk);
    for (size_t i = c * per_chunk; i < end; ++i) ++count[c * kPartitions + PartitionOf(keys[i])];
  });
  std::vector<size_t> part_begin(kPartitions + 1, 0);
  std::vector<size_t> place(chunks * kPartitions);  // where chunk c writes into partition p
  {
    size_t at = 0;
    for (size_t p = 0; p < kPartitions; ++p) {
      part_begin[p] = at;
      for (size_t c = 0; c < chunks; ++c) {
        place[c * kPartitions + p] = at;
        at += count[c * kPartitions + p];
      }
    }
    part_begin[kPartitions] = at;
  }
  std::vector<Keyed> keyed(n);
  pool.ParallelFor(chunks, [&](size_t c, unsigned) {
    size_t* next = &place[c * kPartitions];
    const size_t end = std::min(n, (c + 1) * per_chunk);
    for (size_t i = c * per_chunk; i < end; ++i) keyed[next[PartitionOf(keys[i])]++] = Keyed{keys[i], static_cast<uint32_t>(i)};
  });
  // 2. Each partition on its own: sort by (key, item), runs of equal keys.
  std::vector<PartGroups> parts(kPartitions);
  pool.ParallelFor(kPartitions, [&](size_t p, unsigned) {
    Keyed* b = keyed.data() + part_begin[p];
    Keyed* e = keyed.data() + part_begin[p + 1];
    std::sort(b, e, [](const Keyed& x, const Keyed& y) { return x.key != y.key ? x.key < y.key : x.item < y.item; });
    PartGroups& pg = parts[p];
    for (Keyed* run = b; run != e;) {
      Keyed* end = run + 1;
      while (end != e && end->key == run->key) ++end;
      ++pg.distinct;
      if (end - run >= 2) {
        pg.starts.push_back(static_cast<uint32_t>(pg.members.size()));
        for (Keyed* k = run; k != end; ++k) pg.members.push_back(k->item);
      }
      run = end;
    }
    pg.starts.push_back(static_cast<uint32_t>(pg.members.size()));
  });
  std::vector<Keyed>().swap(keyed);
  // 3. Merge: groups in order of their first member (distinct items, so the
  // order is total).
  struct Ref {
    uint32_t first, part, group;
  };
  std::vector<Ref> refs;
  size_t total_members = 0;
  for (size_t p = 0; p < kPartitions; ++p) {
    out.distinct += parts[p].distinct;
    total_members += parts[p].members.size();
    for (size_t g = 0; g + 1 < parts[p].starts.size(); ++g) {
      refs.push_back(Ref{parts[p].members[parts[p].starts[g]], static_cast<uint32_t>(p), static_cast<uint32_t>(g)});
    }
  }
  std::sort(refs.begin(), refs.end(), [](const Ref& x, const Ref& y) { return x.first < y.first; });
  out.offsets.reserve(refs.size() + 1);
  out.members.reserve(total_members);
  for (const Ref& r : refs) {
    const PartGroups& pg = parts[r.part];
    out.members.insert(out.members.end(), pg.members.begin() + pg.starts[r.group],
                       pg.members.begin() + pg.starts[r.group + 1]);
    out.offsets.push_back(static_cast<uint32_t>(out.members.size()));
  }
  return out;
}

}  // namespace prefsift
