// Rank correlation: Spearman's rho with average ranks for ties (and its
// t-approximation p-value), Kendall's tau-b, and the average-rank helper.
//
// Pure functions, thread-safe. Definitions and sources: docs/statistics.md.
#pragma once

#include <vector>

namespace prefsift::stats {

// Ranks 1..n of the values, ties given the average of the ranks they span
// (the "average" method). REQUIRES: no NaN values.
std::vector<double> AverageRanks(const std::vector<double>& values);

struct Spearman {
  double rho = 0.0;  // Pearson correlation of the average ranks
  double p = 1.0;    // two-sided, Student t with n - 2 df (as scipy.stats.spearmanr)
};

// Spearman rank correlation. p uses t = rho * sqrt((n-2) / (1 - rho^2)) with
// n - 2 degrees of freedom; |rho| = 1 gives p = 0.
// REQUIRES: x.size() == y.size() >= 3, no NaN. If violated, or if either
// input is constant (rho undefined), rho and p are NaN.
Spearman SpearmanRank(const std::vector<double>& x, const std::vector<double>& y);

// Kendall's tau-b = (C - D) / sqrt((n0 - n1)(n0 - n2)), where C/D count
// concordant/discordant pairs, n0 = n(n-1)/2 and n1, n2 the pairs tied in x
// and in y. O(n^2): meant for n up to a few tens of thousands.
// REQUIRES: x.size() == y.size() >= 2, no NaN; otherwise NaN. A constant
// input gives NaN.
double KendallTauB(const std::vector<double>& x, const std::vector<double>& y);

}  // namespace prefsift::stats
