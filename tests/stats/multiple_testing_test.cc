// Tests of src/stats/multiple_testing. Reference: adjusted p-values computed
// in tests/reference/stats_reference.py directly from the published
// definitions (Holm 1979, Scand. J. Statist. 6:65-70; Benjamini & Hochberg
// 1995, J. R. Statist. Soc. B 57:289-300; citations from memory, unverified;
// the formulas are the common-practice adjusted-p forms), written as O(m^2) max/min
// formulas, independent of the C++ sweep. scipy 1.10.1 has no
// false_discovery_control (added in scipy 1.11), so it is not used.
#include "stats/multiple_testing.h"

#include <cmath>

#include <gtest/gtest.h>

#include "fixture_reader.h"

namespace prefsift::stats {
namespace {

using testing::ParseList;
using testing::ReadFixture;

TEST(MultipleTesting, HandExample) {
  // p = [0.01, 0.04, 0.03, 0.005], m = 4 (worked by hand from the definitions):
  // sorted 0.005, 0.01, 0.03, 0.04.
  // Holm: 4*0.005=0.02, 3*0.01=0.03, 2*0.03=0.06, max(0.06, 1*0.04)=0.06.
  // BH: 0.04*4/4=0.04, min(0.04, 0.03*4/3=0.04)=0.04, min(0.04, 0.01*4/2=0.02)=0.02,
  //     min(0.02, 0.005*4/1=0.02)=0.02.
  const std::vector<double> p = {0.01, 0.04, 0.03, 0.005};
  const std::vector<double> holm = HolmAdjust(p);
  const std::vector<double> bh = BenjaminiHochbergAdjust(p);
  const std::vector<double> want_holm = {0.03, 0.06, 0.06, 0.02};
  const std::vector<double> want_bh = {0.02, 0.04, 0.04, 0.02};
  for (size_t i = 0; i < p.size(); ++i) {
    EXPECT_NEAR(holm[i], want_holm[i], 1e-15) << i;
    EXPECT_NEAR(bh[i], want_bh[i], 1e-15) << i;
  }
  EXPECT_TRUE(HolmAdjust({}).empty());
}

TEST(MultipleTesting, AgainstDefinitionFixture) {
  const auto rows = ReadFixture("multitest.tsv");
  ASSERT_GE(rows.size(), 200u);
  for (const auto& row : rows) {
    const std::vector<double> p = ParseList(row[0]);
    const std::vector<double> want_holm = ParseList(row[1]);
    const std::vector<double> want_bh = ParseList(row[2]);
    const std::vector<double> holm = HolmAdjust(p);
    const std::vector<double> bh = BenjaminiHochbergAdjust(p);
    ASSERT_EQ(holm.size(), p.size());
    for (size_t i = 0; i < p.size(); ++i) {
      EXPECT_NEAR(holm[i], want_holm[i], 1e-15 * std::max(1.0, want_holm[i])) << row[0];
      EXPECT_NEAR(bh[i], want_bh[i], 1e-15 * std::max(1.0, want_bh[i])) << row[0];
      // Properties by definition: adjusted >= raw, Holm >= BH, both <= 1.
      // (m p / m may round one ulp below p.)
      EXPECT_GE(holm[i], p[i] * (1 - 1e-15));
      EXPECT_GE(bh[i], p[i] * (1 - 1e-15));
      EXPECT_GE(holm[i], bh[i] - 1e-15);
      EXPECT_LE(holm[i], 1.0);
    }
  }
}

}  // namespace
}  // namespace prefsift::stats
