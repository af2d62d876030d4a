// Tests for sketch/minhash.h.
//
// Outside reference: the MinHash estimator is unbiased with
// Var = J(1-J)/K, i.e. K*Jhat ~ Binomial(K, J) (Broder 1997, "On the
// resemblance and containment of documents" [V, abstract]; variance restated in
// Ertl 2017, arXiv:1706.05698 sec. 1.1 [V]). One-permutation hashing with
// optimal densification claims the same collision probability and variance
// (Shrivastava 2017, arXiv:1703.04664 [V]). b-bit compaction: Li & Koenig
// 2010 (unbiased for any b [V]; the 2^-b chance agreement for sparse sets is
// from memory, unverified).
#include "sketch/minhash.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <random>
#include <string>
#include <vector>

#include "sketch/minhash_paths.h"
#include "sketch/mix.h"

namespace prefsift::sketch {
namespace {

struct PairStats {
  double mean = 0;
  double sd = 0;
};

// Builds a random set pair with |A u B| = union_size and exact Jaccard
// round(J*U)/U, signs both and returns mean and sd of the estimate.
PairStats Measure(double j, uint32_t union_size, uint32_t k, int trials, bool compact,
                  uint64_t seed, double* exact_j) {
  std::mt19937_64 rng(seed);
  const auto inter = static_cast<uint32_t>(std::lround(j * union_size));
  *exact_j = static_cast<double>(inter) / union_size;
  const uint32_t only = (union_size - inter) / 2;  // split the rest evenly
  const uint32_t only_b = union_size - inter - only;
  MinHashParams params;
  params.num_slots = k;
  double sum = 0;
  double sum_sq = 0;
  std::vector<uint64_t> a;
  std::vector<uint64_t> b;
  std::vector<uint64_t> sa(k);
  std::vector<uint64_t> sb(k);
  std::vector<uint8_t> ca(k);
  std::vector<uint8_t> cb(k);
  for (int t = 0; t < trials; ++t) {
    a.clear();
    b.clear();
    for (uint32_t i = 0; i < inter; ++i) {
      const uint64_t x = rng();
      a.push_back(x);
      b.push_back(x);
    }
    for (uint32_t i = 0; i < only; ++i) a.push_back(rng());
    for (uint32_t i = 0; i < only_b; ++i) b.push_back(rng());
    params.seed = rng();
    Sign(a, params, sa);
    Sign(b, params, sb);
    double est;
    if (compact) {
      Compact(sa, ca);
      Compact(sb, cb);
      est = EstimateJaccardCompact(ca, cb);
    } else {
      est = EstimateJaccard(sa, sb);
    }
    sum += est;
    sum_sq += est * est;
  }
  PairStats s;
  s.mean = sum / trials;
  s.sd = std::sqrt(std::max(0.0, sum_sq / trials - s.mean * s.mean));
  return s;
}

// Mean within 5 standard errors of the mean (SE = sqrt(J(1-J)/K)/sqrt(T));
// sd within 10% of sqrt(J(1-J)/K) (the sd of a sample sd is about
// sd/sqrt(2T) = 1.6% at T = 2000, so 10% is > 6 of those: not flaky, and tight
// enough to catch a wrong construction, which typically is off by 20% or more).
void CheckEstimator(uint32_t union_size, uint32_t k, bool compact) {
  constexpr int kTrials = 2000;
  uint64_t seed = 1000 + union_size + k + (compact ? 7 : 0);
  for (double j : {0.1, 0.3, 0.5, 0.8, 0.9}) {
    double exact = 0;
    const PairStats s = Measure(j, union_size, k, kTrials, compact, seed++, &exact);
    const double sd_theory = std::sqrt(exact * (1 - exact) / k);
    SCOPED_TRACE("J=" + std::to_string(exact) + " U=" + std::to_string(union_size) +
                 " K=" + std::to_string(k) + (compact ? " compact" : " full"));
    EXPECT_NEAR(s.mean, exact, 5 * sd_theory / std::sqrt(double{kTrials}));
    // b-bit: Var = P(1-P)/(K (1-2^-b)^2) with P = J + (1-J)/256 (Li & Koenig).
    double sd_expected = sd_theory;
    if (compact) {
      const double p = exact + (1 - exact) / 256.0;
      sd_expected = std::sqrt(p * (1 - p) / k) / (1 - 1.0 / 256.0);
    }
    EXPECT_NEAR(s.sd / sd_expected, 1.0, 0.10) << "sd " << s.sd << " expected " << sd_expected;
  }
}

// Sets much larger than K: no empty bins.
TEST(MinHashEstimator, LargeSetsK128) { CheckEstimator(4000, 128, false); }
TEST(MinHashEstimator, LargeSetsK256Compact) { CheckEstimator(4000, 256, true); }
// Sets of about K elements: many empty bins, densification does the work.
TEST(MinHashEstimator, SmallSetsDensifiedK128) { CheckEstimator(100, 128, false); }
TEST(MinHashEstimator, SmallSetsDensifiedK256Compact) { CheckEstimator(200, 256, true); }

TEST(MinHash, IdenticalSetsAgreeEverywhere) {
  const std::vector<uint64_t> a = {1, 2, 3, 4, 5};
  const std::vector<uint64_t> b = {5, 4, 3, 2, 1, 1, 2};  // order and repeats ignored
  const MinHashParams params;
  EXPECT_EQ(Sign(a, params), Sign(b, params));
  EXPECT_DOUBLE_EQ(EstimateJaccard(Sign(a, params), Sign(b, params)), 1.0);
}

TEST(MinHash, SingleShingleFillsAllSlots) {
  const std::vector<uint64_t> a = {42};
  const auto sig = Sign(a, MinHashParams{});
  for (uint64_t v : sig) EXPECT_EQ(v, sig[0]);
}

TEST(MinHash, DeterministicGivenSeed) {
  ShingleOptions so;
  MinHashParams p1;
  std::vector<uint8_t> x(p1.num_slots);
  std::vector<uint8_t> y(p1.num_slots);
  const std::string text = "please summarise the following article about river pollution";
  SignTextCompact(text, so, p1, x);
  SignTextCompact(text, so, p1, y);
  EXPECT_EQ(x, y);
  const auto sh = Shingles(text, so);
  EXPECT_EQ(Sign(sh, p1), Sign(sh, p1));
  MinHashParams p2 = p1;
  p2.seed = p1.seed + 1;
  EXPECT_NE(Sign(sh, p1), Sign(sh, p2));
  SignTextCompact(text, so, p2, y);
  EXPECT_NE(x, y);
  // Golden values (recorded from this implementation, not an outside source):
  // they pin the hash construction so stored signatures stay comparable
  // across builds and machines. Changing them is a format change.
  const uint64_t a = 0xb80312d9a63eaec1ULL;
  const uint64_t b = 0x5542633757a10eccULL;
  const uint64_t c = 0xdc3940cb185ad697ULL;
  EXPECT_EQ(Sign(std::vector<uint64_t>{1, 2, 3}, MinHashParams{8, 99}),
            (std::vector<uint64_t>{a, b, b, c, c, a, c, a}));
  EXPECT_EQ(WordNgramHashes("one two three four five six", 5, 0),
            (std::vector<uint64_t>{0xbb8dea4e5fb90f4cULL, 0xca69351988b99c51ULL}));
}

TEST(MinHash, CompactCorrectionIsExactAtTheEnds) {
  EXPECT_DOUBLE_EQ(CompactMatchesToJaccard(256, 256), 1.0);
  EXPECT_DOUBLE_EQ(CompactMatchesToJaccard(1, 256), 0.0);
  EXPECT_DOUBLE_EQ(CompactMatchesToJaccard(0, 256), 0.0);  // clamped
}

}  // namespace
}  // namespace prefsift::sketch

