// The n-gram index's per-gram tables (src/stages/leakage/ngram_overlap.h),
// which the flat index derives from one table (gram -> items) and the items'
// gram rows instead of storing them, against a reference built from the word
// strings themselves: for every gram a text holds, its evaluation frequency
// (items holding it), the first item holding it, the first word where that
// item holds it and its length; the number of distinct grams; and the ids
// CollectIds finds in each item's own text. Many repeated grams (a vocabulary
// of six words) and short items (the whole-item rule) on purpose. Seeded.
#include <gtest/gtest.h>

#include <cstdint>
#include <map>
#include <set>
#include <string>
#include <vector>

#include "core/random.h"
#include "stages/leakage/ngram_overlap.h"

namespace prefsift {
namespace {

std::vector<std::string> SplitWords(const std::string& s) {
  std::vector<std::string> w;
  std::string cur;
  for (char c : s) {
    if (c == ' ') {
      if (!cur.empty()) w.push_back(cur);
      cur.clear();
    } else {
      cur += c;
    }
  }
  if (!cur.empty()) w.push_back(cur);
  return w;
}

std::string JoinWords(const std::vector<std::string>& w, size_t from, size_t n) {
  std::string s;
  for (size_t i = from; i < from + n; ++i) s += (i > from ? " " : "") + w[i];
  return s;
}

TEST(NgramTables, DerivedTablesMatchWordStrings) {
  const char* vocab[] = {"fern", "moss", "kelp", "reed", "sedge", "rush"};
  for (int n : {3, 5}) {
    uint64_t state = 20261203 + static_cast<uint64_t>(n);
    std::vector<std::string> texts;
    for (int i = 0; i < 400; ++i) {
      const size_t words = 1 + UniformBelow(&state, 12);  // 1..12: skipped, short and long items
      std::string t;
      for (size_t k = 0; k < words; ++k) t += (k ? " " : "") + std::string(vocab[UniformBelow(&state, 6)]);
      texts.push_back(t);
    }
    NgramOptions o;
    o.n = n;
    o.min_eval_words = 2;
    NgramIndex idx(texts, o);
    // Reference: gram string -> items holding it; each indexed length.
    std::map<std::string, std::set<uint32_t>> holders;
    std::set<size_t> lengths;
    bool any_long = false;
    for (uint32_t i = 0; i < texts.size(); ++i) {
      const auto w = SplitWords(texts[i]);
      if (w.size() < 2) continue;
      const size_t len = w.size() < size_t(n) ? w.size() : size_t(n);
      lengths.insert(len);
      any_long = any_long || len == size_t(n);
      for (size_t p = 0; p + len <= w.size(); ++p) holders[JoinWords(w, p, len)].insert(i);
    }
    EXPECT_EQ(idx.grams(), holders.size()) << "n " << n;
    for (uint32_t i = 0; i < texts.size(); ++i) {
      const auto w = SplitWords(texts[i]);
      // The indexed grams this text holds, as strings.
      std::set<std::string> want;
      for (size_t len : lengths) {
        if (len == size_t(n) && !any_long) continue;
        for (size_t p = 0; p + len <= w.size(); ++p) {
          const std::string g = JoinWords(w, p, len);
          if (holders.count(g)) want.insert(g);
        }
      }
      std::vector<uint32_t> ids;
      idx.CollectIds(texts[i], &ids);
      ASSERT_EQ(ids.size(), want.size()) << "n " << n << " text " << i;
      std::set<std::string> got;
      for (uint32_t id : ids) {
        const uint32_t ex = idx.ExampleItem(id);
        const auto ew = SplitWords(texts[ex]);
        ASSERT_LE(idx.ExampleWord(id) + idx.GramWords(id), ew.size());
        const std::string g = JoinWords(ew, idx.ExampleWord(id), idx.GramWords(id));
        got.insert(g);
        ASSERT_TRUE(holders.count(g)) << g;
        EXPECT_EQ(idx.EvalFrequency(id), holders[g].size()) << g;
        EXPECT_EQ(ex, *holders[g].begin()) << g;  // the first item holding it
        // The first word where the example item holds it.
        size_t first = 0;
        while (JoinWords(ew, first, idx.GramWords(id)) != g) ++first;
        EXPECT_EQ(idx.ExampleWord(id), first) << g;
      }
      EXPECT_EQ(got, want) << "n " << n << " text " << i;
    }
  }
}

// DropPostings frees each gram's item list and RestorePostings makes it again
// from the items' gram ids (the pipeline stage's pass 1, docs/leakage.md
// "Memory"): the lists, seen through Coverage of one gram at a time (the
// items holding it, ascending), and every per-gram table must be the same as
// the index built in one go; CollectIds keeps working in between, and
// Coverage after DropLookup. Repeated grams within an item on purpose.
TEST(NgramTables, PostingsMadeAgainAreTheSame) {
  const char* vocab[] = {"fern", "moss", "kelp", "reed"};
  uint64_t state = 20261204;
  std::vector<std::string> texts;
  for (int i = 0; i < 300; ++i) {
    const size_t words = 1 + UniformBelow(&state, 14);
    std::string t;
    for (size_t k = 0; k < words; ++k) t += (k ? " " : "") + std::string(vocab[UniformBelow(&state, 4)]);
    texts.push_back(t);
  }
  NgramOptions o;
  o.n = 4;
  o.min_eval_words = 2;
  NgramIndex built(texts, o), dropped(texts, o);
  ASSERT_EQ(built.grams(), dropped.grams());
  auto items_of = [](const NgramIndex& idx, uint32_t id) {
    std::vector<uint32_t> items;
    const uint32_t one[] = {id};
    for (const CoverageHit& h : idx.Coverage(one)) items.push_back(h.item);
    return items;
  };
  dropped.DropPostings();
  for (uint32_t i = 0; i < texts.size(); ++i) {
    std::vector<uint32_t> a, b;
    built.CollectIds(texts[i], &a);
    dropped.CollectIds(texts[i], &b);
    EXPECT_EQ(a, b) << "text " << i;
  }
  dropped.RestorePostings();
  dropped.DropLookup();
  EXPECT_EQ(built.indexed_grams(), dropped.indexed_grams());
  for (uint32_t id = 0; id < built.grams(); ++id) {
    EXPECT_EQ(items_of(built, id), items_of(dropped, id)) << "gram " << id;
    EXPECT_EQ(built.EvalFrequency(id), dropped.EvalFrequency(id));
    EXPECT_EQ(built.ExampleItem(id), dropped.ExampleItem(id));
    EXPECT_EQ(built.ExampleWord(id), dropped.ExampleWord(id));
    EXPECT_EQ(built.GramWords(id), dropped.GramWords(id));
  }
}

}  // namespace
}  // namespace prefsift
