// Tests of src/stats/hypothesis_tests against scipy.stats (fixtures written by
// tests/reference/stats_reference.py with Debian's python3-scipy 1.10.1) and
// worked values computed with that scipy (quoted beside each check).
#include "stats/hypothesis_tests.h"

#include <cmath>
#include <string>

#include <gtest/gtest.h>

#include "fixture_reader.h"

namespace prefsift::stats {
namespace {

using testing::ParseDouble;
using testing::ParseList;
using testing::ReadFixture;

// Agreement rule from the brief: 1e-9 relative or 1e-12 absolute.
void ExpectClose(double got, double want, const std::string& what) {
  EXPECT_TRUE(std::fabs(got - want) <= std::max(1e-9 * std::fabs(want), 1e-12))
      << what << ": got " << got << " want " << want;
}

// Worked values from scipy.stats.binomtest(k, n, 0.5).pvalue (Debian's
// python3-scipy 1.10.1), rounded here; the fixture holds the full values.
TEST(BinomTest, MethodsWorkedValues) {
  EXPECT_NEAR(BinomTestTwoSided(550, 1000, 0.5), 0.001731, 5e-7);  // scipy: 0.0017305360849763024
  EXPECT_NEAR(BinomTestTwoSided(530, 1000, 0.5), 0.0620, 5e-5);    // scipy: 0.06202319509836348
  EXPECT_NEAR(BinomTestTwoSided(60, 100, 0.5), 0.05689, 5e-6);     // scipy: 0.05688793364098088
  // scipy.stats.binomtest(550, 1000).pvalue = 0.0017305360849763024 (scipy 1.10.1).
  ExpectClose(BinomTestTwoSided(550, 1000, 0.5), 0.0017305360849763024, "550/1000");
}

TEST(BinomTest, AgainstScipyFixture) {
  const auto rows = ReadFixture("binomtest.tsv");
  ASSERT_GE(rows.size(), 300u);
  for (const auto& row : rows) {
    const uint64_t k = std::stoull(row[0]);
    const uint64_t n = std::stoull(row[1]);
    const double p = ParseDouble(row[2]);
    ExpectClose(BinomTestTwoSided(k, n, p), ParseDouble(row[3]),
                "binomtest(" + row[0] + "," + row[1] + "," + row[2] + ")");
  }
}

TEST(BinomTest, EdgeCases) {
  EXPECT_TRUE(std::isnan(BinomTestTwoSided(1, 0, 0.5)));
  EXPECT_TRUE(std::isnan(BinomTestTwoSided(5, 4, 0.5)));
  EXPECT_TRUE(std::isnan(BinomTestTwoSided(1, 4, 1.5)));
  EXPECT_DOUBLE_EQ(BinomTestTwoSided(5, 10, 0.5), 1.0);
  // 0 successes of 10 at p = 1/2: two tails of 2^-10 each (definition).
  EXPECT_NEAR(BinomTestTwoSided(0, 10, 0.5), 2.0 / 1024.0, 1e-16);
}

TEST(SignTest, IsBinomialOnNonTies) {
  EXPECT_DOUBLE_EQ(SignTest(0, 0), 1.0);
  EXPECT_DOUBLE_EQ(SignTest(60, 40), BinomTestTwoSided(60, 100, 0.5));
  // Symmetric in plus/minus for p = 1/2 (definition).
  EXPECT_DOUBLE_EQ(SignTest(12, 30), SignTest(30, 12));
}

TEST(ChiSquare, MethodsWorkedValue) {
  // scipy.stats.chisquare([300, 250, 230, 220]) (python3-scipy 1.10.1): statistic 15.2,
  // p 0.0016534710516881654; df = 4 - 1 (Pearson's test against a uniform distribution).
  const ChiSquareResult r = ChiSquareUniform({300, 250, 230, 220});
  EXPECT_NEAR(r.statistic, 15.2, 1e-12);
  EXPECT_EQ(r.df, 3);
  EXPECT_NEAR(r.p, 0.001653, 5e-7);
}

TEST(ChiSquare, AgainstScipyFixture) {
  const auto rows = ReadFixture("chisquare.tsv");
  ASSERT_GE(rows.size(), 300u);
  for (const auto& row : rows) {
    std::vector<uint64_t> counts;
    for (double c : ParseList(row[2])) counts.push_back(static_cast<uint64_t>(c));
    ChiSquareResult r;
    if (row[3] == "uniform") {
      r = ChiSquareUniform(counts);
    } else {
      auto res = ChiSquareGoodnessOfFit(counts, ParseList(row[3]));
      ASSERT_TRUE(res.ok()) << res.status().message();
      r = res.value();
    }
    EXPECT_EQ(r.df, static_cast<int>(counts.size()) - 1);
    ExpectClose(r.statistic, ParseDouble(row[0]), "chi2 stat " + row[2]);
    ExpectClose(r.p, ParseDouble(row[1]), "chi2 p " + row[2]);
  }
}

TEST(ChiSquare, Errors) {
  EXPECT_TRUE(std::isnan(ChiSquareUniform({5}).p));
  EXPECT_TRUE(std::isnan(ChiSquareUniform({0, 0}).p));
  EXPECT_FALSE(ChiSquareGoodnessOfFit({1, 2}, {1.0}).ok());
  EXPECT_FALSE(ChiSquareGoodnessOfFit({1, 2}, {1.0, 0.0}).ok());
  EXPECT_FALSE(ChiSquareGoodnessOfFit({0, 0}, {1.0, 1.0}).ok());
  // Expected shares are rescaled: shares and counts give the same answer.
  auto a = ChiSquareGoodnessOfFit({30, 70}, {0.25, 0.75});
  auto b = ChiSquareGoodnessOfFit({30, 70}, {25.0, 75.0});
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_DOUBLE_EQ(a.value().statistic, b.value().statistic);
  // (30-25)^2/25 + (70-75)^2/75 = 1 + 1/3 (definition).
  EXPECT_NEAR(a.value().statistic, 4.0 / 3.0, 1e-14);
}

}  // namespace
}  // namespace prefsift::stats

