// Multiple-testing corrections: Holm's step-down (family-wise error rate)
// and Benjamini-Hochberg (false discovery rate). Adjusted p-values are
// returned in input order.
//
// Pure functions, thread-safe. Definitions and sources: docs/statistics.md.
// The default prefsift uses for the bias family is Holm (see the docs).
#pragma once

#include <vector>

namespace prefsift::stats {

// Holm (1979): sort p ascending as p_(1) <= ... <= p_(m);
// adj_(i) = max_{j <= i} min(1, (m - j + 1) p_(j)).
// Reject H_(i) at level alpha iff adj_(i) <= alpha.
// REQUIRES: every p in [0, 1] (NaN propagates to its own entry only if the
// caller passes it; results are then unspecified).
std::vector<double> HolmAdjust(const std::vector<double>& p);

// Benjamini & Hochberg (1995): adj_(i) = min_{j >= i} min(1, m p_(j) / j).
// Reject H_(i) at FDR level q iff adj_(i) <= q.
// REQUIRES: every p in [0, 1].
std::vector<double> BenjaminiHochbergAdjust(const std::vector<double>& p);

}  // namespace prefsift::stats
