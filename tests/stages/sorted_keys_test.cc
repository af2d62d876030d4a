// Differential test of SortedKeys (src/stages/leakage/sorted_keys.h, the near
// detector's template shingles with a bucket directory) against the plain
// lookup it replaced: std::lower_bound over the sorted vector. Same rank (or
// absent) for every key stored and for many absent ones, on random hashed
// keys, keys that crowd one bucket (small integers, keys differing only in
// their low bits), the keys 0, 1 and UINT64_MAX (none merged with another),
// the empty set and a set built again. Seeded, so a failure reproduces.
#include <gtest/gtest.h>

#include <algorithm>
#include <cstdint>
#include <vector>

#include "core/random.h"
#include "stages/leakage/sorted_keys.h"

namespace prefsift {
namespace {

int64_t PlainRank(const std::vector<uint64_t>& sorted, uint64_t key) {
  auto at = std::lower_bound(sorted.begin(), sorted.end(), key);
  return at != sorted.end() && *at == key ? at - sorted.begin() : -1;
}

std::vector<uint64_t> SortedDistinct(std::vector<uint64_t> v) {
  std::sort(v.begin(), v.end());
  v.erase(std::unique(v.begin(), v.end()), v.end());
  return v;
}

// Builds from `keys` (made sorted and distinct) and checks every stored key,
// its neighbours and `probes` random keys drawn from `state`.
void ExpectSameAsLowerBound(std::vector<uint64_t> keys, uint64_t* state, size_t probes) {
  keys = SortedDistinct(std::move(keys));
  SortedKeys set;
  set.Build(keys);
  ASSERT_EQ(set.size(), keys.size());
  ASSERT_TRUE(std::equal(set.keys().begin(), set.keys().end(), keys.begin(), keys.end()));
  auto expect = [&](uint64_t k) {
    EXPECT_EQ(set.Rank(k), PlainRank(keys, k)) << "key " << k;
    EXPECT_EQ(set.Contains(k), PlainRank(keys, k) >= 0) << "key " << k;
  };
  for (uint64_t k : keys) {
    expect(k);
    expect(k - 1);
    expect(k + 1);
  }
  for (size_t i = 0; i < probes; ++i) expect(SplitMix64(state));
  for (uint64_t k : {uint64_t{0}, uint64_t{1}, uint64_t{2}, UINT64_MAX - 1, UINT64_MAX}) expect(k);
}

TEST(SortedKeys, Empty) {
  SortedKeys never_built;
  EXPECT_EQ(never_built.Rank(0), -1);
  EXPECT_FALSE(never_built.Contains(42));
  EXPECT_TRUE(never_built.empty());
  uint64_t state = 1;
  ExpectSameAsLowerBound({}, &state, 100);
}

TEST(SortedKeys, RandomHashedKeys) {
  uint64_t state = 20261203;
  for (int round = 0; round < 100; ++round) {
    const size_t n = UniformBelow(&state, round % 10 == 0 ? 40000 : 3000);
    std::vector<uint64_t> keys;
    for (size_t i = 0; i < n; ++i) keys.push_back(SplitMix64(&state));
    ExpectSameAsLowerBound(keys, &state, 500);
    if (HasFailure()) return;
  }
}

TEST(SortedKeys, CrowdedBuckets) {
  // Unhashed keys: small integers all fall in the first bucket (searched by
  // bisection), keys differing only in their low bits share one, and most
  // buckets are empty.
  std::vector<uint64_t> keys;
  for (uint64_t i = 0; i < 5000; ++i) keys.push_back(i * 3);
  for (uint64_t i = 0; i < 40; ++i) keys.push_back((uint64_t{0xABCD} << 48) | (i * 5));
  for (uint64_t i = 0; i < 40; ++i) keys.push_back(UINT64_MAX - i * 2);
  uint64_t state = 5;
  ExpectSameAsLowerBound(keys, &state, 1000);
  const std::vector<uint64_t> sorted = SortedDistinct(keys);
  SortedKeys set;
  set.Build(sorted);
  for (uint64_t k = 0; k < 15100; ++k) ASSERT_EQ(set.Rank(k), PlainRank(sorted, k)) << k;
}

TEST(SortedKeys, ZeroOneAndMaxAreKeysOfTheirOwn) {
  uint64_t state = 4;
  ExpectSameAsLowerBound({0, 1, UINT64_MAX}, &state, 10);
  ExpectSameAsLowerBound({1}, &state, 10);
  ExpectSameAsLowerBound({0}, &state, 10);
  SortedKeys set;
  set.Build({1, 2});
  EXPECT_EQ(set.Rank(0), -1);
  EXPECT_EQ(set.Rank(1), 0);
}

TEST(SortedKeys, BuiltAgain) {
  SortedKeys set;
  set.Build({10, 11, 12});
  set.Build({12, 13});
  EXPECT_EQ(set.Rank(10), -1);
  EXPECT_EQ(set.Rank(12), 0);
  EXPECT_EQ(set.Rank(13), 1);
  EXPECT_EQ(set.size(), 2u);
}

}  // namespace
}  // namespace prefsift
