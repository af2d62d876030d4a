// Agreement beyond chance between annotators: Krippendorff's alpha for
// nominal data (any number of annotators per unit, missing values allowed),
// a seeded percentile bootstrap interval for it over units, and Fleiss' kappa
// (every unit judged by the same number of annotators).
//
// Pure functions, thread-safe. Definitions and sources: docs/annotators.md.
#pragma once

#include <cstdint>
#include <vector>

namespace prefsift::stats {

// One unit (a comparison): the category each annotator gave it, one value per
// annotator. Categories are small non-negative integers.
using Unit = std::vector<uint32_t>;

struct AlphaResult {
  double alpha = 0.0;        // NaN when undefined (fewer than 2 pairable values, or one category only)
  uint64_t units = 0;        // pairable units (two or more values)
  uint64_t values = 0;       // pairable values n (sum of the units' sizes)
  double observed_disagreement = 0.0;  // D_o
  double expected_disagreement = 0.0;  // D_e
};

// Krippendorff's alpha, nominal metric (Krippendorff, Content Analysis, 2nd ed.
// 2004, ch. 11; "Computing Krippendorff's Alpha-Reliability", 2011):
//   o_ck = sum over units u of (number of ordered pairs of values (c, k) in u) / (m_u - 1)
//   n_c  = sum_k o_ck,  n = sum_c n_c
//   alpha = 1 - (n - 1) * sum_{c != k} o_ck / sum_{c != k} n_c n_k
// Units with fewer than two values are not pairable and are ignored.
AlphaResult KrippendorffAlphaNominal(const std::vector<Unit>& units);

struct Interval {
  double lo = 0.0, hi = 0.0;  // NaN when undefined
  uint32_t replicates = 0;    // replicates with a defined alpha
};

// Percentile bootstrap over units (Efron & Tibshirani 1993): `replicates`
// resamples of the pairable units with replacement, drawn from splitmix64
// seeded with `seed`; the (1-level)/2 and (1+level)/2 quantiles (linear
// interpolation between order statistics) of the replicates' alphas.
// Deterministic given its arguments; the replicates run on up to `threads`
// threads (0 = one per core), with the same result for any number.
// REQUIRES: 0 < level < 1.
Interval AlphaBootstrapInterval(const std::vector<Unit>& units, uint32_t replicates, uint64_t seed, double level,
                                unsigned threads = 1);

// Fleiss' kappa (Fleiss 1971) from an items x categories table of counts;
// every row must sum to the same number of raters r >= 2. NaN when the rows
// differ, r < 2, the table is empty, or every rating is in one category.
double FleissKappa(const std::vector<std::vector<uint64_t>>& counts);

}  // namespace prefsift::stats
