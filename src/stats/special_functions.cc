// Special functions; see special_functions.h. Pure, thread-safe.
//
// log Gamma is taken with lgamma_r where the C library has it: lgamma also
// writes the sign of Gamma to the global `signgam` (C99 7.12.8.3, POSIX), a
// data race when several threads call it (ThreadSanitizer found it in the
// bias stage's tests run in parallel). glibc computes both with the same
// routine, so the values are the same to the last bit.
//
// Methods (docs/statistics.md has the sources and tags):
//  - incomplete gamma: power series for x < a + 1, Lentz continued fraction
//    for the upper tail otherwise (common practice; the textbook split).
//  - incomplete beta: the standard continued fraction evaluated with the
//    modified Lentz method, using the symmetry relation so that it is only
//    evaluated where it converges fast (x < (a+1)/(a+b+2)).
//  - binomial pmf: Loader (2000), "Fast and accurate computation of binomial
//    probabilities": pmf = exp(-stirlerr terms - bd0 terms) / sqrt(2 pi x (n-x)/n).
#include "stats/special_functions.h"

#include <cmath>
#include <limits>

namespace prefsift::stats {
namespace {

double Lgamma(double x) {
#if defined(__GLIBC__)
  int sign = 0;
  return ::lgamma_r(x, &sign);
#else
  return std::lgamma(x);
#endif
}

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kEps = 1e-16;
constexpr double kTiny = 1e-300;
constexpr int kMaxIter = 100000;
constexpr double kLnSqrt2Pi = 0.91893853320467274178;  // log(sqrt(2 pi))
constexpr double kLn2Pi = 1.83787706640934548356;      // log(2 pi)

// log of the common prefactor x^a e^-x / Gamma(a).
double GammaPrefactorLog(double a, double x) {
  return a * std::log(x) - x - Lgamma(a);
}

// P(a, x) by the power series; valid (fast) for x < a + 1.
double GammaSeries(double a, double x) {
  double ap = a;
  double sum = 1.0 / a;
  double del = sum;
  for (int i = 0; i < kMaxIter; ++i) {
    ap += 1.0;
    del *= x / ap;
    sum += del;
    if (std::fabs(del) < std::fabs(sum) * kEps) break;
  }
  return sum * std::exp(GammaPrefactorLog(a, x));
}

// Q(a, x) by the continued fraction (modified Lentz); valid for x >= a + 1.
double GammaContinuedFraction(double a, double x) {
  double b = x + 1.0 - a;
  double c = 1.0 / kTiny;
  double d = 1.0 / b;
  double h = d;
  for (int i = 1; i < kMaxIter; ++i) {
    const double an = -i * (i - a);
    b += 2.0;
    d = an * d + b;
    if (std::fabs(d) < kTiny) d = kTiny;
    c = b + an / c;
    if (std::fabs(c) < kTiny) c = kTiny;
    d = 1.0 / d;
    const double del = d * c;
    h *= del;
    if (std::fabs(del - 1.0) < kEps) break;
  }
  return std::exp(GammaPrefactorLog(a, x)) * h;
}

// Continued fraction for I_x(a, b) without the prefactor (modified Lentz).
// xc = 1 - x, passed separately so callers keep its precision.
double BetaContinuedFraction(double a, double b, double x) {
  const double qab = a + b;
  const double qap = a + 1.0;
  const double qam = a - 1.0;
  double c = 1.0;
  double d = 1.0 - qab * x / qap;
  if (std::fabs(d) < kTiny) d = kTiny;
  d = 1.0 / d;
  double h = d;
  for (int m = 1; m < kMaxIter; ++m) {
    const int m2 = 2 * m;
    double aa = m * (b - m) * x / ((qam + m2) * (a + m2));
    d = 1.0 + aa * d;
    if (std::fabs(d) < kTiny) d = kTiny;
    c = 1.0 + aa / c;
    if (std::fabs(c) < kTiny) c = kTiny;
    d = 1.0 / d;
    h *= d * c;
    aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
    d = 1.0 + aa * d;
    if (std::fabs(d) < kTiny) d = kTiny;
    c = 1.0 + aa / c;
    if (std::fabs(c) < kTiny) c = kTiny;
    d = 1.0 / d;
    const double del = d * c;
    h *= del;
    if (std::fabs(del - 1.0) < kEps) break;
  }
  return h;
}

// I_x(a, b) given both x and xc = 1 - x (each exact as passed).
double RegIncBetaPair(double a, double b, double x, double xc) {
  if (x <= 0.0) return 0.0;
  if (xc <= 0.0) return 1.0;
  const double log_front = Lgamma(a + b) - Lgamma(a) - Lgamma(b) +
                           a * std::log(x) + b * std::log(xc);
  if (x < (a + 1.0) / (a + b + 2.0)) {
    return std::exp(log_front) * BetaContinuedFraction(a, b, x) / a;
  }
  return 1.0 - std::exp(log_front) * BetaContinuedFraction(b, a, xc) / b;
}

// Loader's Stirling error: log(n!) - log(sqrt(2 pi n) (n/e)^n).
double StirlingError(double n) {
  if (n <= 15.0) {
    if (n == 0.0) return 0.0;  // limit used only through the x == 0 branch
    return Lgamma(n + 1.0) - (n + 0.5) * std::log(n) + n - kLnSqrt2Pi;
  }
  constexpr double s0 = 1.0 / 12.0;
  constexpr double s1 = 1.0 / 360.0;
  constexpr double s2 = 1.0 / 1260.0;
  constexpr double s3 = 1.0 / 1680.0;
  constexpr double s4 = 1.0 / 1188.0;
  const double nn = n * n;
  if (n > 500) return (s0 - s1 / nn) / n;
  if (n > 80) return (s0 - (s1 - s2 / nn) / nn) / n;
  if (n > 35) return (s0 - (s1 - (s2 - s3 / nn) / nn) / nn) / n;
  return (s0 - (s1 - (s2 - (s3 - s4 / nn) / nn) / nn) / nn) / n;
}

// Loader's deviance term bd0(x, np) = x log(x/np) + np - x, computed
// without cancellation when x is close to np.
double DevianceTerm(double x, double np) {
  if (std::fabs(x - np) < 0.1 * (x + np)) {
    double v = (x - np) / (x + np);
    double s = (x - np) * v;
    double ej = 2.0 * x * v;
    v *= v;
    for (int j = 1; j < 1000; ++j) {
      ej *= v;
      const double s1 = s + ej / (2 * j + 1);
      if (s1 == s) return s1;
      s = s1;
    }
    return s;
  }
  return x * std::log(x / np) + np - x;
}

}  // namespace

double LogGamma(double x) { return Lgamma(x); }

double RegIncGammaP(double a, double x) {
  if (!(a > 0.0) || !(x >= 0.0)) return kNaN;
  if (x == 0.0) return 0.0;
  if (std::isinf(x)) return 1.0;
  if (x < a + 1.0) return GammaSeries(a, x);
  return 1.0 - GammaContinuedFraction(a, x);
}

double RegIncGammaQ(double a, double x) {
  if (!(a > 0.0) || !(x >= 0.0)) return kNaN;
  if (x == 0.0) return 1.0;
  if (std::isinf(x)) return 0.0;
  if (x < a + 1.0) return 1.0 - GammaSeries(a, x);
  return GammaContinuedFraction(a, x);
}

double RegIncBeta(double a, double b, double x) {
  if (!(a > 0.0) || !(b > 0.0) || !(x >= 0.0) || !(x <= 1.0)) return kNaN;
  return RegIncBetaPair(a, b, x, 1.0 - x);
}

double NormalCdf(double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); }