namespace prefsift::sketch {
namespace {

TEST(MinHash, ManyTextsSameForAnyThreadCount) {
  std::vector<std::string> texts;
  for (int i = 0; i < 500; ++i) {
    texts.push_back("prompt number " + std::to_string(i) + " asks about item " +
                    std::to_string(i * 7 % 13) + " and nothing else at all");
  }
  texts.push_back("我们今天去公园散步然后在湖边吃了午饭");
  texts.push_back("");
  std::vector<std::string_view> views(texts.begin(), texts.end());
  const MinHashParams mp;
  const ShingleOptions so;
  std::vector<uint8_t> one(views.size() * mp.num_slots);
  std::vector<uint8_t> two(one.size());
  std::vector<uint8_t> seven(one.size());
  SignTextsCompact(views, so, mp, 1, one);
  SignTextsCompact(views, so, mp, 2, two);
  SignTextsCompact(views, so, mp, 7, seven);
  EXPECT_EQ(one, two);
  EXPECT_EQ(one, seven);
  std::vector<uint8_t> single(mp.num_slots);
  SignTextCompact(views[501], so, mp, single);
  EXPECT_TRUE(std::equal(single.begin(), single.end(), one.begin() + 501 * mp.num_slots));
}

}  // namespace
}  // namespace prefsift::sketch

