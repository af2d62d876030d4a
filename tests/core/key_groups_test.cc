// Tests of src/core/key_groups: the groups of repeated keys equal those a
// serial scan with a hash map finds (groups in order of first member, members
// in item order, distinct keys counted), for any number of threads.
#include "core/key_groups.h"

#include <cstdint>
#include <random>
#include <unordered_map>
#include <vector>

#include <gtest/gtest.h>

#include "core/thread_pool.h"

namespace prefsift {
namespace {

// The serial reference: a hash map from key to group, in item order.
KeyGroups SerialGroups(const std::vector<Hash128>& keys) {
  std::unordered_map<Hash128, size_t, Hash128Hasher> group_of;
  std::vector<std::vector<uint32_t>> groups;
  for (uint32_t i = 0; i < keys.size(); ++i) {
    auto [it, fresh] = group_of.try_emplace(keys[i], groups.size());
    if (fresh) groups.emplace_back();
    groups[it->second].push_back(i);
  }
  KeyGroups out;
  out.distinct = groups.size();
  for (const auto& g : groups) {
    if (g.size() < 2) continue;
    out.members.insert(out.members.end(), g.begin(), g.end());
    out.offsets.push_back(static_cast<uint32_t>(out.members.size()));
  }
  return out;
}

std::vector<Hash128> RandomKeys(size_t n, size_t distinct, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::vector<Hash128> pool(distinct);
  for (auto& k : pool) k = Hash128{rng(), rng()};
  std::vector<Hash128> keys(n);
  for (auto& k : keys) k = pool[rng() % distinct];
  return keys;
}

void ExpectSame(const KeyGroups& want, const KeyGroups& got, const std::string& what) {
  EXPECT_EQ(want.distinct, got.distinct) << what;
  EXPECT_EQ(want.offsets, got.offsets) << what;
  EXPECT_EQ(want.members, got.members) << what;
}

TEST(KeyGroups, SameAsASerialScanForAnyThreadCount) {
  for (unsigned threads : {1u, 2u, 3u, 8u}) {
    ThreadPool pool(threads);
    for (size_t n : {0u, 1u, 2u, 17u, 1000u, 70000u, 300000u}) {
      for (size_t distinct : {size_t{1}, n / 2 + 1, n + 1, 3 * n + 1}) {
        const auto keys = RandomKeys(n, distinct, n * 31 + distinct);
        ExpectSame(SerialGroups(keys), GroupRepeatedKeys(keys, pool),
                   "threads " + std::to_string(threads) + " n " + std::to_string(n) + " distinct " +
                       std::to_string(distinct));
      }
    }
  }
}

TEST(KeyGroups, KeysThatShareTheirTopByteStayApart) {
  // Same partition (top byte), different keys: separate groups.
  std::vector<Hash128> keys = {{0xAB00000000000001ULL, 5}, {0xAB00000000000002ULL, 5}, {0xAB00000000000001ULL, 5},
                               {0xAB00000000000001ULL, 6}, {0xAB00000000000002ULL, 5}};
  ThreadPool pool(2);
  KeyGroups g = GroupRepeatedKeys(keys, pool);
  EXPECT_EQ(g.distinct, 3u);
  ASSERT_EQ(g.size(), 2u);
  EXPECT_EQ(std::vector<uint32_t>(g[0].begin(), g[0].end()), (std::vector<uint32_t>{0, 2}));
  EXPECT_EQ(std::vector<uint32_t>(g[1].begin(), g[1].end()), (std::vector<uint32_t>{1, 4}));
}

}  // namespace
}  // namespace prefsift
