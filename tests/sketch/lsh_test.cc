// Tests for sketch/lsh.h.
//
// Outside reference: Leskovec, Rajaraman & Ullman, Mining of Massive Datasets,
// sec. 3.4.2 [V]: P(candidate) = 1 - (1 - s^r)^b; Fig. 3.8 table for b = 20,
// r = 5 [V, as reproduced]; threshold approximately (1/b)^(1/r), b = 16, r = 4
// -> 1/2 [V]. Values marked "computed" are that formula evaluated in Python
// (/usr/bin/python3: 1 - (1 - s**r)**b).
#include "sketch/lsh.h"

#include <gtest/gtest.h>

#include <cmath>
#include <random>
#include <vector>

#include "sketch/minhash.h"

namespace prefsift::sketch {
namespace {

TEST(SCurve, MatchesBookTableB20R5) {
  const Banding b{20, 5};
  // Book Fig. 3.8 prints 3 decimals (4 at .8): allow half a unit of the last digit.
  EXPECT_NEAR(CandidateProbability(0.2, b), 0.006, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.3, b), 0.047, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.4, b), 0.186, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.5, b), 0.470, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.6, b), 0.802, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.7, b), 0.975, 0.0005);
  EXPECT_NEAR(CandidateProbability(0.8, b), 0.9996, 0.00005);
}

TEST(SCurve, WorkedExamples) {
  // Book: b = 16, r = 4 gives threshold 1/2 [V]; b = 20, r = 5 "just slightly
  // more than 0.5" [V], computed 0.5493.
  EXPECT_NEAR(ApproxThreshold({16, 4}), 0.5, 1e-12);
  EXPECT_NEAR(ApproxThreshold({20, 5}), 0.5493, 0.0001);
  // Computed (Python, the book's formula): b = 16, r = 4, s = 0.5 -> 0.6439258695482072; b = 40, r = 5:
  // s = 0.25 -> 0.038327752962634465, 0.5 -> 0.7191537556638458, 0.75 -> 0.9999803191845236.
  EXPECT_NEAR(CandidateProbability(0.5, {16, 4}), 0.64393, 0.000005);
  EXPECT_NEAR(CandidateProbability(0.25, {40, 5}), 0.038328, 0.0000005);
  EXPECT_NEAR(CandidateProbability(0.5, {40, 5}), 0.719154, 0.0000005);
  EXPECT_NEAR(CandidateProbability(0.75, {40, 5}), 0.999980, 0.0000005);
}

TEST(ChooseBanding, DefaultsAndErrors) {
  // Our rule (smallest false-positive area with P(threshold) >= 0.99); the
  // value is a regression pin, the property below is the real check.
  auto b = ChooseBanding(256, 0.8);
  ASSERT_TRUE(b.ok());
  EXPECT_EQ(b.value().bands, 26u);
  EXPECT_EQ(b.value().rows, 8u);
  for (uint32_t k : {64u, 128u, 256u}) {
    for (double t : {0.5, 0.7, 0.8, 0.9}) {
      auto c = ChooseBanding(k, t);
      ASSERT_TRUE(c.ok());
      EXPECT_LE(c.value().bands * c.value().rows, k);
      EXPECT_GE(CandidateProbability(t, c.value()), 0.99);
    }
  }
  EXPECT_FALSE(ChooseBanding(0, 0.8).ok());
  EXPECT_FALSE(ChooseBanding(256, 1.5).ok());
  EXPECT_FALSE(ChooseBanding(256, 0.0).ok());
}

