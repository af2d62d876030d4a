// Differential test of the leakage tables' membership prefilter
// (src/stages/leakage/key_filter.h) and of the look-ups that consult it
// (SortedKeys::Rank, HashPostings::Ordinal and Ordinals): against a binary
// search over the sorted, distinct keys, on random present and absent keys,
// keys 0 and 1 (HashPostings stores 0 as 1), keys that are not uniform (all
// small, as the prefix filter's smallest hashes; consecutive integers), and
// tables of 0 to 40 keys as well as large ones. The filter must never turn
// away a key it was built with; that it turns away most absent keys is
// checked too, so a filter that always says "maybe" does not pass unseen.
// Seeded, so a failure reproduces.
#include <gtest/gtest.h>

#include <algorithm>
#include <cstdint>
#include <utility>
#include <vector>

#include "core/random.h"
#include "stages/leakage/hash_postings.h"
#include "stages/leakage/key_filter.h"
#include "stages/leakage/sorted_keys.h"

namespace prefsift {
namespace {

// The plain reference: the key's position in `sorted` (ascending, distinct), or -1.
int64_t PlainRank(const std::vector<uint64_t>& sorted, uint64_t key) {
  auto it = std::lower_bound(sorted.begin(), sorted.end(), key);
  return it != sorted.end() && *it == key ? it - sorted.begin() : -1;
}

std::vector<uint64_t> SortedDistinct(std::vector<uint64_t> v) {
  std::sort(v.begin(), v.end());
  v.erase(std::unique(v.begin(), v.end()), v.end());
  return v;
}

// Keys to look up for `keys`: each of them, a random key beside each, its
// neighbours, and the edge values (0, 1, 2, max).
std::vector<uint64_t> Probes(const std::vector<uint64_t>& keys, uint64_t* state) {
  std::vector<uint64_t> probes = {0, 1, 2, UINT64_MAX};
  for (uint64_t k : keys) {
    probes.push_back(k);
    probes.push_back(k + 1);
    probes.push_back(k - 1);
    probes.push_back(SplitMix64(state));
    probes.push_back(SplitMix64(state) >> 40);  // small, as the prefix table's keys
  }
  return probes;
}

// SortedKeys and HashPostings built from `keys` (any order, repeats allowed)
// give the reference's ranks for every probe, one at a time and in batches.
void ExpectSameAsReference(const std::vector<uint64_t>& keys, uint64_t* state) {
  const std::vector<uint64_t> sorted = SortedDistinct(keys);
  SortedKeys set;
  set.Build(sorted);
  std::vector<uint64_t> stored;  // HashPostings' contract: 0 is stored as 1
  std::vector<std::pair<uint64_t, uint32_t>> entries;
  for (size_t i = 0; i < keys.size(); ++i) {
    stored.push_back(keys[i] == 0 ? 1 : keys[i]);
    entries.emplace_back(keys[i], static_cast<uint32_t>(i));
  }
  stored = SortedDistinct(stored);
  HashPostings table;
  table.Build(entries);
  const std::vector<uint64_t> probes = Probes(keys, state);
  for (uint64_t k : probes) {
    ASSERT_EQ(set.Rank(k), PlainRank(sorted, k)) << "key " << k << " of " << sorted.size();
    const int64_t want = PlainRank(stored, k == 0 ? 1 : k);
    ASSERT_EQ(table.Ordinal(k), want) << "key " << k << " of " << stored.size();
  }
  std::vector<int64_t> got(probes.size(), -2);
  table.Ordinals(probes, got);
  for (size_t i = 0; i < probes.size(); ++i) {
    ASSERT_EQ(got[i], PlainRank(stored, probes[i] == 0 ? 1 : probes[i])) << "key " << probes[i] << " (Ordinals)";
  }
  // A batch shorter than one block, from an offset.
  if (probes.size() > 5) {
    std::vector<int64_t> part(5, -2);
    table.Ordinals(std::span<const uint64_t>(probes).subspan(3, 5), part);
    for (size_t i = 0; i < 5; ++i) ASSERT_EQ(part[i], table.Ordinal(probes[3 + i]));
  }
}

TEST(KeyFilter, NoFalseNegativesAndFewFalsePositives) {
  uint64_t state = 20261204;
  for (size_t n : {size_t{1}, size_t{2}, size_t{7}, size_t{8}, size_t{9}, size_t{100}, size_t{100000}}) {
    std::vector<uint64_t> keys;
    for (size_t i = 0; i < n; ++i) keys.push_back(SplitMix64(&state));
    KeyFilter f;
    f.Build(keys);
    for (uint64_t k : keys) ASSERT_TRUE(f.MayContain(k)) << k;
    EXPECT_GE(f.bytes(), n / 4 * 8);  // two bytes a key
    EXPECT_LE(f.bytes(), (n + 3) / 4 * 8 + 64);
    if (n < 100000) continue;
    size_t passed = 0;
    for (size_t i = 0; i < n; ++i) passed += f.MayContain(SplitMix64(&state));
    EXPECT_LT(passed, n / 50) << "absent keys passing";  // about 0.5 % expected
  }
}

TEST(KeyFilter, KeysThatAreNotHashes) {
  // Consecutive integers and keys in the lowest 2^-20 of the range: the
  // filter remixes the key, so these are neither lost nor all let through.
  std::vector<uint64_t> small, consecutive;
  uint64_t state = 7;
  for (uint64_t i = 0; i < 50000; ++i) {
    consecutive.push_back(i);
    small.push_back(SplitMix64(&state) >> 20);
  }
  for (const auto* keys : {&small, &consecutive}) {
    KeyFilter f;
    f.Build(*keys);
    for (uint64_t k : *keys) ASSERT_TRUE(f.MayContain(k)) << k;
    size_t passed = 0;
    for (uint64_t i = 0; i < 50000; ++i) passed += f.MayContain(i + 1000000);
    EXPECT_LT(passed, 1000u);
  }
}

TEST(KeyFilter, EmptyAndRebuilt) {
  KeyFilter f;
  EXPECT_FALSE(f.MayContain(0));
  EXPECT_EQ(f.bytes(), 0u);
  const uint64_t some[] = {0, 1, 42};
  f.Build(some);
  for (uint64_t k : some) EXPECT_TRUE(f.MayContain(k));
  f.Build({});
  EXPECT_FALSE(f.MayContain(42));
}

TEST(KeyFilter, LookupsMatchBinarySearchOnTinyTables) {
  uint64_t state = 99;
  for (size_t n = 0; n <= 40; ++n) {
    std::vector<uint64_t> keys;
    for (size_t i = 0; i < n; ++i) keys.push_back(SplitMix64(&state));
    ExpectSameAsReference(keys, &state);
    if (n >= 1) keys[0] = 0;  // with key 0 (HashPostings stores it as 1)
    if (n >= 2) keys[1] = 1;
    ExpectSameAsReference(keys, &state);
    if (HasFatalFailure()) return;
  }
  ExpectSameAsReference({0}, &state);
  ExpectSameAsReference({1}, &state);
  ExpectSameAsReference({0, 1}, &state);
  ExpectSameAsReference({0, 0, 1, 1, 5, 5}, &state);
}

TEST(KeyFilter, LookupsMatchBinarySearchOnLargeTables) {
  uint64_t state = 31337;
  std::vector<uint64_t> random, small, consecutive;
  for (uint64_t i = 0; i < 60000; ++i) {
    random.push_back(SplitMix64(&state));
    small.push_back(SplitMix64(&state) >> 4);  // top bits zero: crowded directory buckets
    consecutive.push_back(i * 3);
  }
  random.push_back(0);
  random.push_back(1);
  ExpectSameAsReference(random, &state);
  ExpectSameAsReference(small, &state);
  ExpectSameAsReference(consecutive, &state);
}

TEST(KeyFilter, DropKeysFreesTheFilter) {
  std::vector<std::pair<uint64_t, uint32_t>> entries;
  uint64_t state = 5;
  for (uint32_t i = 0; i < 1000; ++i) entries.emplace_back(SplitMix64(&state), i);
  HashPostings table;
  table.Build(entries);
  EXPECT_GE(table.key_bytes(), 1000u * 8 + 2000u);  // keys, directory and two bytes a key of filter
  table.DropKeys();
  EXPECT_EQ(table.key_bytes(), 0u);
  EXPECT_EQ(table.Ordinal(entries[0].first), -1);
}

}  // namespace
}  // namespace prefsift