namespace prefsift::stats {
namespace {
using testing::ParseDouble;
using testing::ReadFixture;
using testing::Split;

// The shortcut audit's test against scipy 1.10.1 (tests/data/stats/
// poisson_binomial.tsv, made by tests/reference/stats_reference.py): the exact
// tail by convolving scipy.stats.binom.pmf arrays, and above 20,000 trials
// scipy.stats.norm.sf with continuity correction.
TEST(PoissonBinomial, MatchesScipyReference) {
  const auto rows = ReadFixture("poisson_binomial.tsv");
  ASSERT_GE(rows.size(), 50u);
  int exact = 0, approx = 0;
  for (const auto& row : rows) {
    std::vector<BernoulliGroup> groups;
    for (const auto& g : Split(row[0], ',')) {
      const auto parts = Split(g, ':');
      groups.push_back({static_cast<uint64_t>(std::stoull(parts[0])), ParseDouble(parts[1])});
    }
    const uint64_t k = std::stoull(row[1]);
    const auto t = PoissonBinomialSf(k, groups);
    EXPECT_EQ(t.exact, row[2] == "1") << row[0];
    const double want = ParseDouble(row[3]);
    // Summation order differs from numpy's; relative 1e-9 or absolute 1e-13.
    EXPECT_TRUE(std::fabs(t.p - want) <= std::max(1e-9 * want, 1e-13)) << row[0] << " k=" << k << ": got " << t.p
                                                                       << " want " << want;
    (t.exact ? exact : approx) += 1;
  }
  EXPECT_GT(exact, 40);
  EXPECT_GT(approx, 0);
}

// Worked example (ours): one group of 10 fair coins, P(S >= 7) = 176/1024.
TEST(PoissonBinomial, FairCoins) {
  EXPECT_NEAR(PoissonBinomialSf(7, {{10, 0.5}}).p, 176.0 / 1024.0, 1e-15);
  EXPECT_DOUBLE_EQ(PoissonBinomialSf(0, {{10, 0.5}}).p, 1.0);
  EXPECT_DOUBLE_EQ(PoissonBinomialSf(11, {{10, 0.5}}).p, 0.0);
}

}  // namespace
}  // namespace prefsift::stats