// Measured share of set pairs at Jaccard s that share at least one band key,
// against 1 - (1 - p^r)^b with p = s + (1 - s)/256 (8-bit rows), within 4
// binomial standard errors (+ 1/T for discreteness).
void CheckMeasuredCurve(uint32_t k, Banding banding, uint64_t seed) {
  constexpr int kTrials = 1500;
  constexpr uint32_t kUnion = 3000;
  std::mt19937_64 rng(seed);
  MinHashParams params;
  params.num_slots = k;
  std::vector<uint64_t> a;
  std::vector<uint64_t> b;
  std::vector<uint64_t> sa(k);
  std::vector<uint64_t> sb(k);
  std::vector<uint8_t> ca(k);
  std::vector<uint8_t> cb(k);
  std::vector<uint64_t> ka(banding.bands);
  std::vector<uint64_t> kb(banding.bands);
  for (double s : {0.3, 0.5, 0.7, 0.8, 0.9}) {
    const auto inter = static_cast<uint32_t>(std::lround(s * kUnion));
    const uint32_t only_a = (kUnion - inter) / 2;
    const uint32_t only_b = kUnion - inter - only_a;
    int hits = 0;
    for (int t = 0; t < kTrials; ++t) {
      a.clear();
      b.clear();
      for (uint32_t i = 0; i < inter; ++i) {
        const uint64_t x = rng();
        a.push_back(x);
        b.push_back(x);
      }
      for (uint32_t i = 0; i < only_a; ++i) a.push_back(rng());
      for (uint32_t i = 0; i < only_b; ++i) b.push_back(rng());
      params.seed = rng();
      Sign(a, params, sa);
      Sign(b, params, sb);
      Compact(sa, ca);
      Compact(sb, cb);
      const uint64_t band_seed = rng();
      BandKeys(ca, banding, band_seed, ka);
      BandKeys(cb, banding, band_seed, kb);
      bool hit = false;
      for (uint32_t i = 0; i < banding.bands; ++i) hit = hit || ka[i] == kb[i];
      hits += hit;
    }
    const double p_row = s + (1 - s) / 256.0;
    const double expected = CandidateProbability(p_row, banding);
    const double observed = static_cast<double>(hits) / kTrials;
    const double se = std::sqrt(expected * (1 - expected) / kTrials);
    EXPECT_NEAR(observed, expected, 4 * se + 1.0 / kTrials)
        << "s=" << s << " b=" << banding.bands << " r=" << banding.rows;
  }
}

TEST(BandingMeasured, BookSettingsB20R5) { CheckMeasuredCurve(100, {20, 5}, 11); }
TEST(BandingMeasured, DefaultB26R8) { CheckMeasuredCurve(256, {26, 8}, 12); }

// Differential: the sorted-bucket generator returns exactly the pairs that
// share a band key by brute force over all pairs.
TEST(CandidatePairs, EqualsBruteForce) {
  constexpr uint32_t kN = 400;
  constexpr uint32_t kK = 64;
  const Banding banding{16, 4};
  std::mt19937_64 rng(5);
  std::vector<uint8_t> sigs(kN * kK);
  // Low-entropy rows (values 0..3) so many bands collide.
  for (auto& v : sigs) v = static_cast<uint8_t>(rng() & 3);
  std::vector<uint64_t> keys(kN * banding.bands);
  for (uint32_t i = 0; i < kN; ++i) {
    BandKeys(std::span<const uint8_t>(sigs).subspan(i * kK, kK), banding, 9,
             std::span<uint64_t>(keys).subspan(i * banding.bands, banding.bands));
  }
  std::vector<uint64_t> brute;
  for (uint32_t i = 0; i < kN; ++i) {
    for (uint32_t j = i + 1; j < kN; ++j) {
      for (uint32_t band = 0; band < banding.bands; ++band) {
        if (keys[i * banding.bands + band] == keys[j * banding.bands + band]) {
          brute.push_back(PackPair(i, j));
          break;
        }
      }
    }
  }
  ASSERT_GT(brute.size(), 100u);
  CandidateOptions opts;
  opts.max_run = kN;
  CandidateStats stats;
  EXPECT_EQ(CandidatePairs(sigs, kK, banding, 9, opts, &stats), brute);
  EXPECT_EQ(stats.unique_pairs, brute.size());
  EXPECT_EQ(stats.capped_runs, 0u);
  EXPECT_EQ(CandidatePairsFromBandKeys(keys, banding.bands, opts, nullptr), brute);
  opts.threads = 2;
  EXPECT_EQ(CandidatePairs(sigs, kK, banding, 9, opts, nullptr), brute);
  opts.threads = 3;
  EXPECT_EQ(CandidatePairsFromBandKeys(keys, banding.bands, opts, nullptr), brute);
}

TEST(CandidatePairs, HugeRunIsCappedToLinearPairs) {
  constexpr uint32_t kCopies = 2000;
  constexpr uint32_t kK = 32;
  std::vector<uint8_t> sigs(kCopies * kK, 7);  // all identical
  CandidateOptions opts;
  opts.max_run = 16;
  CandidateStats stats;
  const auto pairs = CandidatePairs(sigs, kK, {4, 8}, 1, opts, &stats);
  EXPECT_EQ(stats.capped_runs, 4u);  // one run per band
  EXPECT_EQ(stats.capped_run_items, 4u * kCopies);
  EXPECT_EQ(stats.largest_run, kCopies);
  EXPECT_LE(pairs.size(), 2u * kCopies);  // star + chain, deduplicated across bands
  EXPECT_GE(pairs.size(), kCopies - 1);
}

}  // namespace
}  // namespace prefsift::sketch
