// Tests of src/stats/choice_model.
//  - B = 2 against sklearn.linear_model.LogisticRegression (python3-sklearn
//    1.2.1, fit_intercept=False, C=1e6, lbfgs, tol=1e-12) on feature
//    differences: the same model (Bradley-Terry = logistic regression without
//    intercept) with l2 = 1/C.
//  - B > 2 (fixed and varying B) against the conditional-logit NLL minimised
//    by scipy.optimize.minimize(BFGS) in tests/reference/stats_reference.py.
//  - Gradient and Hessian against central finite differences (definition).
//  - Edge cases: separation, huge features, constant features, bad input.
#include "stats/choice_model.h"

#include <cmath>
#include <random>

#include <gtest/gtest.h>

#include "fixture_reader.h"

namespace prefsift::stats {
namespace {

using testing::ParseDouble;
using testing::ParseList;
using testing::ReadFixture;
using testing::Split;

struct Fixture {
  ChoiceData data;
  std::vector<double> weights;
  double nll = 0.0;
  double l2 = 0.0;
};

Fixture LoadChoice(const std::string& name) {
  Fixture fx;
  for (const auto& row : ReadFixture(name)) {
    if (row[0] == "weights") {
      fx.weights = ParseList(row[1]);
      fx.data.dim = static_cast<int>(fx.weights.size());
    } else if (row[0] == "nll") {
      fx.nll = ParseDouble(row[1]);
    } else if (row[0] == "l2") {
      fx.l2 = ParseDouble(row[1]);
    } else if (row[0] == "cmp") {
      std::vector<double> flat;
      for (const std::string& r : Split(row[2], ';')) {
        for (double v : ParseList(r)) flat.push_back(v);
      }
      fx.data.Add(flat, static_cast<uint32_t>(std::stoul(row[1])));
    }
  }
  return fx;
}

void CheckAgainstReference(const std::string& name, double weight_rel_tol) {
  const Fixture fx = LoadChoice(name);
  ASSERT_GT(fx.data.size(), 100u) << name;
  ChoiceFitOptions opt;
  opt.l2 = fx.l2;
  Result<ChoiceFit> fit = FitChoiceModel(fx.data, opt);
  ASSERT_TRUE(fit.ok()) << fit.status().message();
  const ChoiceFit& f = fit.value();
  EXPECT_TRUE(f.converged) << f.message;
  EXPECT_EQ(f.outcome, ChoiceFitOutcome::kConverged);
  EXPECT_LT(f.gradient_norm, 1e-8) << name;
  EXPECT_LE(f.iterations, 20) << name;
  ASSERT_EQ(f.weights.size(), fx.weights.size());
  for (size_t k = 0; k < fx.weights.size(); ++k) {
    EXPECT_NEAR(f.weights[k], fx.weights[k], weight_rel_tol * std::fabs(fx.weights[k]) + 1e-9)
        << name << " weight " << k;
  }
  EXPECT_NEAR(f.nll, fx.nll, 1e-9 * fx.nll) << name;
  // Our optimum is at least as good as the reference's (to rounding).
  EXPECT_LE(f.objective, EvaluateChoiceObjective(fx.data, fx.weights, fx.l2).value + 1e-10) << name;
  ASSERT_EQ(f.std_errors.size(), fx.weights.size());
  for (double se : f.std_errors) EXPECT_TRUE(se > 0.0 && std::isfinite(se));
  // Standardising changes the fitted scale only: raw-scale weights agree
  // when l2 is (nearly) zero.
  if (fx.l2 < 1e-3) {
    ChoiceFitOptions std_opt = opt;
    std_opt.standardize = true;
    std_opt.l2 = 0.0;
    Result<ChoiceFit> sfit = FitChoiceModel(fx.data, std_opt);
    ASSERT_TRUE(sfit.ok());
    ASSERT_TRUE(sfit.value().converged);
    for (size_t k = 0; k < fx.weights.size(); ++k) {
      EXPECT_NEAR(sfit.value().weights[k], fx.weights[k], 1e-5 * std::fabs(fx.weights[k]) + 1e-6);
      EXPECT_NEAR(sfit.value().std_errors[k], f.std_errors[k], 1e-5 * f.std_errors[k]);
    }
  }
}

// sklearn LogisticRegression reference (B = 2). The brief asks for 1e-3
// relative; with the same l2 = 1/C we hold 1e-5 (sklearn's lbfgs stops
// about 1e-6 relative short of the optimum; our objective is no worse).
TEST(ChoiceModel, BradleyTerryMatchesSklearnSmall) { CheckAgainstReference("choice_b2_a.tsv", 1e-5); }
TEST(ChoiceModel, BradleyTerryMatchesSklearnLarger) { CheckAgainstReference("choice_b2_b.tsv", 1e-5); }
// scipy.optimize.minimize(BFGS) reference (B = 3; B varying 2..7; l2 = 2.5).
TEST(ChoiceModel, ConditionalLogitMatchesScipyB3) { CheckAgainstReference("choice_bk_a.tsv", 1e-6); }
TEST(ChoiceModel, ConditionalLogitMatchesScipyVaryingB) { CheckAgainstReference("choice_bk_b.tsv", 1e-6); }
TEST(ChoiceModel, ConditionalLogitMatchesScipyWithL2) { CheckAgainstReference("choice_bk_l2.tsv", 1e-6); }

ChoiceData RandomData(int n, int d, int bmin, int bmax, uint32_t seed, double scale = 1.0) {
  std::mt19937_64 gen(seed);
  std::uniform_real_distribution<double> u(-1.0, 1.0);
  ChoiceData data;
  data.dim = d;
  for (int i = 0; i < n; ++i) {
    const int b = bmin + static_cast<int>(gen() % static_cast<uint64_t>(bmax - bmin + 1));
    std::vector<double> rows(static_cast<size_t>(b * d));
    for (double& v : rows) v = scale * u(gen);
    data.Add(rows, static_cast<uint32_t>(gen() % static_cast<uint64_t>(b)));
  }
  return data;
}

// Central finite differences of the objective (definition of the derivative).
TEST(ChoiceModel, GradientAndHessianMatchFiniteDifferences) {
  const ChoiceData data = RandomData(60, 4, 2, 6, 7);
  const std::vector<double> w = {0.3, -0.7, 1.1, 0.05};
  for (double l2 : {0.0, 0.8}) {
    const ChoiceObjective at = EvaluateChoiceObjective(data, w, l2);
    const double h = 1e-5;
    for (size_t f = 0; f < w.size(); ++f) {
      std::vector<double> wp = w, wm = w;
      wp[f] += h;
      wm[f] -= h;
      const ChoiceObjective p = EvaluateChoiceObjective(data, wp, l2);
      const ChoiceObjective m = EvaluateChoiceObjective(data, wm, l2);
      const double fd = (p.value - m.value) / (2 * h);
      EXPECT_NEAR(at.gradient[f], fd, 1e-6 * std::max(1.0, std::fabs(fd))) << f;
      for (size_t g = 0; g < w.size(); ++g) {
        const double fdh = (p.gradient[g] - m.gradient[g]) / (2 * h);
        EXPECT_NEAR(at.hessian[f * w.size() + g], fdh, 1e-6 * std::max(1.0, std::fabs(fdh)))
            << f << "," << g;
      }
    }
  }
}

TEST(ChoiceModel, ObjectiveAtZeroIsSumLogB) {
  // At w = 0 every candidate has probability 1/B, so NLL = sum_i log B_i (definition).
  const ChoiceData data = RandomData(50, 3, 2, 5, 3);
  double want = 0.0;
  for (size_t i = 0; i < data.size(); ++i)
    want += std::log(static_cast<double>(data.offsets[i + 1] - data.offsets[i]));
  EXPECT_NEAR(EvaluateChoiceObjective(data, {0, 0, 0}, 0.0).value, want, 1e-12);
}

TEST(ChoiceModel, SeparableWithoutPenaltyIsReportedNotNaN) {
  // The chosen candidate always has the larger feature: completely separable.
  ChoiceData data;
  data.dim = 1;
  for (int i = 0; i < 20; ++i) data.Add({1.0 + i, 0.5 * i}, 0);
  Result<ChoiceFit> fit = FitChoiceModel(data, ChoiceFitOptions{});
  ASSERT_TRUE(fit.ok());
  EXPECT_FALSE(fit.value().converged);
  EXPECT_EQ(fit.value().outcome, ChoiceFitOutcome::kSeparated) << fit.value().message;
  EXPECT_TRUE(std::isfinite(fit.value().weights[0]));
  EXPECT_GT(fit.value().weights[0], 0.0);
  EXPECT_TRUE(fit.value().std_errors.empty());
  EXPECT_NE(fit.value().message.find("l2"), std::string::npos);
  // With a penalty the optimum is finite and found.
  ChoiceFitOptions opt;
  opt.l2 = 1.0;
  Result<ChoiceFit> pen = FitChoiceModel(data, opt);
  ASSERT_TRUE(pen.ok());
  EXPECT_TRUE(pen.value().converged) << pen.value().message;
  EXPECT_TRUE(std::isfinite(pen.value().weights[0]));
}

TEST(ChoiceModel, QuasiSeparationIsReported) {
  // Feature 0 separates the comparisons where it differs; feature 1 is noise.
  // Comparisons with equal feature 0 keep the problem from being complete.
  ChoiceData data;
  data.dim = 2;
  std::mt19937_64 gen(5);
  for (int i = 0; i < 40; ++i) {
    const double noise_a = static_cast<double>(gen() % 7), noise_b = static_cast<double>(gen() % 7);
    if (i % 2 == 0) {
      data.Add({2.0, noise_a, 1.0, noise_b}, 0);
    } else {
      data.Add({1.0, noise_a, 1.0, noise_b}, static_cast<uint32_t>(gen() % 2));
    }
  }
  Result<ChoiceFit> fit = FitChoiceModel(data, ChoiceFitOptions{});
  ASSERT_TRUE(fit.ok());
  EXPECT_FALSE(fit.value().converged);
  EXPECT_EQ(fit.value().outcome, ChoiceFitOutcome::kSeparated) << fit.value().message;
  for (double w : fit.value().weights) EXPECT_TRUE(std::isfinite(w));
}

TEST(ChoiceModel, HugeFeatureValuesStayFinite) {
  // Log-sum-exp stability: features around 1e6 (scores up to ~1e6) and an
  // offset of 1e12 that cancels within each comparison.
  ChoiceData data = RandomData(200, 2, 2, 4, 11, 1e6);
  for (size_t r = 0; r < data.features.size(); r += 2) data.features[r + 1] += 1e12;
  const ChoiceObjective at = EvaluateChoiceObjective(data, {1.0, -1.0}, 0.0);
  EXPECT_TRUE(std::isfinite(at.value));
  for (double g : at.gradient) EXPECT_TRUE(std::isfinite(g));
  for (double h : at.hessian) EXPECT_TRUE(std::isfinite(h));
  ChoiceFitOptions opt;
  opt.standardize = true;
  opt.l2 = 1e-3;
  Result<ChoiceFit> fit = FitChoiceModel(data, opt);
  ASSERT_TRUE(fit.ok());
  EXPECT_TRUE(fit.value().converged) << fit.value().message;
  for (double w : fit.value().weights) EXPECT_TRUE(std::isfinite(w));
  // Scaling the features by 1e-6 scales the unpenalised raw weights by 1e6:
  // check on random choices (not separable).
  const ChoiceData small = RandomData(300, 2, 2, 4, 12, 1.0);
  ChoiceData big = small;
  for (double& v : big.features) v *= 1e6;
  Result<ChoiceFit> a = FitChoiceModel(small, ChoiceFitOptions{});
  Result<ChoiceFit> b = FitChoiceModel(big, ChoiceFitOptions{});
  ASSERT_TRUE(a.ok() && b.ok());
  ASSERT_TRUE(a.value().converged && b.value().converged) << b.value().message;
  for (size_t k = 0; k < 2; ++k) {
    EXPECT_NEAR(b.value().weights[k] * 1e6, a.value().weights[k], 1e-8 * std::fabs(a.value().weights[k]) + 1e-12);
  }
}

TEST(ChoiceModel, ConstantFeatureIsNotIdentified) {
  ChoiceData data = RandomData(100, 2, 2, 3, 13);
  for (size_t r = 0; r < data.features.size(); r += 2) data.features[r + 1] = 4.0;  // constant
  Result<ChoiceFit> fit = FitChoiceModel(data, ChoiceFitOptions{});
  ASSERT_TRUE(fit.ok());
  EXPECT_EQ(fit.value().outcome, ChoiceFitOutcome::kNotIdentified) << fit.value().message;
  EXPECT_TRUE(std::isfinite(fit.value().weights[0]));
  EXPECT_EQ(fit.value().weights[1], 0.0);
  // With l2 > 0 it is identified (weight 0).
  ChoiceFitOptions opt;
  opt.l2 = 0.1;
  Result<ChoiceFit> pen = FitChoiceModel(data, opt);
  ASSERT_TRUE(pen.ok());
  EXPECT_TRUE(pen.value().converged);
  EXPECT_NEAR(pen.value().weights[1], 0.0, 1e-12);
}

TEST(ChoiceModel, InvalidInputIsAnError) {
  ChoiceData empty;
  empty.dim = 2;
  EXPECT_FALSE(FitChoiceModel(empty, {}).ok());
  ChoiceData one;
  one.dim = 1;
  one.Add({1.0}, 0);  // a single candidate
  EXPECT_FALSE(FitChoiceModel(one, {}).ok());
  ChoiceData bad_choice;
  bad_choice.dim = 1;
  bad_choice.Add({1.0, 2.0}, 2);
  EXPECT_FALSE(FitChoiceModel(bad_choice, {}).ok());
  ChoiceData nan_feature;
  nan_feature.dim = 1;
  nan_feature.Add({1.0, NAN}, 0);
  EXPECT_FALSE(FitChoiceModel(nan_feature, {}).ok());
  ChoiceData ok = RandomData(10, 1, 2, 2, 1);
  ChoiceFitOptions neg;
  neg.l2 = -1.0;
  EXPECT_FALSE(FitChoiceModel(ok, neg).ok());
}

TEST(ChoiceModel, AccuracyCountsTiesAsShare) {
  ChoiceData data;
  data.dim = 1;
  data.Add({1.0, 0.0}, 0);       // chosen has the top score: 1
  data.Add({0.0, 1.0}, 0);       // chosen lower: 0
  data.Add({1.0, 1.0, 0.0}, 1);  // chosen tied with one other at the top: 1/2
  EXPECT_NEAR(ChoiceAccuracy(data, {1.0}), 1.5 / 3.0, 1e-15);
  EXPECT_NEAR(ChoiceAccuracy(data, {0.0}), (0.5 + 0.5 + 1.0 / 3.0) / 3.0, 1e-15);
}

TEST(ChoiceModel, CrossValidationIsDeterministicAndGrouped) {
  // Choices follow w = (1.5, -1) with noise, so held-out accuracy is well above chance.
  std::mt19937_64 gen(21);
  std::uniform_real_distribution<double> u(-1.0, 1.0);
  ChoiceData data;
  data.dim = 2;
  for (int i = 0; i < 300; ++i) {
    std::vector<double> rows = {u(gen), u(gen), u(gen), u(gen)};
    const double s0 = 1.5 * rows[0] - rows[1], s1 = 1.5 * rows[2] - rows[3];
    const double p0 = 1.0 / (1.0 + std::exp(s1 - s0));
    data.Add(rows, std::uniform_real_distribution<double>(0, 1)(gen) < p0 ? 0 : 1);
    data.group.push_back(static_cast<uint64_t>(i / 3));  // 3 comparisons per prompt
  }
  Result<CrossValidation> a = CrossValidatedAccuracy(data, {}, 5, 42);
  Result<CrossValidation> b = CrossValidatedAccuracy(data, {}, 5, 42);
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_EQ(a.value().accuracy, b.value().accuracy);
  EXPECT_EQ(a.value().fold_size, b.value().fold_size);
  EXPECT_GT(a.value().accuracy, 0.6);
  size_t total = 0;
  for (size_t s : a.value().fold_size) {
    EXPECT_EQ(s % 3, 0u);  // whole groups per fold
    total += s;
  }
  EXPECT_EQ(total, data.size());
  EXPECT_EQ(a.value().fold_size.size(), 5u);
  EXPECT_FALSE(CrossValidatedAccuracy(data, {}, 1, 42).ok());
  EXPECT_FALSE(CrossValidatedAccuracy(data, {}, 101, 42).ok());  // 100 groups
}

TEST(ChoiceModel, FitsRunTogetherEqualFitsRunAlone) {
  // CrossValidateAndFit runs the folds' fits and the whole fit at once; each
  // must be bit for bit what CrossValidatedAccuracy and FitChoiceModel give.
  std::mt19937_64 gen(7);
  std::uniform_real_distribution<double> u(-2.0, 2.0);
  ChoiceData data;
  data.dim = 3;
  for (int i = 0; i < 600; ++i) {
    const int b = 2 + i % 2;
    std::vector<double> rows;
    for (int k = 0; k < 3 * b; ++k) rows.push_back(k % 3 == 2 ? std::floor(u(gen)) : u(gen) * 10);
    data.Add(rows, static_cast<uint32_t>(gen() % static_cast<uint64_t>(b)));
    data.group.push_back(static_cast<uint64_t>(i / 2));
  }
  for (bool standardize : {false, true}) {
    ChoiceFitOptions o;
    o.standardize = standardize;
    o.l2 = 0.5;
    Result<CrossValidation> cv = CrossValidatedAccuracy(data, o, 5, 3);
    Result<ChoiceFit> fit = FitChoiceModel(data, o);
    ASSERT_TRUE(cv.ok() && fit.ok());
    for (unsigned threads : {1u, 2u, 3u}) {
      CrossValidatedFit both = CrossValidateAndFit(data, o, 5, 3, threads);
      ASSERT_TRUE(both.cv.ok() && both.fit.ok());
      EXPECT_EQ(both.cv.value().accuracy, cv.value().accuracy);
      EXPECT_EQ(both.cv.value().fold_accuracy, cv.value().fold_accuracy);
      EXPECT_EQ(both.cv.value().fold_size, cv.value().fold_size);
      EXPECT_EQ(both.fit.value().weights, fit.value().weights);
      EXPECT_EQ(both.fit.value().std_errors, fit.value().std_errors);
      EXPECT_EQ(both.fit.value().iterations, fit.value().iterations);
    }
  }
  // Errors stay apart: too many folds fails the cross-validation only.
  CrossValidatedFit bad = CrossValidateAndFit(data, {}, 1000, 3, 2);
  EXPECT_FALSE(bad.cv.ok());
  EXPECT_TRUE(bad.fit.ok());
}

}  // namespace
}  // namespace prefsift::stats
