// Tests of src/stats/rank_correlation against scipy.stats.spearmanr and
// scipy.stats.kendalltau (fixture from tests/reference/stats_reference.py,
// python3-scipy 1.10.1) and a worked value computed with that scipy.
#include "stats/rank_correlation.h"

#include <cmath>

#include <gtest/gtest.h>

#include "fixture_reader.h"

namespace prefsift::stats {
namespace {

using testing::ParseDouble;
using testing::ParseList;
using testing::ReadFixture;

bool Close(double got, double want) {
  return std::fabs(got - want) <= std::max(1e-9 * std::fabs(want), 1e-12);
}

TEST(Spearman, MethodsWorkedValue) {
  // x = [10..50], y = [1, 3, 2, 5, 4]: scipy.stats.spearmanr -> rho 0.8 (0.7999999999999999),
  // scipy.stats.kendalltau -> tau 0.6 (python3-scipy 1.10.1).
  const std::vector<double> x = {10, 20, 30, 40, 50};
  const std::vector<double> y = {1, 3, 2, 5, 4};
  const Spearman s = SpearmanRank(x, y);
  EXPECT_NEAR(s.rho, 0.8, 1e-15);
  // scipy.stats.spearmanr(x, y).pvalue = 0.10408803866182788 (scipy 1.10.1).
  EXPECT_NEAR(s.p, 0.10408803866182788, 1e-12);
  EXPECT_NEAR(KendallTauB(x, y), 0.6, 1e-15);
}

TEST(Spearman, AverageRanks) {
  // Ties get the mean of the ranks they span (definition of "average" ranks).
  const std::vector<double> r = AverageRanks({3.0, 1.0, 3.0, 2.0, 3.0});
  EXPECT_EQ(r, (std::vector<double>{4.0, 1.0, 4.0, 2.0, 4.0}));
}

TEST(Spearman, AgainstScipyFixtureWithTies) {
  const auto rows = ReadFixture("spearman.tsv");
  ASSERT_GE(rows.size(), 200u);
  for (const auto& row : rows) {
    const std::vector<double> x = ParseList(row[3]);
    const std::vector<double> y = ParseList(row[4]);
    const Spearman s = SpearmanRank(x, y);
    const double rho = ParseDouble(row[0]);
    const double p = ParseDouble(row[1]);
    EXPECT_TRUE(Close(s.rho, rho)) << "n=" << x.size() << " rho " << s.rho << " want " << rho;
    EXPECT_TRUE(Close(s.p, p)) << "n=" << x.size() << " p " << s.p << " want " << p;
    const double tau = KendallTauB(x, y);
    EXPECT_TRUE(Close(tau, ParseDouble(row[2]))) << "n=" << x.size() << " tau " << tau;
  }
}

TEST(Spearman, Degenerate) {
  EXPECT_TRUE(std::isnan(SpearmanRank({1, 2}, {1, 2}).rho));        // n < 3
  EXPECT_TRUE(std::isnan(SpearmanRank({1, 1, 1}, {1, 2, 3}).rho));  // constant input
  EXPECT_TRUE(std::isnan(SpearmanRank({1, 2, 3}, {1, 2}).p));       // size mismatch
  const Spearman perfect = SpearmanRank({1, 2, 3, 4}, {8, 6, 4, 2});
  EXPECT_DOUBLE_EQ(perfect.rho, -1.0);
  EXPECT_DOUBLE_EQ(perfect.p, 0.0);
  EXPECT_TRUE(std::isnan(KendallTauB({1, 1}, {1, 2})));
}

}  // namespace
}  // namespace prefsift::stats
