// Tests of src/stages/sparse_rows.h: rows without a value read as empty, set
// rows read back, Mutable makes a row, Reset and clear drop them, and rows set
// from many threads at once (as Observe does) are all there.
#include "stages/sparse_rows.h"

#include <thread>
#include <vector>

#include <gtest/gtest.h>

namespace prefsift {
namespace {

TEST(SparseRows, EmptyUntilSet) {
  SparseRows<std::vector<int>> rows;
  rows.resize(5);
  EXPECT_EQ(rows.size(), 5u);
  for (size_t i = 0; i < 5; ++i) {
    EXPECT_FALSE(rows.Has(i));
    EXPECT_TRUE(rows[i].empty());
  }
  rows.Set(3, {7, 8});
  EXPECT_TRUE(rows.Has(3));
  EXPECT_EQ(rows[3], (std::vector<int>{7, 8}));
  rows.Mutable(1).push_back(4);
  rows.Mutable(3).push_back(9);
  EXPECT_EQ(rows[1], (std::vector<int>{4}));
  EXPECT_EQ(rows[3], (std::vector<int>{7, 8, 9}));
  rows.Reset(3);
  EXPECT_FALSE(rows.Has(3));
  EXPECT_TRUE(rows[3].empty());
  rows.resize(7);  // growing keeps the rows
  EXPECT_EQ(rows[1], (std::vector<int>{4}));
  rows.clear();
  EXPECT_EQ(rows.size(), 0u);
}

TEST(SparseRows, DistinctRowsFromManyThreads) {
  SparseRows<std::vector<int>> rows;
  rows.resize(10000);
  std::vector<std::thread> pool;
  for (int t = 0; t < 4; ++t) {
    pool.emplace_back([&rows, t] {
      for (int i = t; i < 10000; i += 4) {
        if (i % 3 == 0) rows.Set(static_cast<size_t>(i), {i});
      }
    });
  }
  for (auto& th : pool) th.join();
  for (int i = 0; i < 10000; ++i) {
    ASSERT_EQ(rows.Has(static_cast<size_t>(i)), i % 3 == 0);
    if (i % 3 == 0) ASSERT_EQ(rows[static_cast<size_t>(i)], (std::vector<int>{i}));
  }
}

}  // namespace
}  // namespace prefsift
