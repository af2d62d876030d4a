// Spearman and Kendall rank correlation; see rank_correlation.h. Pure,
// thread-safe.
#include "stats/rank_correlation.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <numeric>

#include "stats/special_functions.h"

namespace prefsift::stats {
namespace {
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
}  // namespace

std::vector<double> AverageRanks(const std::vector<double>& values) {
  const size_t n = values.size();
  std::vector<size_t> order(n);
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(),
                   [&](size_t a, size_t b) { return values[a] < values[b]; });
  std::vector<double> ranks(n);
  size_t i = 0;
  while (i < n) {
    size_t j = i + 1;
    while (j < n && values[order[j]] == values[order[i]]) ++j;
    // Positions i..j-1 (0-based) share ranks i+1..j; their mean is (i+1+j)/2.
    const double avg = 0.5 * static_cast<double>(i + 1 + j);
    for (size_t t = i; t < j; ++t) ranks[order[t]] = avg;
    i = j;
  }
  return ranks;
}

Spearman SpearmanRank(const std::vector<double>& x, const std::vector<double>& y) {
  Spearman out{kNaN, kNaN};
  const size_t n = x.size();
  if (n != y.size() || n < 3) return out;
  for (size_t i = 0; i < n; ++i) {
    if (std::isnan(x[i]) || std::isnan(y[i])) return out;
  }
  const std::vector<double> rx = AverageRanks(x);
  const std::vector<double> ry = AverageRanks(y);
  // Both rank vectors have mean (n + 1) / 2 exactly.
  const double mean = 0.5 * static_cast<double>(n + 1);
  double sxy = 0.0, sxx = 0.0, syy = 0.0;
  for (size_t i = 0; i < n; ++i) {
    const double dx = rx[i] - mean;
    const double dy = ry[i] - mean;
    sxy += dx * dy;
    sxx += dx * dx;
    syy += dy * dy;
  }
  if (sxx == 0.0 || syy == 0.0) return out;
  double rho = sxy / std::sqrt(sxx * syy);
  rho = std::clamp(rho, -1.0, 1.0);
  out.rho = rho;
  const double df = static_cast<double>(n) - 2.0;
  if (std::fabs(rho) == 1.0) {
    out.p = 0.0;
    return out;
  }
  // t^2 = rho^2 df / (1 - rho^2); the t two-sided p is I_{1-rho^2}(df/2, 1/2).
  const double t = rho * std::sqrt(df / ((1.0 + rho) * (1.0 - rho)));
  out.p = StudentTTwoSidedP(t, df);
  return out;
}

double KendallTauB(const std::vector<double>& x, const std::vector<double>& y) {
  const size_t n = x.size();
  if (n != y.size() || n < 2) return kNaN;
  for (size_t i = 0; i < n; ++i) {
    if (std::isnan(x[i]) || std::isnan(y[i])) return kNaN;
  }
  int64_t concordant_minus_discordant = 0;
  int64_t tied_x = 0, tied_y = 0;
  for (size_t i = 0; i < n; ++i) {
    for (size_t j = i + 1; j < n; ++j) {
      const double dx = x[i] - x[j];
      const double dy = y[i] - y[j];
      if (dx == 0.0) ++tied_x;
      if (dy == 0.0) ++tied_y;
      if (dx == 0.0 || dy == 0.0) continue;
      concordant_minus_discordant += ((dx > 0.0) == (dy > 0.0)) ? 1 : -1;
    }
  }
  const double n0 = 0.5 * static_cast<double>(n) * static_cast<double>(n - 1);
  const double denom = std::sqrt((n0 - static_cast<double>(tied_x)) *
                                 (n0 - static_cast<double>(tied_y)));
  if (denom == 0.0) return kNaN;
  return static_cast<double>(concordant_minus_discordant) / denom;
}

}  // namespace prefsift::stats