namespace prefsift::sketch {
namespace {

// Inverse of Mix (sketch/mix.h) by inverting each step: the xor-shifts by 33
// undo themselves, the odd multipliers have inverses mod 2^64 (Newton's
// iteration, each step doubling the correct low bits). It lets a test choose
// a shingle whose mixed value is any word it likes.
uint64_t InverseOdd(uint64_t a) {
  uint64_t x = a;  // a * a = 1 mod 8: three correct bits
  for (int i = 0; i < 5; ++i) x *= 2 - a * x;
  return x;
}
uint64_t Unmix(uint64_t x) {
  x ^= x >> 33;
  x *= InverseOdd(0xc4ceb9fe1a85ec53ULL);
  x ^= x >> 33;
  x *= InverseOdd(0xff51afd7ed558ccdULL);
  x ^= x >> 33;
  return x;
}

// n random shingles with the awkward cases mixed in: repeats, UINT64_MAX, small
// values, and the shingle whose mixed value is UINT64_MAX, the word that marks
// an empty bin (Sign moves it one below).
std::vector<uint64_t> AwkwardShingles(std::mt19937_64& rng, size_t n, uint64_t seed) {
  std::vector<uint64_t> v;
  v.reserve(n);
  for (size_t i = 0; i < n; ++i) {
    const uint64_t r = rng();
    switch (r % 16) {
      case 0: v.push_back(UINT64_MAX); break;
      case 1: v.push_back(Unmix(UINT64_MAX) ^ Mix(seed)); break;
      case 2: v.push_back(r >> 61); break;
      case 3:
      case 4: v.push_back(v.empty() ? r : v[(r >> 8) % v.size()]); break;
      default: v.push_back(rng()); break;
    }
  }
  return v;
}

// Slot counts the plans accept: near 8..4096, leakage 16..1024 (any integer),
// with the defaults 256 and 128 and the edges of 64-bin blocks.
const std::vector<uint32_t> kSlotCounts = {8,   9,   16,  17,  63,  64,  65,  100, 127, 128,
                                           129, 200, 255, 256, 257, 512, 1000, 1024, 4096};

std::vector<size_t> InputSizes(uint32_t k) { return {0, 1, 2, 3, 5, 8, k / 2, k, 4 * size_t{k}}; }

TEST(MinHash, AwkwardShinglesHitTheEmptyMarker) {
  EXPECT_EQ(Unmix(Mix(0x0123456789abcdefULL)), 0x0123456789abcdefULL);
  const uint64_t seed = MinHashParams{}.seed;
  EXPECT_EQ(Mix(Unmix(UINT64_MAX) ^ Mix(seed) ^ Mix(seed)), UINT64_MAX);
}

// Pins the signatures of the awkward inputs to the values the code gave before
// the signing paths were added (recorded from commit 3423dc6's Sign, not an
// outside source): the paths and the reference must all keep them.
TEST(MinHash, AwkwardInputsKeepTheirRecordedSignatures) {
  std::mt19937_64 rng(20261203);
  uint64_t digest = 0;
  for (uint32_t k : kSlotCounts) {
    for (size_t n : InputSizes(k)) {
      for (int t = 0; t < 3; ++t) {
        const MinHashParams params{k, rng()};
        const auto in = AwkwardShingles(rng, n, params.seed);
        for (uint64_t v : Sign(in, params)) digest = Mix(digest ^ v);
      }
    }
  }
  EXPECT_EQ(digest, 0x879bc14b499c551cULL);
}

// Differential test of the signing paths. The method is Shrivastava 2017
// (arXiv:1703.04664); what is checked here is not the paper but exact
// agreement with the project's own plain implementation, SignReference:
// every path this CPU runs (scalar always; AVX2 and AVX-512 where present)
// must give the same 64-bit slots and the same compact bytes on thousands of
// seeded random inputs, for every slot count the plans accept.
std::vector<detail::SignPath> AvailablePaths() {
  std::vector<detail::SignPath> paths;
  for (auto p : {detail::SignPath::kScalar, detail::SignPath::kAvx2, detail::SignPath::kAvx512}) {
    if (detail::SignPathAvailable(p)) paths.push_back(p);
  }
  return paths;
}

struct PathGuard {
  ~PathGuard() { detail::ResetSignPath(); }
};

void ExpectPathsAgree(uint32_t k, int trials, uint64_t rng_seed) {
  std::mt19937_64 rng(rng_seed);
  PathGuard guard;
  std::vector<uint64_t> want(k), got(k);
  std::vector<uint8_t> want_compact(k), got_compact(k);
  for (size_t n : InputSizes(k)) {
    for (int t = 0; t < trials; ++t) {
      // A few seeds repeat so that the cached probes are reused, not only made.
      const MinHashParams params{k, t % 4 == 0 ? 7 : rng()};
      const auto in = AwkwardShingles(rng, n, params.seed);
      SignReference(in, params, want);
      Compact(want, want_compact);
      for (detail::SignPath path : AvailablePaths()) {
        detail::ForceSignPath(path);
        SCOPED_TRACE("K=" + std::to_string(k) + " n=" + std::to_string(n) + " trial " + std::to_string(t) +
                     " path " + std::to_string(static_cast<int>(path)));
        std::fill(got.begin(), got.end(), 0x5a5a5a5a5a5a5a5aULL);  // stale values must not survive
        Sign(in, params, got);
        ASSERT_EQ(got, want);
        std::fill(got_compact.begin(), got_compact.end(), 0x5a);
        SignCompact(in, params, got_compact);
        ASSERT_EQ(got_compact, want_compact);
      }
    }
  }
}

TEST(MinHashPaths, ScalarIsAlwaysAvailable) {
  EXPECT_TRUE(detail::SignPathAvailable(detail::SignPath::kScalar));
  EXPECT_TRUE(detail::SignPathAvailable(detail::CurrentSignPath()));
}

TEST(MinHashPaths, AgreeWithReferenceUpTo256Slots) {
  for (uint32_t k : kSlotCounts) {
    if (k <= 256) ExpectPathsAgree(k, 200, 100 + k);
  }
}

TEST(MinHashPaths, AgreeWithReferenceAbove256Slots) {
  for (uint32_t k : kSlotCounts) {
    if (k > 256) ExpectPathsAgree(k, k >= 4096 ? 4 : 20, 100 + k);
  }
}

// Every K from 1 to 300 (the wide paths' edge at 256 and every block
// remainder), fewer inputs each.
TEST(MinHashPaths, AgreeWithReferenceForEveryKUpTo300) {
  for (uint32_t k = 1; k <= 300; ++k) ExpectPathsAgree(k, 6, 7000 + k);
}

// The near and leakage stages sign alternately with K = 256 and 128; more
// (seed, K) pairs than a thread caches must still give the same slots.
TEST(MinHashPaths, AlternatingSeedsAndSlotCountsAgree) {
  std::mt19937_64 rng(42);
  PathGuard guard;
  for (detail::SignPath path : AvailablePaths()) {
    detail::ForceSignPath(path);
    for (int t = 0; t < 300; ++t) {
      const MinHashParams params{t % 2 == 0 ? 256u : 128u + static_cast<uint32_t>(t % 7), static_cast<uint64_t>(t % 9)};
      const auto in = AwkwardShingles(rng, 1 + rng() % 80, params.seed);
      std::vector<uint64_t> want(params.num_slots);
      SignReference(in, params, want);
      ASSERT_EQ(Sign(in, params), want) << "path " << static_cast<int>(path) << " trial " << t;
    }
  }
}

}  // namespace
}  // namespace prefsift::sketch
