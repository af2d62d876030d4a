// HitRows (src/stages/screen/hit_rows.h, the screen's per-record findings)
// give back exactly the RecordHits they were given: every field, empty and
// long strings (a preview or pointer longer than an arena block), flags
// without hits, rows set from several threads at once. Seeded, so a failure
// reproduces.
#include <gtest/gtest.h>

#include <cstdint>
#include <string>
#include <vector>

#include "core/random.h"
#include "on_threads.h"
#include "stages/screen/hit_rows.h"

namespace prefsift {
namespace {

RecordHits RandomHits(uint64_t* state, size_t i) {
  RecordHits r;
  const size_t n = UniformBelow(state, 4);
  for (size_t k = 0; k < n; ++k) {
    Hit h;
    h.part = static_cast<HitPart>(UniformBelow(state, 4));
    h.index = static_cast<uint32_t>(UniformBelow(state, 1u << 31));
    h.rule = static_cast<uint32_t>(UniformBelow(state, 60));
    h.begin = static_cast<uint32_t>(UniformBelow(state, 1u << 20));
    h.end = h.begin + static_cast<uint32_t>(UniformBelow(state, 100));
    h.action = static_cast<screen::Action>(UniformBelow(state, 4));
    h.confidence = static_cast<float>(UniformBelow(state, 1000)) / 1000.0f;
    h.text_hash = UniformBelow(state, UINT64_MAX);
    if (h.part == HitPart::kMetadata) h.meta_pointer = "/meta/" + std::to_string(i) + "/note";
    h.preview = std::string(UniformBelow(state, 40), '*') + "@example.org";
    if (i % 1999 == 3 && k == 0) h.preview = std::string((size_t{1} << 20) + 5, 'x');  // longer than a block
    r.hits.push_back(h);
  }
  r.drop = UniformBelow(state, 5) == 0;
  r.rewrite = r.drop || UniformBelow(state, 2) == 0;
  return r;
}

void ExpectSame(const RecordHits& a, const RecordHits& b, size_t i) {
  EXPECT_EQ(a.drop, b.drop) << i;
  EXPECT_EQ(a.rewrite, b.rewrite) << i;
  ASSERT_EQ(a.hits.size(), b.hits.size()) << i;
  for (size_t k = 0; k < a.hits.size(); ++k) {
    const Hit &x = a.hits[k], &y = b.hits[k];
    EXPECT_EQ(x.part, y.part) << i;
    EXPECT_EQ(x.index, y.index) << i;
    EXPECT_EQ(x.rule, y.rule) << i;
    EXPECT_EQ(x.begin, y.begin) << i;
    EXPECT_EQ(x.end, y.end) << i;
    EXPECT_EQ(x.action, y.action) << i;
    EXPECT_EQ(x.confidence, y.confidence) << i;
    EXPECT_EQ(x.text_hash, y.text_hash) << i;
    EXPECT_EQ(x.meta_pointer, y.meta_pointer) << i;
    EXPECT_EQ(x.preview, y.preview) << i;
  }
}

TEST(HitRows, GiveBackWhatTheyWereGiven) {
  uint64_t state = 20261203;
  std::vector<RecordHits> plain;
  for (size_t i = 0; i < 6000; ++i) plain.push_back(RandomHits(&state, i));
  HitRows rows;
  rows.resize(plain.size() + 1);
  for (size_t i = 0; i < plain.size(); ++i) rows.Set(i, plain[i]);
  for (size_t i = 0; i < plain.size(); ++i) {
    EXPECT_TRUE(rows.Has(i));
    EXPECT_EQ(rows.hit_count(i), plain[i].hits.size());
    EXPECT_EQ(rows.drop(i), plain[i].drop);
    EXPECT_EQ(rows.rewrite(i), plain[i].rewrite);
    ExpectSame(rows.Get(i), plain[i], i);
  }
  // A row never set, and a row reset, read as no findings.
  const size_t last = plain.size();
  EXPECT_FALSE(rows.Has(last));
  EXPECT_EQ(rows.hit_count(last), 0u);
  EXPECT_FALSE(rows.rewrite(last));
  EXPECT_TRUE(rows.Get(last).hits.empty());
  rows.Reset(0);
  EXPECT_FALSE(rows.Has(0));
  ExpectSame(rows.Get(1), plain[1], 1);
  rows.clear();
  EXPECT_EQ(rows.size(), 0u);
}

TEST(HitRows, RowsSetFromSeveralThreadsAtOnce) {
  uint64_t state = 5;
  std::vector<RecordHits> plain;
  for (size_t i = 0; i < 20000; ++i) plain.push_back(RandomHits(&state, i));
  HitRows rows;
  rows.resize(plain.size());
  OnThreads(plain.size(), 4, [&](size_t i) { rows.Set(i, plain[i]); });
  for (size_t i = 0; i < plain.size(); ++i) ExpectSame(rows.Get(i), plain[i], i);
}

}  // namespace
}  // namespace prefsift
