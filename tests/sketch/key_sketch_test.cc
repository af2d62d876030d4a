// Key sketches (bottom-m) and the candidate pairs made from them
// (sketch/key_sketch.h): on template text the pairs stay linear in the
// records while whole-set LSH bands grow faster; planted near duplicates and
// copies of one prompt are still candidates.
#include "sketch/key_sketch.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cstdint>
#include <random>
#include <span>
#include <set>
#include <string>
#include <vector>

#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/shingles.h"
#include "sketch/union_find.h"

namespace prefsift::sketch {
namespace {

std::vector<uint32_t> SketchOf(const std::vector<uint64_t>& shingles, uint32_t m) {
  std::vector<uint32_t> out(m);
  KeySketch(shingles, 0x6b657973ULL, out);
  return out;
}

TEST(KeySketch, SmallestDistinctKeysInOrder) {
  std::vector<uint64_t> set;
  for (uint64_t i = 1; i <= 500; ++i) set.push_back(i * 0x9e3779b97f4a7c15ULL);
  std::vector<uint32_t> a = SketchOf(set, 32);
  EXPECT_TRUE(std::is_sorted(a.begin(), a.end()));
  EXPECT_EQ(std::set<uint32_t>(a.begin(), a.end()).size(), 32u);
  // Order and repeats of the shingles do not matter.
  std::vector<uint64_t> shuffled = set;
  shuffled.insert(shuffled.end(), set.begin(), set.begin() + 200);
  std::mt19937_64 rng(7);
  std::shuffle(shuffled.begin(), shuffled.end(), rng);
  EXPECT_EQ(SketchOf(shuffled, 32), a);
  // Every key of a larger sketch below the 32nd is in the smaller one: the
  // m smallest are a prefix of the 2m smallest.
  std::vector<uint32_t> b = SketchOf(set, 64);
  EXPECT_TRUE(std::equal(a.begin(), a.end(), b.begin()));
  // Fewer distinct shingles than places: the rest are kNoKey.
  std::vector<uint32_t> c = SketchOf({5, 9, 5, 9, 5}, 8);
  EXPECT_NE(c[0], kNoKey);
  EXPECT_NE(c[1], kNoKey);
  for (size_t i = 2; i < c.size(); ++i) EXPECT_EQ(c[i], kNoKey);
}

// Bottom-k sketches merge: the sketch of a union is the m smallest keys of the
// two sketches together (Cohen & Kaplan 2007, "Summarizing data using bottom-k
// sketches"; property from memory), which is also why a near duplicate shares
// most of its keys with the original.
TEST(KeySketch, SketchOfAUnionIsTheSmallestOfBothSketches) {
  std::vector<uint64_t> x, y;
  for (uint64_t i = 0; i < 300; ++i) x.push_back(i * 7919 + 3);
  for (uint64_t i = 150; i < 600; ++i) y.push_back(i * 7919 + 3);
  std::vector<uint64_t> both = x;
  both.insert(both.end(), y.begin(), y.end());
  std::vector<uint32_t> sx = SketchOf(x, 32), sy = SketchOf(y, 32);
  std::set<uint32_t> merged(sx.begin(), sx.end());
  merged.insert(sy.begin(), sy.end());
  std::vector<uint32_t> expect(merged.begin(), merged.end());
  expect.resize(32);
  EXPECT_EQ(SketchOf(both, 32), expect);
}

// A hand-made case: m = 4. Key 1 is in 12 sketches (set aside with
// min_records 10); records 0 and 1 share keys 2 and 3 (half of their three
// informative keys each, above the share 0.34); records 2 and 3 share one
// key of three (below the share); records 4 and 5 hold only key 1 and are
// linked by the sorted neighbourhood.
TEST(KeySketchPairs, InformativeKeysSharedEnoughMakePairs) {
  const uint32_t m = 4;
  std::vector<uint32_t> keys = {
      1, 2, 3, 10,  // 0
      1, 2, 3, 11,  // 1
      1, 20, 21, 22,  // 2
      1, 20, 23, 24,  // 3
      1, kNoKey, kNoKey, kNoKey,  // 4
      1, kNoKey, kNoKey, kNoKey,  // 5
  };
  for (uint32_t r = 6; r < 12; ++r) {
    for (uint32_t k : {1u, 100 + 3 * r, 101 + 3 * r, 102 + 3 * r}) keys.push_back(k);
  }
  KeyPairOptions opt;
  opt.min_records = 10;
  opt.min_shared_share = 0.34;
  KeyPairStats st;
  std::vector<uint64_t> pairs = KeySketchPairs(keys, m, opt, &st);
  EXPECT_EQ(st.keys_set_aside, 1u);
  EXPECT_EQ(st.informative_pairs, 1u);  // (0, 1)
  EXPECT_EQ(st.pairs_below_share, 1u);  // (2, 3)
  EXPECT_EQ(st.records_without_informative, 2u);  // 4 and 5
  std::set<uint64_t> got(pairs.begin(), pairs.end());
  EXPECT_TRUE(got.count(PackPair(0, 1)));
  EXPECT_FALSE(got.count(PackPair(2, 3)));
  EXPECT_TRUE(got.count(PackPair(4, 5)));  // neighbours in the run of key 1 (identical sketches)
  EXPECT_TRUE(std::is_sorted(pairs.begin(), pairs.end()));
}

// Generated help-desk text of our own: the Marrowby Allotment Society's
// plot office. Every message is a greeting, a form header, a request written
// from a template with slots, free text and a footer; 2% are near duplicates
// (an earlier message with two words inserted) and one prompt is sent 40
// times, half of them with one word inserted.
struct Corpus {
  std::vector<std::string> texts;
  std::vector<std::pair<uint32_t, uint32_t>> planted;  // (near duplicate, original)
  std::vector<uint32_t> copies;                        // the 40 copies of one prompt
};

Corpus MakeAllotmentCorpus(uint32_t n, uint64_t seed) {
  static const char* kGreetings[] = {"Dear plot office,", "Hello Marrowby allotment team,", "Good morning to the committee,",
                                     "Hi there, plot office,"};
  static const char* kHeaders[] = {"Form: water trough request. Section: east field.",
                                   "Form: shed permission. Section: orchard end.",
                                   "Form: plot transfer. Section: brook side.",
                                   "Form: compost delivery. Section: north gate.",
                                   "Form: rent question. Section: the long beds."};
  static const char* kRequests[] = {
      "I hold plot number {n} and would like to ask whether the rent for {m} can be paid in two parts.",
      "My plot {n} has a broken tap and the water has not run since {m}, could someone look at it?",
      "Could the society deliver compost to plot {n} before the end of {m}, as the heap by the gate is empty?",
      "I would like to put up a small shed on plot {n} and wonder if the committee meets in {m}.",
      "The hedge beside plot {n} needs cutting back before {m} because it shades the beds."};
  static const char* kFooters[] = {
      "By sending this form you agree that the committee keeps your details for the running of the site.",
      "Replies are sent within ten working days; urgent matters go to the site warden."};
  static const char* kMonths[] = {"March", "April", "May", "June", "July", "August"};
  static const char* kStock[] = {
      "I have been a member of the society for several years and always pay on time.",
      "Please let me know if you need any more information from me about this.",
      "I have read the site rules on the notice board by the main gate.",
      "The path along the east field is still muddy after the rain last week.",
      "Thank you to the volunteers who keep the site tidy every weekend."};
  std::mt19937_64 rng(seed);
  std::vector<std::string> vocab;
  for (int i = 0; i < 5000; ++i) {
    std::string w;
    const int len = 3 + static_cast<int>(rng() % 6);
    for (int c = 0; c < len; ++c) w += static_cast<char>('a' + rng() % 26);
    vocab.push_back(w);
  }
  auto pick = [&](auto& arr) { return std::string(arr[rng() % (sizeof(arr) / sizeof(arr[0]))]); };
  auto message = [&]() {
    std::string req = pick(kRequests);
    req.replace(req.find("{n}"), 3, std::to_string(1 + rng() % 100000));
    req.replace(req.find("{m}"), 3, pick(kMonths));
    std::string free;
    for (int w = 5 + static_cast<int>(rng() % 25); w > 0; --w) free += " " + vocab[rng() % vocab.size()];
    return pick(kGreetings) + " " + pick(kHeaders) + " " + pick(kStock) + " " + req + free + ". " + pick(kStock) +
           " " + pick(kFooters);
  };
  auto insert_words = [&](std::string s, int k) {
    for (; k > 0; --k) {
      size_t at = s.find(' ', rng() % s.size());
      if (at != std::string::npos) s.insert(at, " " + vocab[rng() % vocab.size()]);
    }
    return s;
  };
  Corpus c;
  const std::string popular = message();
  for (uint32_t i = 0; i < n; ++i) {
    if (i % (n / 40) == 7 && c.copies.size() < 40) {
      c.copies.push_back(i);
      c.texts.push_back(c.copies.size() % 2 ? popular : insert_words(popular, 1));
    } else if (i > 50 && rng() % 100 < 2) {
      const uint32_t of = static_cast<uint32_t>(rng() % i);
      c.planted.emplace_back(i, of);
      c.texts.push_back(insert_words(c.texts[of], 2));
    } else {
      c.texts.push_back(message());
    }
  }
  return c;
}

struct Signed {
  std::vector<uint8_t> signatures;  // 256 bytes a record
  std::vector<uint32_t> keys;       // 32 a record
};

Signed SignCorpus(const Corpus& c) {
  ShingleOptions so;
  so.mode = ShingleMode::kWords;
  MinHashParams mp;
  Signed s;
  s.signatures.resize(c.texts.size() * mp.num_slots);
  s.keys.resize(c.texts.size() * 32);
  std::vector<uint64_t> shingles, full(mp.num_slots);
  for (size_t i = 0; i < c.texts.size(); ++i) {
    shingles.clear();
    AppendShingles(c.texts[i], so, &shingles);
    Sign(shingles, mp, full);
    Compact(full, std::span<uint8_t>(s.signatures.data() + i * mp.num_slots, mp.num_slots));
    KeySketch(shingles, 0x6b657973ULL, std::span<uint32_t>(s.keys.data() + i * 32, 32));
  }
  return s;
}

double Estimate(const Signed& s, uint32_t a, uint32_t b) {
  return EstimateJaccardCompact(std::span<const uint8_t>(s.signatures.data() + size_t{a} * 256, 256),
                                std::span<const uint8_t>(s.signatures.data() + size_t{b} * 256, 256));
}

TEST(KeySketchPairs, LinearOnTemplateTextWhereWholeSetBandsAreNot) {
  KeyPairOptions opt;
  opt.min_records = 10;
  opt.min_shared_share = 0.34;
  std::vector<double> key_pairs, band_pairs;
  for (uint32_t n : {4000u, 8000u, 16000u}) {
    Corpus c = MakeAllotmentCorpus(n, 20261203);
    Signed s = SignCorpus(c);
    KeyPairStats st;
    std::vector<uint64_t> pairs = KeySketchPairs(s.keys, 32, opt, &st);
    CandidateStats bst;
    auto banding = ChooseBanding(256, 0.8);
    ASSERT_TRUE(banding.ok());
    std::vector<uint64_t> bands = CandidatePairs(s.signatures, 256, banding.value(), 0x62616e6473ULL,
                                                 CandidateOptions{}, &bst);
    key_pairs.push_back(static_cast<double>(pairs.size()));
    band_pairs.push_back(static_cast<double>(bands.size()));
    // Bounded per record: under one a record here, far below the bound of
    // chain_keys x chain_window neighbour pairs plus the key runs' pairs.
    EXPECT_LT(pairs.size(), size_t{n}) << n;
    // The planted near duplicates the verification would accept are
    // candidates (all but one or two of about 65 at n = 4000: pairs whose key
    // sketches hold no free text and whose neighbourhoods miss each other).
    std::set<uint64_t> got(pairs.begin(), pairs.end());
    size_t accepted = 0, found = 0;
    for (auto [a, b] : c.planted) {
      if (Estimate(s, b, a) < 0.8) continue;
      ++accepted;
      found += got.count(PackPair(std::min(a, b), std::max(a, b)));
    }
    EXPECT_GT(accepted, n / 200) << n;
    EXPECT_GE(static_cast<double>(found), 0.95 * static_cast<double>(accepted)) << n;
  }
  // Doubling the records: key pairs about double (2,806 / 5,536 / 10,639 when
  // written), band pairs grow faster (3,386 / 10,002 / 36,538: quadratic on
  // this text, where three quarters of a prompt are stock sentences).
  EXPECT_LT(key_pairs[1] / key_pairs[0], 2.3);
  EXPECT_LT(key_pairs[2] / key_pairs[1], 2.3);
  EXPECT_GT(band_pairs[2] / band_pairs[1], 3.0);
  EXPECT_GT(band_pairs[2], 3 * key_pairs[2]);
}

TEST(KeySketchPairs, CopiesOfOnePromptAreLinked) {
  Corpus c = MakeAllotmentCorpus(4000, 5);
  Signed s = SignCorpus(c);
  KeyPairOptions opt;
  opt.min_records = 10;
  opt.min_shared_share = 0.34;
  std::vector<uint64_t> pairs = KeySketchPairs(s.keys, 32, opt, nullptr);
  UnionFind uf(static_cast<uint32_t>(c.texts.size()));
  for (uint64_t p : pairs) {
    if (Estimate(s, PairFirst(p), PairSecond(p)) >= 0.8) uf.Union(PairFirst(p), PairSecond(p));
  }
  ASSERT_EQ(c.copies.size(), 40u);
  for (uint32_t i : c.copies) EXPECT_EQ(uf.Find(i), uf.Find(c.copies[0])) << i;
}

TEST(KeySketchPairs, SameForAnyThreadCount) {
  Corpus c = MakeAllotmentCorpus(3000, 11);
  Signed s = SignCorpus(c);
  // Copies of the corpus: the same keys, all held by many records.
  std::vector<uint32_t> many;
  for (int rep = 0; rep < 12; ++rep) many.insert(many.end(), s.keys.begin(), s.keys.end());
  // Over 2^21 places, so the key space is cut into partitions (4 here), which
  // threads take one at a time: each copy's keys moved by its own offset and
  // squeezed into the lower half of the key space on odd copies, so the
  // partitions differ in size; each sketch sorted again (kNoKey stays last).
  std::vector<uint32_t> skewed;
  for (uint32_t rep = 0; rep < 60; ++rep) {
    for (size_t r = 0; r < s.keys.size() / 32; ++r) {
      std::vector<uint32_t> row(s.keys.begin() + static_cast<std::ptrdiff_t>(r * 32),
                                s.keys.begin() + static_cast<std::ptrdiff_t>(r * 32 + 32));
      for (uint32_t& k : row) {
        if (k == kNoKey) continue;
        k = k + rep * 0x9e3779b9u;
        if (rep % 2) k >>= 1;
        if (k == kNoKey) k -= 1;
      }
      std::sort(row.begin(), row.end());
      row.erase(std::unique(row.begin(), row.end()), row.end());
      row.resize(32, kNoKey);
      skewed.insert(skewed.end(), row.begin(), row.end());
    }
  }
  ASSERT_GT(skewed.size(), size_t{1} << 22);
  for (const auto* keys : {&s.keys, &many, &skewed}) {
    KeyPairOptions opt;
    KeyPairStats one_stats, st;
    std::vector<uint64_t> one = KeySketchPairs(*keys, 32, opt, &one_stats);
    if (keys == &skewed) {
      EXPECT_GT(one_stats.informative_pairs, 1000u);
      EXPECT_GT(one_stats.keys_set_aside, 0u);
    }
    for (uint32_t t : {2u, 3u, 5u}) {
      opt.threads = t;
      EXPECT_EQ(KeySketchPairs(*keys, 32, opt, &st), one) << t;
      EXPECT_EQ(st.keys, one_stats.keys);
      EXPECT_EQ(st.keys_set_aside, one_stats.keys_set_aside);
      EXPECT_EQ(st.entries_set_aside, one_stats.entries_set_aside);
      EXPECT_EQ(st.informative_pairs, one_stats.informative_pairs);
      EXPECT_EQ(st.pairs_below_share, one_stats.pairs_below_share);
      EXPECT_EQ(st.chain_pairs, one_stats.chain_pairs);
      EXPECT_EQ(st.unique_pairs, one_stats.unique_pairs);
      EXPECT_EQ(st.largest_run, one_stats.largest_run);
    }
  }
}

}  // namespace
}  // namespace prefsift::sketch
