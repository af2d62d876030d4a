// Differential test of HashPostings (src/stages/leakage/hash_postings.h, the
// leakage detectors' sorted keys with a bucket directory) against a plain
// std::map from key to the set of its values: same values, in ascending
// order, for every key looked up, on random keys with repeated pairs, keys
// that shared a probe chain in the earlier open-addressing layout, keys that
// share a bucket, the keys 0 and 1 (stored as one key, as the header says),
// the empty table, a rebuilt table and a table with parts dropped and set
// again; and each key's ordinal (its rank in the map's ascending order, the
// n-gram index's gram id). Seeded, so a failure reproduces.
#include <gtest/gtest.h>

#include <cstdint>
#include <iterator>
#include <map>
#include <set>
#include <utility>
#include <vector>

#include "core/random.h"
#include "stages/leakage/hash_postings.h"

namespace prefsift {
namespace {

using Entries = std::vector<std::pair<uint64_t, uint32_t>>;
using Reference = std::map<uint64_t, std::set<uint32_t>>;

// The header's contract, written the plain way: 0 is stored as 1.
uint64_t Stored(uint64_t k) { return k == 0 ? 1 : k; }

Reference MakeReference(const Entries& entries) {
  Reference ref;
  for (const auto& [k, v] : entries) ref[Stored(k)].insert(v);
  return ref;
}

// Find, and Ordinal: the key's rank among the distinct stored keys in
// ascending order (the map's order), -1 when absent; Values(rank) == Find.
void ExpectSameLookup(const HashPostings& table, const Reference& ref, uint64_t key) {
  auto got = table.Find(key);
  std::vector<uint32_t> want;
  int64_t want_rank = -1;
  if (auto it = ref.find(Stored(key)); it != ref.end()) {
    want.assign(it->second.begin(), it->second.end());
    want_rank = std::distance(ref.begin(), it);
  }
  EXPECT_EQ(std::vector<uint32_t>(got.begin(), got.end()), want) << "key " << key;
  EXPECT_EQ(table.Ordinal(key), want_rank) << "key " << key;
  const uint64_t one[] = {key};
  int64_t batch[1] = {-2};
  table.Ordinals(one, batch);
  EXPECT_EQ(batch[0], want_rank) << "key " << key << " (Ordinals)";
  if (want_rank >= 0) {
    auto by_rank = table.Values(static_cast<uint32_t>(want_rank));
    EXPECT_EQ(std::vector<uint32_t>(by_rank.begin(), by_rank.end()), want) << "key " << key;
  }
}

// Builds the table, checks its sizes, every stored key and `probes` absent
// ones drawn from `state`.
void ExpectSameAsMap(const Entries& entries, uint64_t* state, size_t probes) {
  HashPostings table;
  table.Build(entries);
  const Reference ref = MakeReference(entries);
  size_t pairs = 0;
  for (const auto& [k, vs] : ref) pairs += vs.size();
  EXPECT_EQ(table.keys(), ref.size());
  EXPECT_EQ(table.entries(), pairs);
  for (const auto& [k, vs] : ref) ExpectSameLookup(table, ref, k);
  for (size_t i = 0; i < probes; ++i) ExpectSameLookup(table, ref, SplitMix64(state));
  for (uint64_t k : {uint64_t{0}, uint64_t{1}, uint64_t{2}, UINT64_MAX}) ExpectSameLookup(table, ref, k);
  // Ordinals over a batch longer than its block of 16, stored and absent keys mixed.
  std::vector<uint64_t> keys;
  for (const auto& [k, vs] : ref) {
    keys.push_back(k);
    keys.push_back(SplitMix64(state));
  }
  keys.push_back(0);
  std::vector<int64_t> got(keys.size(), -2);
  table.Ordinals(keys, got);
  for (size_t i = 0; i < keys.size(); ++i) EXPECT_EQ(got[i], table.Ordinal(keys[i])) << "key " << keys[i];
}

TEST(HashPostings, EmptyTable) {
  HashPostings never_built;
  EXPECT_TRUE(never_built.Find(0).empty());
  EXPECT_TRUE(never_built.Find(42).empty());
  EXPECT_EQ(never_built.keys(), 0u);
  EXPECT_EQ(never_built.entries(), 0u);
  uint64_t state = 1;
  ExpectSameAsMap({}, &state, 100);
}

TEST(HashPostings, RandomKeysWithRepeats) {
  uint64_t state = 20261203;
  for (int round = 0; round < 200; ++round) {
    const size_t n = UniformBelow(&state, 3000);
    // Few distinct keys in some rounds (many values per key, many repeated
    // pairs), many in others.
    const uint64_t key_pool = 1 + UniformBelow(&state, round % 2 ? 50 : 100000);
    Entries entries;
    for (size_t i = 0; i < n; ++i) {
      const uint64_t k = SplitMix64(&state) % key_pool * 0x100000001ULL;
      const uint32_t v = static_cast<uint32_t>(UniformBelow(&state, 64));
      entries.push_back({k, v});
      if (UniformBelow(&state, 4) == 0) entries.push_back({k, v});  // a repeated pair
    }
    ExpectSameAsMap(entries, &state, 200);
    if (HasFailure()) return;
  }
}

TEST(HashPostings, KeysThatCollideInTheirSlot) {
  // In the earlier open-addressing layout the slot was bits 20 and up of
  // key * 0x9E3779B97F4A7C15, masked: keys whose product differs only below
  // bit 20 shared a home slot and one probe chain. Kept as arbitrary keys.
  // Multiples of the inverse of the multiplier mod 2^64 give products 1, 2, 3...
  uint64_t inv = 0x9E3779B97F4A7C15ULL;  // Newton's iteration for the inverse mod 2^64
  for (int i = 0; i < 6; ++i) inv *= 2 - 0x9E3779B97F4A7C15ULL * inv;
  ASSERT_EQ(inv * 0x9E3779B97F4A7C15ULL, 1u);
  Entries entries;
  for (uint32_t i = 1; i <= 600; ++i) entries.push_back({inv * i, i});            // one home slot
  for (uint32_t i = 0; i < 600; ++i) entries.push_back({inv * (i << 20), i});     // consecutive slots
  for (uint32_t i = 0; i < 50; ++i) entries.push_back({inv * ((i << 20) | 7), i + 1000});  // between them
  uint64_t state = 3;
  ExpectSameAsMap(entries, &state, 1000);
  // Absent keys that land in the crowded chains.
  HashPostings table;
  table.Build(entries);
  const Reference ref = MakeReference(entries);
  for (uint64_t i = 601; i < 1200; ++i) ExpectSameLookup(table, ref, inv * i);
  for (uint64_t i = 600; i < 1200; ++i) ExpectSameLookup(table, ref, inv * (i << 20));
}

TEST(HashPostings, KeysThatShareABucket) {
  // Buckets are the keys' top bits: small keys all fall in the first bucket
  // (a run searched by bisection), keys differing only in their low bits
  // share one, and a bucket may be empty.
  Entries entries;
  for (uint32_t i = 0; i < 5000; ++i) entries.push_back({i * 3, i});
  for (uint32_t i = 0; i < 40; ++i) entries.push_back({(uint64_t{0xABCD} << 48) | (i * 5), i});
  for (uint32_t i = 0; i < 40; ++i) entries.push_back({UINT64_MAX - i * 2, i + 7});
  uint64_t state = 5;
  ExpectSameAsMap(entries, &state, 1000);
  HashPostings table;
  table.Build(entries);
  const Reference ref = MakeReference(entries);
  for (uint64_t k = 0; k < 15100; ++k) ExpectSameLookup(table, ref, k);
  for (uint64_t k = 0; k < 210; ++k) ExpectSameLookup(table, ref, (uint64_t{0xABCD} << 48) | k);
  for (uint64_t k = 0; k < 90; ++k) ExpectSameLookup(table, ref, UINT64_MAX - k);
}

TEST(HashPostings, DropAndSetValues) {
  // DropValues keeps the ordinals, SetValues puts rows back; DropKeys keeps
  // the values by ordinal and the counts.
  uint64_t state = 6;
  Entries entries;
  for (int i = 0; i < 3000; ++i) {
    entries.push_back({SplitMix64(&state) % 700, static_cast<uint32_t>(UniformBelow(&state, 90))});
  }
  HashPostings whole, table;
  whole.Build(entries);
  table.Build(entries);
  const Reference ref = MakeReference(entries);
  std::vector<uint32_t> starts = {0}, values;
  for (uint32_t d = 0; d < whole.keys(); ++d) {
    for (uint32_t v : whole.Values(d)) values.push_back(v);
    starts.push_back(static_cast<uint32_t>(values.size()));
  }
  table.DropValues();
  EXPECT_EQ(table.keys(), ref.size());
  EXPECT_EQ(table.entries(), whole.entries());
  for (const auto& [k, vs] : ref) EXPECT_EQ(table.Ordinal(k), whole.Ordinal(k)) << k;
  for (uint64_t k = 0; k < 800; ++k) EXPECT_EQ(table.Ordinal(k), whole.Ordinal(k)) << k;
  table.SetValues(starts, values);
  for (const auto& [k, vs] : ref) ExpectSameLookup(table, ref, k);
  table.DropKeys();
  EXPECT_EQ(table.keys(), ref.size());
  EXPECT_EQ(table.Ordinal(entries.front().first), -1);  // the keys are gone
  for (uint32_t d = 0; d < whole.keys(); ++d) {
    auto a = whole.Values(d), b = table.Values(d);
    EXPECT_EQ(std::vector<uint32_t>(a.begin(), a.end()), std::vector<uint32_t>(b.begin(), b.end())) << d;
  }
}

TEST(HashPostings, ZeroAndOneAreOneKey) {
  Entries entries = {{0, 5}, {1, 3}, {1, 5}, {2, 9}, {0, 1}};
  uint64_t state = 4;
  ExpectSameAsMap(entries, &state, 10);
  HashPostings table;
  table.Build(entries);
  auto zero = table.Find(0);
  EXPECT_EQ(std::vector<uint32_t>(zero.begin(), zero.end()), (std::vector<uint32_t>{1, 3, 5}));
}

TEST(HashPostings, RebuildReplacesTheContents) {
  HashPostings table;
  table.Build({{10, 1}, {11, 2}, {12, 3}});
  Entries second = {{12, 7}, {13, 8}};
  table.Build(second);
  const Reference ref = MakeReference(second);
  for (uint64_t k = 9; k <= 14; ++k) ExpectSameLookup(table, ref, k);
  EXPECT_EQ(table.keys(), 2u);
  table.Build({});
  EXPECT_TRUE(table.Find(12).empty());
  EXPECT_EQ(table.keys(), 0u);
}

}  // namespace
}  // namespace prefsift
