// Tests for sketch/clusters.h, sketch/union_find.h, sketch/set_similarity.h.
//
// Outside reference: the differential test compares the fast path (MinHash +
// LSH + union-find) against a slow, obviously correct reference: exact
// Jaccard of every pair of shingle sets (definition: Broder 1997 [V, abstract]).
// Jaccard and containment definitions: Broder 1997 [V, abstract]; small values
// are hand-computed from the definitions.
#include "sketch/clusters.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <iterator>
#include <random>
#include <string>
#include <vector>

#include "sketch/minhash.h"
#include "sketch/set_similarity.h"
#include "sketch/shingles.h"
#include "sketch/union_find.h"

namespace prefsift::sketch {
namespace {

TEST(UnionFind, MergesAndCounts) {
  UnionFind uf(6);
  EXPECT_TRUE(uf.Union(0, 1));
  EXPECT_TRUE(uf.Union(2, 3));
  EXPECT_FALSE(uf.Union(1, 0));
  EXPECT_TRUE(uf.Union(1, 3));
  EXPECT_EQ(uf.Find(0), uf.Find(2));
  EXPECT_NE(uf.Find(0), uf.Find(4));
  EXPECT_EQ(uf.SetSize(3), 4u);
  EXPECT_EQ(uf.SetSize(5), 1u);
}

TEST(SetSimilarity, HandComputed) {
  const std::vector<uint64_t> a = {1, 2, 3, 4};
  const std::vector<uint64_t> b = {3, 4, 5};
  EXPECT_EQ(IntersectionSize(a, b), 2u);
  EXPECT_DOUBLE_EQ(ExactJaccard(a, b), 2.0 / 5.0);  // |{3,4}| / |{1..5}|
  EXPECT_DOUBLE_EQ(Containment(a, b), 2.0 / 4.0);   // |A n B| / |A|
  EXPECT_DOUBLE_EQ(Containment(b, a), 2.0 / 3.0);
  EXPECT_DOUBLE_EQ(ExactJaccard({}, {}), 1.0);
  EXPECT_DOUBLE_EQ(Containment({}, b), 0.0);
}

// IntersectionIfAtLeast against the plain count of std::set_intersection on
// random sorted sets: the exact size whenever it reaches `need`, something
// below `need` otherwise.
TEST(SetSimilarity, IntersectionIfAtLeastIsExactWhenItReachesNeed) {
  std::mt19937_64 rng(20261203);
  for (int trial = 0; trial < 3000; ++trial) {
    std::vector<uint64_t> a, b;
    const uint64_t universe = 1 + rng() % 60;
    for (uint64_t x = 0; x < universe; ++x) {
      if (rng() % 2) a.push_back(x);
      if (rng() % 3 == 0) b.push_back(x);
    }
    std::vector<uint64_t> both;
    std::set_intersection(a.begin(), a.end(), b.begin(), b.end(), std::back_inserter(both));
    for (size_t need = 0; need <= a.size(); ++need) {
      const uint64_t got = IntersectionIfAtLeast(a, b, need);
      if (both.size() >= need) {
        ASSERT_EQ(got, both.size()) << trial << " " << need;
      } else {
        ASSERT_LT(got, need) << trial << " " << need;
      }
    }
    ASSERT_EQ(IntersectionSize(a, b), both.size());
  }
}

// Synthetic prompts: sentences of words from a fixed vocabulary; 35% of the
// prompts are planted variants of an earlier one (a few words edited,
// sentences swapped, a sentence dropped or added, or ~15% of words edited).
std::vector<std::string> MakePrompts(uint32_t n, uint64_t seed) {
  std::mt19937_64 rng(seed);
  std::vector<std::string> vocab;
  for (int i = 0; i < 4000; ++i) {
    std::string w;
    const int len = 2 + static_cast<int>(rng() % 8);
    for (int c = 0; c < len; ++c) w.push_back(static_cast<char>('a' + rng() % 26));
    vocab.push_back(w);
  }
  auto word = [&] { return vocab[rng() % vocab.size()]; };
  using Sentences = std::vector<std::vector<std::string>>;
  auto fresh = [&] {
    Sentences s;
    const uint32_t target = 20 + static_cast<uint32_t>(rng() % 181);
    uint32_t words = 0;
    while (words < target) {
      const uint32_t len = std::min<uint32_t>(6 + static_cast<uint32_t>(rng() % 9), target - words);
      std::vector<std::string> sent;
      for (uint32_t i = 0; i < len; ++i) sent.push_back(word());
      words += len;
      s.push_back(sent);
    }
    return s;
  };
  auto edit_words = [&](Sentences& s, int count) {
    for (int e = 0; e < count; ++e) {
      auto& sent = s[rng() % s.size()];
      sent[rng() % sent.size()] = word();
    }
  };
  std::vector<Sentences> docs;
  for (uint32_t i = 0; i < n; ++i) {
    if (i < 10 || rng() % 100 >= 35) {
      docs.push_back(fresh());
      continue;
    }
    Sentences s = docs[rng() % docs.size()];
    size_t total = 0;
    for (auto& sent : s) total += sent.size();
    switch (rng() % 5) {
      case 0: edit_words(s, 1 + static_cast<int>(rng() % 3)); break;
      case 1:
        if (s.size() >= 2) std::swap(s[rng() % s.size()], s[rng() % s.size()]);
        break;
      case 2: edit_words(s, 1); if (s.size() >= 2) std::swap(s[0], s[s.size() - 1]); break;
      case 3:
        if (s.size() >= 3 && rng() % 2) {
          s.erase(s.begin() + static_cast<long>(rng() % s.size()));
        } else {
          s.push_back(fresh()[0]);
        }
        break;
      default: edit_words(s, std::max<int>(1, static_cast<int>(total * 15 / 100))); break;
    }
    docs.push_back(s);
  }
  std::vector<std::string> out;
  for (const auto& d : docs) {
    std::string text;
    for (const auto& sent : d) {
      for (const auto& w : sent) {
        if (!text.empty()) text += ' ';
        text += w;
      }
    }
    out.push_back(text);
  }
  return out;
}

struct Corpus {
  std::vector<std::string> texts;
  std::vector<std::vector<uint64_t>> sets;
  std::vector<uint8_t> sigs;
  uint32_t k = 256;
};

Corpus MakeCorpus(uint32_t n, uint64_t seed) {
  Corpus c;
  c.texts = MakePrompts(n, seed);
  const ShingleOptions so;
  const MinHashParams mp;
  c.k = mp.num_slots;
  c.sigs.resize(static_cast<size_t>(n) * c.k);
  for (uint32_t i = 0; i < n; ++i) {
    c.sets.push_back(Shingles(c.texts[i], so));
    SignTextCompact(c.texts[i], so, mp, std::span<uint8_t>(c.sigs).subspan(size_t{i} * c.k, c.k));
  }
  return c;
}

void CheckAgainstAllPairs(const Corpus& c, const Clustering& cl, double threshold) {
  const auto n = static_cast<uint32_t>(c.texts.size());
  // Slow reference: exact Jaccard of every pair.
  uint64_t high = 0;
  uint64_t high_together = 0;
  uint64_t mid = 0;
  uint64_t near_line = 0;  // threshold + 0.05 <= J < threshold + 0.1: the hard ones
  for (uint32_t i = 0; i < n; ++i) {
    for (uint32_t j = i + 1; j < n; ++j) {
      const double jac = ExactJaccard(c.sets[i], c.sets[j]);
      if (jac >= threshold + 0.05) {
        ++high;
        high_together += cl.cluster_of[i] == cl.cluster_of[j];
        near_line += jac < threshold + 0.1;
      } else if (jac > threshold - 0.2 && jac < threshold) {
        ++mid;
      }
    }
  }
  // The generator must produce enough pairs on both sides of the threshold.
  ASSERT_GT(high, 200u);
  ASSERT_GT(near_line, 20u);
  ASSERT_GT(mid, 50u);
  const double recall = static_cast<double>(high_together) / static_cast<double>(high);
  EXPECT_GE(recall, 0.98) << high_together << " of " << high;
  // No verified edge joins a pair at or below threshold - 0.2.
  ASSERT_FALSE(cl.edges.empty());
  for (const Edge& e : cl.edges) {
    EXPECT_GT(ExactJaccard(c.sets[e.a], c.sets[e.b]), threshold - 0.2)
        << e.a << "-" << e.b << " estimated " << e.similarity;
  }
  // Cluster ids are the smallest member index.
  for (uint32_t i = 0; i < n; ++i) {
    EXPECT_LE(cl.cluster_of[i], i);
    EXPECT_EQ(cl.cluster_of[cl.cluster_of[i]], cl.cluster_of[i]);
  }
  std::printf("  [differential] n=%u pairs J>=t+.05: %llu (%llu below t+.1), t-.2<J<t: %llu; "
              "recall=%.4f edges=%zu candidates=%llu\n",
              n, static_cast<unsigned long long>(high), static_cast<unsigned long long>(near_line),
              static_cast<unsigned long long>(mid), recall, cl.edges.size(),
              static_cast<unsigned long long>(cl.stats.candidates.unique_pairs));
}

TEST(Clusters, DifferentialAgainstAllPairsExactJaccard) {
  const Corpus c = MakeCorpus(3000, 2024);
  ClusterOptions opts;
  opts.keep_edges = true;
  auto cl = ClusterCompactSignatures(c.sigs, c.k, opts);
  ASSERT_TRUE(cl.ok()) << cl.status().message();
  CheckAgainstAllPairs(c, cl.value(), opts.threshold);
  for (const ClusterSummary& s : cl.value().clusters) {
    EXPECT_GE(s.size, 2u);
    EXPECT_GE(s.min_similarity, 0.8f);
    EXPECT_LE(s.min_similarity, s.max_similarity);
    EXPECT_LE(s.max_similarity, 1.0f);
  }
}

TEST(Clusters, ExactVerificationNeverMergesBelowThreshold) {
  const Corpus c = MakeCorpus(2000, 77);
  ClusterOptions opts;
  opts.keep_edges = true;
  auto cl = ClusterWithExactSets(c.sigs, c.k, c.sets, opts);
  ASSERT_TRUE(cl.ok());
  for (const Edge& e : cl.value().edges) {
    EXPECT_GE(ExactJaccard(c.sets[e.a], c.sets[e.b]), 0.8 - 1e-6);
  }
  CheckAgainstAllPairs(c, cl.value(), opts.threshold);
}

TEST(Clusters, SameResultForAnyThreadCount) {
  const Corpus c = MakeCorpus(1500, 5);
  ClusterOptions opts;
  opts.keep_edges = true;
  auto one = ClusterCompactSignatures(c.sigs, c.k, opts);
  opts.threads = 2;
  auto two = ClusterCompactSignatures(c.sigs, c.k, opts);
  opts.threads = 5;
  auto five = ClusterCompactSignatures(c.sigs, c.k, opts);
  ASSERT_TRUE(one.ok() && two.ok() && five.ok());
  for (const auto* other : {&two.value(), &five.value()}) {
    EXPECT_EQ(one.value().cluster_of, other->cluster_of);
    ASSERT_EQ(one.value().clusters.size(), other->clusters.size());
    for (size_t i = 0; i < other->clusters.size(); ++i) {
      EXPECT_EQ(one.value().clusters[i].id, other->clusters[i].id);
      EXPECT_EQ(one.value().clusters[i].size, other->clusters[i].size);
      EXPECT_EQ(one.value().clusters[i].min_similarity, other->clusters[i].min_similarity);
      EXPECT_EQ(one.value().clusters[i].max_similarity, other->clusters[i].max_similarity);
    }
    ASSERT_EQ(one.value().edges.size(), other->edges.size());
  }
}

TEST(Clusters, TwoStepApiEqualsOneStep) {
  const Corpus c = MakeCorpus(800, 9);
  ClusterOptions opts;
  auto one = ClusterCompactSignatures(c.sigs, c.k, opts);
  ASSERT_TRUE(one.ok());
  const auto pairs = CandidatePairs(c.sigs, c.k, one.value().stats.banding, opts.band_seed,
                                    CandidateOptions{opts.max_run, 1}, nullptr);
  auto two = ClusterCandidates(c.sigs, c.k, pairs, opts);
  ASSERT_TRUE(two.ok());
  EXPECT_EQ(one.value().cluster_of, two.value().cluster_of);
  EXPECT_EQ(one.value().stats.verified_edges, two.value().stats.verified_edges);
  // Unsorted or out-of-range pairs are a usage error, not a crash.
  EXPECT_FALSE(ClusterCandidates(c.sigs, c.k, std::vector<uint64_t>{PackPair(5, 4)}, opts).ok());
  EXPECT_FALSE(ClusterCandidates(c.sigs, c.k, std::vector<uint64_t>{PackPair(1, 800)}, opts).ok());
}

TEST(Clusters, HugeBucketOfCopiesBecomesOneCluster) {
  constexpr uint32_t kK = 256;
  std::vector<uint8_t> sigs;
  const ShingleOptions so;
  const MinHashParams mp;
  std::vector<uint8_t> one(kK);
  SignTextCompact("write a short poem about the sea and the wind", so, mp, one);
  for (int i = 0; i < 3000; ++i) sigs.insert(sigs.end(), one.begin(), one.end());
  SignTextCompact("an unrelated prompt about tax forms for small shops", so, mp, one);
  sigs.insert(sigs.end(), one.begin(), one.end());
  ClusterOptions opts;
  opts.max_run = 64;
  auto cl = ClusterCompactSignatures(sigs, kK, opts);
  ASSERT_TRUE(cl.ok());
  ASSERT_EQ(cl.value().clusters.size(), 1u);
  EXPECT_EQ(cl.value().clusters[0].id, 0u);
  EXPECT_EQ(cl.value().clusters[0].size, 3000u);
  EXPECT_FLOAT_EQ(cl.value().clusters[0].min_similarity, 1.0f);
  EXPECT_EQ(cl.value().cluster_of[3000], 3000u);
  EXPECT_GT(cl.value().stats.candidates.capped_runs, 0u);
  EXPECT_LE(cl.value().stats.candidates.unique_pairs, 2u * 3000u);
}

TEST(Clusters, RejectsBadInput) {
  std::vector<uint8_t> sigs(100);
  EXPECT_FALSE(ClusterCompactSignatures(sigs, 256, {}).ok());
  ClusterOptions bad;
  bad.threshold = 0;
  EXPECT_FALSE(ClusterCompactSignatures(std::vector<uint8_t>(512), 256, bad).ok());
  ClusterOptions wide;
  wide.banding = {40, 8};
  EXPECT_FALSE(ClusterCompactSignatures(std::vector<uint8_t>(512), 256, wide).ok());
}

}  // namespace
}  // namespace prefsift::sketch
