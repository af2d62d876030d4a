// Special functions for the statistics module: log-gamma, regularised
// incomplete gamma and beta, normal CDF, and the distribution tails the
// hypothesis tests need (chi-square survival, Student t two-sided p,
// binomial pmf/cdf/sf).
//
// All functions are pure and thread-safe. Accuracy target: ~1e-13 relative
// for the argument ranges prefsift uses (degrees of freedom up to ~1e5,
// binomial n up to ~1e8); see docs/statistics.md for the methods.
#pragma once

#include <cstdint>

namespace prefsift::stats {

// log Gamma(x) for x > 0 (std::lgamma's value, without its write to the global signgam).
double LogGamma(double x);

// Regularised lower incomplete gamma P(a, x) = gamma(a, x) / Gamma(a), and
// the upper complement Q(a, x) = 1 - P(a, x), each computed without
// subtracting from 1 (series for x < a + 1, continued fraction otherwise).
// REQUIRES: a > 0, x >= 0. Returns NaN when violated.
double RegIncGammaP(double a, double x);
double RegIncGammaQ(double a, double x);

// Regularised incomplete beta I_x(a, b) (continued fraction, with the
// symmetry I_x(a,b) = 1 - I_{1-x}(b,a) chosen for convergence).
// REQUIRES: a > 0, b > 0, 0 <= x <= 1. Returns NaN when violated.
double RegIncBeta(double a, double b, double x);

// Standard normal CDF Phi(z) = erfc(-z / sqrt 2) / 2.
double NormalCdf(double z);

// Chi-square survival function P(X > x) for df degrees of freedom
// = Q(df/2, x/2). REQUIRES: df > 0. x <= 0 gives 1.
double ChiSquareSf(double x, double df);

// Two-sided p-value of Student's t: P(|T| >= |t|) with df degrees of freedom
// = I_{df/(df+t^2)}(df/2, 1/2). REQUIRES: df > 0. Infinite t gives 0.
double StudentTTwoSidedP(double t, double df);

// log P(X = k) for X ~ Binomial(n, p), computed with Loader's saddle-point
// form (Stirling-error and deviance terms) so it stays accurate for large n.
// REQUIRES: 0 <= p <= 1. k > n gives -infinity.
double LogBinomPmf(uint64_t k, uint64_t n, double p);
double BinomPmf(uint64_t k, uint64_t n, double p);

// Binomial tails by direct summation of pmf terms from the far end:
// BinomCdf(k) = P(X <= k), BinomSf(k) = P(X > k). k < 0 is allowed:
// BinomCdf(-1) = 0, BinomSf(-1) = 1.
double BinomCdf(int64_t k, uint64_t n, double p);
double BinomSf(int64_t k, uint64_t n, double p);

}  // namespace prefsift::stats
