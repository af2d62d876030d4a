// Hypothesis tests on counts: the exact two-sided binomial test, the sign
// test, and Pearson's chi-square goodness-of-fit test.
//
// Pure functions, thread-safe. Definitions and sources: docs/statistics.md.
#pragma once

#include <cstdint>
#include <vector>

#include "core/status.h"

namespace prefsift::stats {

// Exact two-sided binomial test of H0: success probability = p, given k
// successes in n trials. The p-value is the total probability of all
// outcomes no more likely than the observed one, with the relative
// tolerance 1 + 1e-7 on "no more likely" (the definition scipy.stats.binomtest
// uses for alternative='two-sided'); capped at 1.
// REQUIRES: n >= 1, k <= n, 0 <= p <= 1. Returns NaN when violated.
double BinomTestTwoSided(uint64_t k, uint64_t n, double p);

// Sign test: the two-sided binomial test with p = 1/2 on the non-tied pairs,
// `plus` pairs in favour and `minus` against (ties are dropped by the caller).
// plus + minus == 0 gives p = 1.
double SignTest(uint64_t plus, uint64_t minus);

struct ChiSquareResult {
  double statistic = 0.0;  // sum (observed - expected)^2 / expected
  int df = 0;              // number of categories - 1
  double p = 1.0;          // P(chi2_df >= statistic)
};

// Pearson chi-square goodness of fit against equal expected counts
// (total / k for each of the k categories), df = k - 1.
// REQUIRES: counts.size() >= 2 and sum(counts) > 0; otherwise the result has
// statistic and p NaN.
ChiSquareResult ChiSquareUniform(const std::vector<uint64_t>& counts);

// Pearson chi-square goodness of fit against given expected shares.
// `expected` holds positive weights, one per category; they are rescaled to
// sum to the observed total (so shares or counts both work). df = k - 1.
// Errors (Status::Input): sizes differ, fewer than 2 categories, a weight not
// finite or <= 0, or an observed total of 0.
Result<ChiSquareResult> ChiSquareGoodnessOfFit(const std::vector<uint64_t>& counts,
                                               const std::vector<double>& expected);

// One group of independent Bernoulli trials with the same success
// probability: n trials, probability p.
struct BernoulliGroup {
  uint64_t n = 0;
  double p = 0.0;
};

struct PoissonBinomialTail {
  double p = 1.0;       // P(S >= k)
  bool exact = true;    // false: normal approximation
  double mean = 0.0;    // E[S] = sum n p
  double sd = 0.0;      // sqrt(sum n p (1 - p))
};

// Upper tail P(S >= k) of S = the number of successes in independent
// Bernoulli trials whose probabilities come in groups (the Poisson-binomial
// distribution with few distinct probabilities). Exact by convolving the
// groups' binomial pmfs when the trials number at most `exact_limit`; above
// that the normal approximation with continuity correction,
// 1 - Phi((k - 0.5 - mean) / sd). REQUIRES: every p in [0, 1].
PoissonBinomialTail PoissonBinomialSf(uint64_t k, const std::vector<BernoulliGroup>& groups,
                                      uint64_t exact_limit = 20000);

}  // namespace prefsift::stats
