// Tests of src/sketch/radix_sort: SortWords gives std::sort's order (the
// reference is the C++ standard library's sort) on inputs of every shape the
// key and band sorts see: empty, short (std::sort path), long with shared
// high bytes (one key partition), many repeats, and random words.
#include "sketch/radix_sort.h"

#include <algorithm>
#include <random>
#include <vector>

#include <gtest/gtest.h>

namespace prefsift::sketch {
namespace {

void ExpectSorted(std::vector<uint64_t> v) {
  std::vector<uint64_t> want = v;
  std::sort(want.begin(), want.end());
  SortWords(v);
  EXPECT_EQ(v, want);
}

TEST(RadixSort, SameOrderAsStdSort) {
  std::mt19937_64 rng(20261203);
  ExpectSorted({});
  ExpectSorted({5, 3, 9, 3});
  for (size_t n : {63u, 64u, 65u, 1000u, 100000u}) {
    std::vector<uint64_t> v(n);
    for (auto& x : v) x = rng();
    ExpectSorted(v);
    for (auto& x : v) x = (uint64_t{0xabc} << 52) | (rng() & 0xfffff);  // shared top bytes
    ExpectSorted(v);
    for (auto& x : v) x = rng() % 7;  // many repeats
    ExpectSorted(v);
    for (auto& x : v) x = (rng() % 50) << 32 | (rng() & 0xffffffffu);  // key << 32 | place, as key sketches sort
    ExpectSorted(v);
  }
}

}  // namespace
}  // namespace prefsift::sketch
