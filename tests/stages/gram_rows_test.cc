// GramRows (src/stages/leakage/gram_rows.h, the leakage stage's per-record
// n-gram ids) against the plain layout it replaced: three std::vectors a
// record. Random rows (empty ones, rows longer than a block), rows written
// from several threads at once, Reset and clear. Seeded, so a failure
// reproduces.
#include <gtest/gtest.h>

#include <cstdint>
#include <vector>

#include "core/random.h"
#include "core/shared_arena.h"
#include "on_threads.h"
#include "stages/leakage/gram_rows.h"

namespace prefsift {
namespace {

struct PlainRow {
  std::vector<uint32_t> prompt, answer, ends;
};

std::vector<uint32_t> Values(std::span<const uint32_t> s) { return {s.begin(), s.end()}; }

PlainRow RandomRow(uint64_t* state, size_t i) {
  PlainRow r;
  const uint64_t kind = UniformBelow(state, 10);
  if (kind == 0) return r;  // no row
  const size_t long_row = (i % 997 == 5) ? (size_t{1} << 18) + 17 : 0;  // longer than a block
  const size_t np = long_row ? long_row : UniformBelow(state, 6);
  for (size_t k = 0; k < np; ++k) r.prompt.push_back(static_cast<uint32_t>(UniformBelow(state, 1u << 30)));
  const size_t cands = UniformBelow(state, 4);
  for (size_t c = 0; c < cands; ++c) {
    const size_t na = UniformBelow(state, 4);
    if (na == 0) continue;
    for (size_t k = 0; k < na; ++k) r.answer.push_back(static_cast<uint32_t>(UniformBelow(state, 1000)));
    r.ends.push_back(static_cast<uint32_t>(c));
    r.ends.push_back(static_cast<uint32_t>(r.answer.size()));
  }
  return r;
}

void ExpectSame(const GramRows& rows, const std::vector<PlainRow>& plain) {
  ASSERT_EQ(rows.size(), plain.size());
  for (size_t i = 0; i < plain.size(); ++i) {
    const PlainRow& p = plain[i];
    const bool empty = p.prompt.empty() && p.answer.empty() && p.ends.empty();
    EXPECT_EQ(rows.Has(i), !empty) << i;
    const GramRow g = rows[i];
    EXPECT_EQ(Values(g.prompt()), p.prompt) << i;
    EXPECT_EQ(Values(g.answer()), p.answer) << i;
    EXPECT_EQ(Values(g.ends()), p.ends) << i;
    ASSERT_EQ(g.answer_count(), p.ends.size() / 2) << i;
    for (size_t k = 0; k < g.answer_count(); ++k) {
      EXPECT_EQ(g.answer_end(k), std::make_pair(p.ends[2 * k], p.ends[2 * k + 1])) << i;
    }
  }
}

// SharedArena (src/core/shared_arena.h), which GramRows and HitRows allocate
// from: distinct, 8-byte aligned places that keep what was written, a request
// of 0 bytes included, across blocks.
TEST(SharedArena, PlacesAreAlignedDistinctAndKeepTheirBytes) {
  SharedArena arena;
  std::vector<std::pair<unsigned char*, size_t>> got;
  uint64_t state = 3;
  for (size_t k = 0; k < 3000; ++k) {
    const size_t n = k == 0 ? 0 : UniformBelow(&state, 3000);
    auto* p = static_cast<unsigned char*>(arena.Allocate(n));
    ASSERT_EQ(reinterpret_cast<uintptr_t>(p) % 8, 0u);
    for (size_t b = 0; b < n; ++b) p[b] = static_cast<unsigned char>(k + b);
    got.emplace_back(p, n);
  }
  for (size_t k = 1; k < got.size(); ++k) ASSERT_NE(got[k].first, got[k - 1].first);
  for (size_t k = 0; k < got.size(); ++k) {
    for (size_t b = 0; b < got[k].second; ++b) ASSERT_EQ(got[k].first[b], static_cast<unsigned char>(k + b)) << k;
  }
  EXPECT_GE(arena.bytes(), size_t{1} << 20);
  arena.clear();
  EXPECT_EQ(arena.bytes(), 0u);
}

TEST(GramRows, EmptyRowsReadAsNoIds) {
  GramRows rows;
  rows.resize(3);
  rows.Set(1, {}, {}, {});
  for (size_t i = 0; i < 3; ++i) {
    EXPECT_FALSE(rows.Has(i));
    EXPECT_TRUE(rows[i].prompt().empty());
    EXPECT_EQ(rows[i].answer_count(), 0u);
  }
  EXPECT_TRUE(GramRow().ends().empty());
}

// n rows of RandomRow from one generator state seeded with `seed`.
std::vector<PlainRow> RandomRows(uint64_t seed, size_t n) {
  uint64_t state = seed;
  std::vector<PlainRow> rows;
  for (size_t i = 0; i < n; ++i) rows.push_back(RandomRow(&state, i));
  return rows;
}

TEST(GramRows, SameRowsAsPlainVectors) {
  std::vector<PlainRow> plain = RandomRows(20261203, 5000);
  GramRows rows;
  rows.resize(plain.size());
  for (size_t i = 0; i < plain.size(); ++i) rows.Set(i, plain[i].prompt, plain[i].answer, plain[i].ends);
  ExpectSame(rows, plain);
  // Reset drops one row and leaves the others as they were.
  rows.Reset(7);
  plain[7] = PlainRow();
  ExpectSame(rows, plain);
  rows.clear();
  EXPECT_EQ(rows.size(), 0u);
  rows.resize(2);
  rows.Set(0, plain[1].prompt, plain[1].answer, plain[1].ends);
  EXPECT_EQ(Values(rows[0].prompt()), plain[1].prompt);
}

TEST(GramRows, RowsSetFromSeveralThreadsAtOnce) {
  std::vector<PlainRow> plain = RandomRows(77, 40000);
  GramRows rows;
  rows.resize(plain.size());
  OnThreads(plain.size(), 4, [&](size_t i) { rows.Set(i, plain[i].prompt, plain[i].answer, plain[i].ends); });
  ExpectSame(rows, plain);
}

}  // namespace
}  // namespace prefsift
