// SmallVector: values inside the object up to N, on the heap beyond; copies,
// moves and equality behave like std::vector's (the reference in every check).
#include "core/small_vector.h"

#include <gtest/gtest.h>

#include <numeric>
#include <utility>
#include <vector>

#include "core/hash.h"

namespace prefsift {
namespace {

TEST(SmallVector, EmptyByDefault) {
  SmallVector<int> v;
  EXPECT_TRUE(v.empty());
  EXPECT_EQ(v.size(), 0u);
  EXPECT_TRUE(v.is_inline());
  EXPECT_EQ(v.begin(), v.end());
  EXPECT_EQ(v.to_vector(), std::vector<int>{});
}

TEST(SmallVector, SizeIsInlineValuesPlusTwoCounts) {
  // The point of the type (docs/performance.md): 4 values inline, 8 bytes of counts.
  EXPECT_EQ(sizeof(SmallVector<int>), 4 * sizeof(int) + 8);
  EXPECT_EQ(sizeof(SmallVector<uint32_t>), 4 * sizeof(uint32_t) + 8);
  EXPECT_EQ(sizeof(SmallVector<Hash128>), 4 * sizeof(Hash128) + 8);
  // Fewer inline bytes than a pointer: the pointer sets the size.
  EXPECT_EQ(sizeof(SmallVector<uint8_t, 2>), sizeof(void*) + 8);
}

TEST(SmallVector, InlineUpToNThenHeap) {
  SmallVector<int> v;
  for (int i = 0; i < 4; ++i) {
    v.push_back(i * 10);
    EXPECT_TRUE(v.is_inline()) << i;
  }
  EXPECT_EQ(v.capacity(), 4u);
  v.push_back(40);
  EXPECT_FALSE(v.is_inline());
  EXPECT_GE(v.capacity(), 5u);
  EXPECT_EQ(v.to_vector(), (std::vector<int>{0, 10, 20, 30, 40}));
  EXPECT_EQ(v.front(), 0);
  EXPECT_EQ(v.back(), 40);
  v[2] = 7;
  EXPECT_EQ(v[2], 7);
}

TEST(SmallVector, MatchesStdVectorAtEverySizeUpTo300) {
  // 256 is limits.max_candidates' default; go past it.
  SmallVector<uint32_t> v;
  std::vector<uint32_t> ref;
  for (uint32_t i = 0; i < 300; ++i) {
    v.push_back(i * 7 + 1);
    ref.push_back(i * 7 + 1);
    ASSERT_EQ(v.size(), ref.size());
    ASSERT_TRUE(v == ref) << i;
    ASSERT_TRUE(std::equal(v.begin(), v.end(), ref.begin()));
  }
  EXPECT_EQ(std::accumulate(v.begin(), v.end(), uint64_t{0}), std::accumulate(ref.begin(), ref.end(), uint64_t{0}));
}

TEST(SmallVector, PushBackOfOwnElementWhileGrowing) {
  SmallVector<int> v{1, 2, 3, 4};
  v.push_back(v[0]);  // the reference points into the inline storage that growth leaves
  EXPECT_EQ(v.to_vector(), (std::vector<int>{1, 2, 3, 4, 1}));
  for (int i = 0; i < 20; ++i) v.push_back(v.back());
  EXPECT_EQ(v.size(), 25u);
  EXPECT_EQ(v.back(), 1);
}

TEST(SmallVector, ReserveResizeClear) {
  SmallVector<int> v;
  v.reserve(3);
  EXPECT_TRUE(v.is_inline());
  v.reserve(9);
  EXPECT_FALSE(v.is_inline());
  EXPECT_EQ(v.capacity(), 9u);
  EXPECT_TRUE(v.empty());
  v.resize(3);
  EXPECT_EQ(v.to_vector(), (std::vector<int>{0, 0, 0}));
  v.resize(5, -1);
  EXPECT_EQ(v.to_vector(), (std::vector<int>{0, 0, 0, -1, -1}));
  v.resize(2);
  EXPECT_EQ(v.to_vector(), (std::vector<int>{0, 0}));
  v.clear();
  EXPECT_TRUE(v.empty());
  EXPECT_EQ(v.capacity(), 9u);  // like std::vector::clear
  SmallVector<int> w(6, 3);
  EXPECT_EQ(w.to_vector(), std::vector<int>(6, 3));
}

TEST(SmallVector, FromAndToStdVector) {
  for (size_t n : {0, 1, 4, 5, 256}) {
    std::vector<int> ref(n);
    std::iota(ref.begin(), ref.end(), 1);
    SmallVector<int> a(ref);
    EXPECT_EQ(a.to_vector(), ref) << n;
    EXPECT_EQ(a.is_inline(), n <= 4) << n;
    SmallVector<int> b{9, 9, 9, 9, 9, 9};
    b = ref;
    EXPECT_EQ(b.to_vector(), ref) << n;
    auto s = a.span();
    EXPECT_EQ(std::vector<int>(s.begin(), s.end()), ref) << n;
  }
}

TEST(SmallVector, CopyAndMoveInlineAndHeap) {
  for (size_t n : {0, 3, 4, 5, 40}) {
    SmallVector<Hash128> a;
    for (size_t i = 0; i < n; ++i) a.push_back(Hash128{i, i * 3});
    const std::vector<Hash128> ref = a.to_vector();

    SmallVector<Hash128> copy(a);
    EXPECT_TRUE(copy == a) << n;
    EXPECT_EQ(copy.to_vector(), ref);
    if (n > 0) {
      copy[0].lo = 999;  // a deep copy: the original is untouched
      EXPECT_EQ(a.to_vector(), ref);
    }

    SmallVector<Hash128> moved(std::move(copy));
    EXPECT_EQ(moved.size(), n);
    EXPECT_TRUE(copy.empty());  // NOLINT(bugprone-use-after-move): moved-from is empty and usable
    copy.push_back(Hash128{1, 1});
    EXPECT_EQ(copy.size(), 1u);

    SmallVector<Hash128> assigned{Hash128{7, 7}};
    assigned = a;
    EXPECT_TRUE(assigned == a) << n;
    SmallVector<Hash128> big;
    for (int i = 0; i < 9; ++i) big.push_back(Hash128{0, 0});
    big = std::move(assigned);  // heap target released, source taken over
    EXPECT_EQ(big.to_vector(), ref) << n;
    EXPECT_TRUE(assigned.empty());  // NOLINT(bugprone-use-after-move)
    const SmallVector<Hash128>& alias = big;
    big = alias;  // self-assignment keeps the values
    EXPECT_EQ(big.to_vector(), ref) << n;
  }
}

TEST(SmallVector, EqualityLikeStdVector) {
  SmallVector<int> a{1, 2, 3};
  SmallVector<int> b{1, 2, 3};
  SmallVector<int> c{1, 2, 4};
  SmallVector<int> d{1, 2};
  EXPECT_TRUE(a == b);
  EXPECT_FALSE(a == c);
  EXPECT_FALSE(a == d);
  EXPECT_TRUE(a != c);
  // Same values, one inline and one on the heap (reserved past N): equal.
  SmallVector<int> e;
  e.reserve(50);
  for (int x : {1, 2, 3}) e.push_back(x);
  EXPECT_FALSE(e.is_inline());
  EXPECT_TRUE(a == e);
  EXPECT_TRUE(a == (std::vector<int>{1, 2, 3}));
  EXPECT_FALSE(a == (std::vector<int>{1, 2}));
}

}  // namespace
}  // namespace prefsift