double ChiSquareSf(double x, double df) {
  if (!(df > 0.0) || std::isnan(x)) return kNaN;
  if (x <= 0.0) return 1.0;
  return RegIncGammaQ(0.5 * df, 0.5 * x);
}

double StudentTTwoSidedP(double t, double df) {
  if (!(df > 0.0) || std::isnan(t)) return kNaN;
  if (std::isinf(t)) return 0.0;
  const double t2 = t * t;
  // x = df / (df + t^2), 1 - x = t^2 / (df + t^2), both without cancellation.
  const double denom = df + t2;
  return RegIncBetaPair(0.5 * df, 0.5, df / denom, t2 / denom);
}

double LogBinomPmf(uint64_t k, uint64_t n, double p) {
  if (!(p >= 0.0) || !(p <= 1.0)) return kNaN;
  if (k > n) return -kInf;
  const double q = 1.0 - p;
  const double x = static_cast<double>(k);
  const double nd = static_cast<double>(n);
  if (p == 0.0) return k == 0 ? 0.0 : -kInf;
  if (q == 0.0) return k == n ? 0.0 : -kInf;
  if (k == 0) {
    if (n == 0) return 0.0;
    return p < 0.1 ? -DevianceTerm(nd, nd * q) - nd * p : nd * std::log(q);
  }
  if (k == n) {
    return q < 0.1 ? -DevianceTerm(nd, nd * p) - nd * q : nd * std::log(p);
  }
  const double lc = StirlingError(nd) - StirlingError(x) - StirlingError(nd - x) -
                    DevianceTerm(x, nd * p) - DevianceTerm(nd - x, nd * q);
  // log(2 pi x (n - x) / n), with (n - x)/n = 1 - x/n.
  const double lf = kLn2Pi + std::log(x) + std::log1p(-x / nd);
  return lc - 0.5 * lf;
}

