// FlatRows and FlatStrings (src/stages/leakage/flat_rows.h, the leakage
// index's flat storage) against the plain layout they replace: a
// std::vector of std::vector, and a std::vector of std::string. Random rows
// (empty ones included), rows grown with Extend, and text with NUL bytes and
// UTF-8; and rows packed (compressed) and unpacked again, which must give
// the same rows. Seeded, so a failure reproduces.
#include <gtest/gtest.h>

#include <cstdint>
#include <string>
#include <vector>

#include "core/random.h"
#include "stages/leakage/flat_rows.h"

namespace prefsift {
namespace {

TEST(FlatRows, EmptyHasNoRows) {
  FlatRows<uint64_t> rows;
  EXPECT_EQ(rows.size(), 0u);
  EXPECT_EQ(rows.values(), 0u);
  FlatStrings texts;
  EXPECT_EQ(texts.size(), 0u);
}

TEST(FlatRows, SameRowsAsVectorOfVectors) {
  uint64_t state = 20261203;
  for (int round = 0; round < 50; ++round) {
    std::vector<std::vector<uint64_t>> ref;
    FlatRows<uint64_t> rows;
    const size_t n = UniformBelow(&state, 300);
    for (size_t i = 0; i < n; ++i) {
      std::vector<uint64_t> row(UniformBelow(&state, round % 2 ? 3 : 60));  // many empty rows in odd rounds
      for (auto& v : row) v = SplitMix64(&state);
      EXPECT_EQ(rows.Add(row), i);
      ref.push_back(row);
      if (UniformBelow(&state, 5) == 0) {  // grow the row just added
        std::vector<uint64_t> more(UniformBelow(&state, 10));
        for (auto& v : more) v = SplitMix64(&state);
        rows.Extend(more);
        ref.back().insert(ref.back().end(), more.begin(), more.end());
      }
    }
    rows.ShrinkToFit();
    ASSERT_EQ(rows.size(), ref.size());
    size_t values = 0;
    for (size_t i = 0; i < ref.size(); ++i) {
      auto got = rows[i];
      EXPECT_EQ(std::vector<uint64_t>(got.begin(), got.end()), ref[i]) << "round " << round << " row " << i;
      values += ref[i].size();
    }
    EXPECT_EQ(rows.values(), values);
  }
}

TEST(FlatStrings, SameTextsAsVectorOfStrings) {
  uint64_t state = 7;
  std::vector<std::string> ref = {"", "a", std::string("nul\0inside", 10), "caf\xc3\xa9 au lait", ""};
  for (int i = 0; i < 500; ++i) {
    std::string s(UniformBelow(&state, 40), ' ');
    for (auto& c : s) c = static_cast<char>(UniformBelow(&state, 256));
    ref.push_back(s);
  }
  FlatStrings texts;
  texts.Reserve(ref.size(), 1000);
  for (const auto& s : ref) texts.Add(s);
  ASSERT_EQ(texts.size(), ref.size());
  for (size_t i = 0; i < ref.size(); ++i) EXPECT_EQ(std::string(texts[i]), ref[i]) << "text " << i;
}

TEST(FlatRows, PackAndUnpackKeepTheRows) {
  uint64_t state = 20261205;
  for (int round = 0; round < 20; ++round) {
    FlatRows<uint32_t> rows;
    std::vector<std::vector<uint32_t>> ref;
    const size_t n = UniformBelow(&state, 400);
    for (size_t i = 0; i < n; ++i) {
      std::vector<uint32_t> row(UniformBelow(&state, 30));
      // Repetitive in some rounds (compresses well), random in others.
      for (auto& v : row) {
        v = static_cast<uint32_t>(round % 2 ? SplitMix64(&state) : UniformBelow(&state, 5));
      }
      rows.Add(row);
      ref.push_back(row);
    }
    const size_t values = rows.values();
    ASSERT_TRUE(rows.Pack());
    EXPECT_TRUE(rows.packed() || values == 0);
    EXPECT_EQ(rows.size(), ref.size());
    EXPECT_EQ(rows.values(), values);
    ASSERT_TRUE(rows.Pack());  // a second Pack changes nothing
    ASSERT_TRUE(rows.Unpack());
    EXPECT_FALSE(rows.packed());
    ASSERT_EQ(rows.size(), ref.size());
    for (size_t i = 0; i < ref.size(); ++i) {
      EXPECT_EQ(std::vector<uint32_t>(rows[i].begin(), rows[i].end()), ref[i]) << "round " << round << " row " << i;
    }
    ASSERT_TRUE(rows.Unpack());  // so does a second Unpack
    EXPECT_EQ(rows.values(), values);
  }
  FlatStrings texts;
  texts.Add("salt marsh heron");
  texts.Add(std::string("a\0b", 3));
  texts.Add("");
  ASSERT_TRUE(texts.Pack());
  ASSERT_TRUE(texts.Unpack());
  EXPECT_EQ(texts[0], "salt marsh heron");
  EXPECT_EQ(texts[1], std::string_view("a\0b", 3));
  EXPECT_EQ(texts[2], "");
}

}  // namespace
}  // namespace prefsift
