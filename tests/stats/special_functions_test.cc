// Tests of src/stats/special_functions. Sources named per check.
#include "stats/special_functions.h"

#include <cmath>
#include <cstring>
#include <thread>
#include <vector>

#include <gtest/gtest.h>

namespace prefsift::stats {
namespace {

// Identities that hold by definition (exact closed forms).
TEST(SpecialFunctions, IncompleteGammaClosedForms) {
  // P(1, x) = 1 - e^-x (exponential CDF): closed form of the definition.
  for (double x : {1e-8, 0.1, 1.0, 2.5, 10.0, 50.0}) {
    EXPECT_NEAR(RegIncGammaQ(1.0, x), std::exp(-x), 1e-15 * std::exp(-x) + 1e-300) << x;
    EXPECT_NEAR(RegIncGammaP(1.0, x), -std::expm1(-x), 1e-14 * -std::expm1(-x)) << x;
  }
  // Chi-square with 2 df: survival = exp(-x/2) (closed form).
  EXPECT_NEAR(ChiSquareSf(10.0, 2), std::exp(-5.0), 1e-16);
  // Chi-square 1 df: P(X > z^2) = 2(1 - Phi(z)) = erfc(z / sqrt 2) (closed form).
  for (double z : {0.5, 1.0, 1.959963984540054, 3.0, 6.0}) {
    const double want = std::erfc(z / std::sqrt(2.0));
    EXPECT_NEAR(ChiSquareSf(z * z, 1), want, 1e-13 * want) << z;
  }
  EXPECT_DOUBLE_EQ(RegIncGammaP(3.0, 0.0), 0.0);
  EXPECT_TRUE(std::isnan(RegIncGammaP(-1.0, 1.0)));
}

TEST(SpecialFunctions, IncompleteBetaClosedForms) {
  // I_x(a, 1) = x^a and I_x(1, b) = 1 - (1-x)^b (closed forms of the definition).
  for (double x : {0.001, 0.2, 0.5, 0.9, 0.999}) {
    EXPECT_NEAR(RegIncBeta(3.5, 1.0, x), std::pow(x, 3.5), 1e-14) << x;
    EXPECT_NEAR(RegIncBeta(1.0, 4.0, x), 1.0 - std::pow(1.0 - x, 4.0), 1e-14) << x;
    // Symmetry I_x(a,b) = 1 - I_{1-x}(b,a).
    EXPECT_NEAR(RegIncBeta(2.3, 7.1, x), 1.0 - RegIncBeta(7.1, 2.3, 1.0 - x), 1e-14) << x;
  }
}

TEST(SpecialFunctions, StudentT) {
  // df = 1 is the Cauchy distribution: P(|T| >= t) = 1 - (2/pi) atan(t) (closed form).
  for (double t : {0.1, 1.0, 3.0, 100.0}) {
    const double want = 1.0 - 2.0 / M_PI * std::atan(t);
    EXPECT_NEAR(StudentTTwoSidedP(t, 1.0), want, 1e-14) << t;
  }
  // df = 2: P(|T| >= t) = 1 - t / sqrt(2 + t^2) (closed form).
  for (double t : {0.1, 1.0, 4.0}) {
    EXPECT_NEAR(StudentTTwoSidedP(t, 2.0), 1.0 - t / std::sqrt(2.0 + t * t), 1e-14) << t;
  }
  // Large df tends to the normal: 1.959963984540054 -> 0.05 (common practice value).
  EXPECT_NEAR(StudentTTwoSidedP(1.959963984540054, 1e7), 0.05, 1e-7);
  EXPECT_DOUBLE_EQ(StudentTTwoSidedP(0.0, 5.0), 1.0);
  EXPECT_DOUBLE_EQ(StudentTTwoSidedP(INFINITY, 5.0), 0.0);
}

TEST(SpecialFunctions, NormalCdf) {
  // Phi(1.959963984540054) = 0.975 (common practice quantile).
  EXPECT_NEAR(NormalCdf(1.959963984540054), 0.975, 1e-15);
  EXPECT_DOUBLE_EQ(NormalCdf(0.0), 0.5);
}

TEST(SpecialFunctions, BinomialPmfAgainstDirectProduct) {
  // Small n: compare with the definition C(n,k) p^k (1-p)^(n-k) computed directly.
  for (uint64_t n : {1u, 5u, 20u, 60u}) {
    double c = 1.0;  // C(n, k) built incrementally
    for (uint64_t k = 0; k <= n; ++k) {
      if (k > 0) c = c * static_cast<double>(n - k + 1) / static_cast<double>(k);
      const double p = 0.3;
      const double want = c * std::pow(p, k) * std::pow(1 - p, n - k);
      EXPECT_NEAR(BinomPmf(k, n, p), want, 1e-13 * want) << n << " " << k;
    }
  }
  // Sum to 1 for a large n (definition).
  double sum = 0.0;
  for (uint64_t k = 0; k <= 100000; ++k) sum += BinomPmf(k, 100000, 0.37);
  EXPECT_NEAR(sum, 1.0, 1e-12);
  EXPECT_EQ(LogBinomPmf(11, 10, 0.5), -INFINITY);
  EXPECT_DOUBLE_EQ(BinomPmf(0, 10, 0.0), 1.0);
  EXPECT_DOUBLE_EQ(BinomPmf(10, 10, 1.0), 1.0);
}

TEST(SpecialFunctions, BinomialTailsComplement) {
  for (int64_t k : {-1, 0, 3, 10, 49, 50, 51, 99, 100}) {
    EXPECT_NEAR(BinomCdf(k, 100, 0.5) + BinomSf(k, 100, 0.5), 1.0, 1e-15) << k;
  }
  // P(X <= 0) = (1-p)^n (definition).
  EXPECT_NEAR(BinomCdf(0, 30, 0.2), std::pow(0.8, 30), 1e-15);
}

// LogGamma is the C library's lgamma without its write to the global signgam
// (special_functions.cc): the same bits, and safe from many threads at once
// (a data race before, found by ThreadSanitizer; scripts/tsan.sh). Gamma(1) =
// Gamma(2) = 1 and Gamma(1/2) = sqrt(pi) (closed forms).
TEST(SpecialFunctions, LogGammaIsTheCLibrarysLgammaAndSafeAcrossThreads) {
  EXPECT_EQ(LogGamma(1.0), 0.0);
  EXPECT_EQ(LogGamma(2.0), 0.0);
  EXPECT_NEAR(LogGamma(0.5), 0.5 * std::log(M_PI), 1e-15);
  std::vector<double> xs;
  for (double x = 1e-6; x < 1e6; x *= 1.37) xs.push_back(x);
  for (double x : xs) {
    const double a = LogGamma(x), b = std::lgamma(x);
    EXPECT_EQ(std::memcmp(&a, &b, sizeof a), 0) << x;
  }
  std::vector<std::thread> pool;
  std::vector<double> sums(4, 0.0);
  for (size_t t = 0; t < sums.size(); ++t) {
    pool.emplace_back([&, t] {
      for (int rep = 0; rep < 50; ++rep) {
        for (double x : xs) sums[t] += LogGamma(x) + BinomPmf(40, 100, 0.4);
      }
    });
  }
  for (auto& th : pool) th.join();
  for (double s : sums) EXPECT_EQ(s, sums[0]);
}

}  // namespace
}  // namespace prefsift::stats
