#include "core/default_init.h"

#include <gtest/gtest.h>

#include <cstdint>
#include <string>

namespace prefsift {
namespace {

// The allocator changes only what a value-less resize writes: kept elements
// stay, explicit values are written, and the vector works as a vector.
TEST(DefaultInitAllocator, KeepsValuesAndWritesExplicitOnes) {
  FillLaterVector<uint32_t> v;
  v.resize(1000);
  for (uint32_t i = 0; i < v.size(); ++i) v[i] = i * 7;
  v.resize(100000);  // grows (reallocates): the first 1000 move with it
  for (uint32_t i = 0; i < 1000; ++i) ASSERT_EQ(v[i], i * 7);
  v.resize(10);
  v.resize(20, 0xabcdu);  // an explicit value is written
  for (uint32_t i = 0; i < 10; ++i) EXPECT_EQ(v[i], i * 7);
  for (uint32_t i = 10; i < 20; ++i) EXPECT_EQ(v[i], 0xabcdu);
  v.push_back(5);
  EXPECT_EQ(v.back(), 5u);
  FillLaterVector<uint32_t> moved = std::move(v);
  EXPECT_EQ(moved.size(), 21u);
  EXPECT_EQ(moved[3], 21u);
}

// Types with a constructor are still constructed (default-initialisation
// runs it): only trivial types are left unwritten.
TEST(DefaultInitAllocator, ConstructsNonTrivialTypes) {
  FillLaterVector<std::string> v;
  v.resize(3);
  for (const auto& s : v) EXPECT_TRUE(s.empty());
  v.emplace_back("abc");
  EXPECT_EQ(v.back(), "abc");
}

}  // namespace
}  // namespace prefsift
