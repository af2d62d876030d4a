// Exact binomial, sign and chi-square goodness-of-fit tests; see
// hypothesis_tests.h. Pure, thread-safe.
#include "stats/hypothesis_tests.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>
#include <string>

#include "stats/special_functions.h"

namespace prefsift::stats {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Binary search over a function `a` that is ascending on [lo, hi]: returns i
// with a(i) <= d < a(i+1). The exact control flow of scipy's
// _binary_search_for_binom_tst (scipy 1.10, stats/_binomtest.py) is kept so
// the boundary term is chosen the same way.
int64_t BinarySearch(const std::function<double(int64_t)>& a, double d, int64_t lo,
                     int64_t hi) {
  while (lo < hi) {
    const int64_t mid = lo + (hi - lo) / 2;
    const double midval = a(mid);
    if (midval < d) {
      lo = mid + 1;
    } else if (midval > d) {
      hi = mid - 1;
    } else {
      return mid;
    }
  }
  return a(lo) <= d ? lo : lo - 1;
}

double Pmf(int64_t i, uint64_t n, double p) {
  if (i < 0 || i > static_cast<int64_t>(n)) return 0.0;
  return BinomPmf(static_cast<uint64_t>(i), n, p);
}

}  // namespace

double BinomTestTwoSided(uint64_t k, uint64_t n, double p) {
  if (n == 0 || k > n || !(p >= 0.0) || !(p <= 1.0)) return kNaN;
  const double kd = static_cast<double>(k);
  const double nd = static_cast<double>(n);
  const int64_t ki = static_cast<int64_t>(k);
  const int64_t ni = static_cast<int64_t>(n);
  const double d = Pmf(ki, n, p);
  const double rerr = 1.0 + 1e-7;
  double pval;
  if (kd == p * nd) {
    pval = 1.0;
  } else if (kd < p * nd) {
    // Outcomes above the mean that are no more likely than k.
    const int64_t ix = BinarySearch([&](int64_t x) { return -Pmf(x, n, p); }, -d * rerr,
                                    static_cast<int64_t>(std::ceil(p * nd)), ni);
    const int64_t y = ni - ix + ((d * rerr == Pmf(ix, n, p)) ? 1 : 0);
    pval = BinomCdf(ki, n, p) + BinomSf(ni - y, n, p);
  } else {
    // Outcomes below the mean that are no more likely than k.
    const int64_t ix = BinarySearch([&](int64_t x) { return Pmf(x, n, p); }, d * rerr, 0,
                                    static_cast<int64_t>(std::floor(p * nd)));
    const int64_t y = ix + 1;
    pval = BinomCdf(y - 1, n, p) + BinomSf(ki - 1, n, p);
  }
  return std::min(1.0, pval);
}

double SignTest(uint64_t plus, uint64_t minus) {
  const uint64_t n = plus + minus;
  if (n == 0) return 1.0;
  return BinomTestTwoSided(plus, n, 0.5);
}

ChiSquareResult ChiSquareUniform(const std::vector<uint64_t>& counts) {
  ChiSquareResult r;
  r.df = static_cast<int>(counts.size()) - 1;
  double total = 0.0;
  for (uint64_t c : counts) total += static_cast<double>(c);
  if (counts.size() < 2 || total <= 0.0) {
    r.statistic = kNaN;
    r.p = kNaN;
    return r;
  }
  const double expected = total / static_cast<double>(counts.size());
  double stat = 0.0;
  for (uint64_t c : counts) {
    const double diff = static_cast<double>(c) - expected;
    stat += diff * diff / expected;
  }
  r.statistic = stat;
  r.p = ChiSquareSf(stat, r.df);
  return r;
}

Result<ChiSquareResult> ChiSquareGoodnessOfFit(const std::vector<uint64_t>& counts,
                                               const std::vector<double>& expected) {
  if (counts.size() != expected.size()) {
    return Status::Input("chi-square: " + std::to_string(counts.size()) +
                         " observed categories but " + std::to_string(expected.size()) +
                         " expected shares");
  }
  if (counts.size() < 2) return Status::Input("chi-square: need at least 2 categories");
  double total = 0.0;
  double weight_sum = 0.0;
  for (size_t i = 0; i < counts.size(); ++i) {
    if (!std::isfinite(expected[i]) || expected[i] <= 0.0) {
      return Status::Input("chi-square: expected share " + std::to_string(i) +
                           " must be finite and > 0");
    }
    total += static_cast<double>(counts[i]);
    weight_sum += expected[i];
  }
  if (total <= 0.0) return Status::Input("chi-square: observed total is 0");
  ChiSquareResult r;
  r.df = static_cast<int>(counts.size()) - 1;
  double stat = 0.0;
  for (size_t i = 0; i < counts.size(); ++i) {
    const double e = expected[i] * (total / weight_sum);
    const double diff = static_cast<double>(counts[i]) - e;
    stat += diff * diff / e;
  }
  r.statistic = stat;
  r.p = ChiSquareSf(stat, r.df);
  return r;
}

PoissonBinomialTail PoissonBinomialSf(uint64_t k, const std::vector<BernoulliGroup>& groups, uint64_t exact_limit) {
  PoissonBinomialTail t;
  uint64_t total = 0;
  double var = 0;
  for (const auto& g : groups) {
    total += g.n;
    t.mean += static_cast<double>(g.n) * g.p;
    var += static_cast<double>(g.n) * g.p * (1 - g.p);
  }
  t.sd = std::sqrt(var);
  if (k == 0) {
    t.p = 1.0;
    return t;
  }
  if (k > total) {
    t.p = 0.0;
    return t;
  }
  if (total > exact_limit) {
    t.exact = false;
    t.p = t.sd > 0 ? 1.0 - NormalCdf((static_cast<double>(k) - 0.5 - t.mean) / t.sd)
                   : (static_cast<double>(k) <= t.mean ? 1.0 : 0.0);
    return t;
  }
  std::vector<double> pmf{1.0};
  for (const auto& g : groups) {
    if (g.n == 0) continue;
    std::vector<double> b(g.n + 1);
    for (uint64_t j = 0; j <= g.n; ++j) b[j] = BinomPmf(j, g.n, g.p);
    std::vector<double> next(pmf.size() + g.n, 0.0);
    for (size_t a = 0; a < pmf.size(); ++a) {
      if (pmf[a] == 0) continue;
      for (size_t j = 0; j < b.size(); ++j) next[a + j] += pmf[a] * b[j];
    }
    pmf = std::move(next);
  }
  double tail = 0;
  for (size_t s = pmf.size(); s-- > k;) tail += pmf[s];  // small terms first
  t.p = std::min(1.0, tail);
  return t;
}

}  // namespace prefsift::stats