double BinomPmf(uint64_t k, uint64_t n, double p) { return std::exp(LogBinomPmf(k, n, p)); }

namespace {

// Sum of pmf(i) for i = from, from-1, ..., 0 (down) or from, ..., n (up),
// stopping once terms are negligible. Terms are monotone on each side of
// the mode, so the callers only sum away from the mode.
double SumPmfDown(int64_t from, uint64_t n, double p) {
  double sum = 0.0;
  for (int64_t i = from; i >= 0; --i) {
    const double term = BinomPmf(static_cast<uint64_t>(i), n, p);
    sum += term;
    if (term <= sum * 1e-18) break;
  }
  return sum;
}

double SumPmfUp(int64_t from, uint64_t n, double p) {
  double sum = 0.0;
  for (int64_t i = from; i <= static_cast<int64_t>(n); ++i) {
    const double term = BinomPmf(static_cast<uint64_t>(i), n, p);
    sum += term;
    if (term <= sum * 1e-18) break;
  }
  return sum;
}

}  // namespace

double BinomCdf(int64_t k, uint64_t n, double p) {
  if (!(p >= 0.0) || !(p <= 1.0)) return kNaN;
  if (k < 0) return 0.0;
  if (k >= static_cast<int64_t>(n)) return 1.0;
  const double mode = std::floor((static_cast<double>(n) + 1.0) * p);
  if (static_cast<double>(k) < mode) return SumPmfDown(k, n, p);
  return 1.0 - SumPmfUp(k + 1, n, p);
}

double BinomSf(int64_t k, uint64_t n, double p) {
  if (!(p >= 0.0) || !(p <= 1.0)) return kNaN;
  if (k < 0) return 1.0;
  if (k >= static_cast<int64_t>(n)) return 0.0;
  const double mode = std::floor((static_cast<double>(n) + 1.0) * p);
  if (static_cast<double>(k + 1) > mode) return SumPmfUp(k + 1, n, p);
  return 1.0 - SumPmfDown(k, n, p);
}

}  // namespace prefsift::stats
