// Prints timings of the statistics module on synthetic data (not a test).
// Run: build-stats/bench/stats/stats_bench
#include <chrono>
#include <cstdio>
#include <random>
#include <string>

#include "stats/choice_model.h"
#include "stats/hypothesis_tests.h"
#include "stats/rank_correlation.h"
#include "stats/surface_features.h"

namespace {

double Seconds(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

prefsift::stats::ChoiceData Synthetic(int n, int d, int b, uint64_t seed) {
  std::mt19937_64 gen(seed);
  std::normal_distribution<double> normal(0.0, 1.0);
  std::uniform_real_distribution<double> unif(0.0, 1.0);
  prefsift::stats::ChoiceData data;
  data.dim = d;
  std::vector<double> rows(static_cast<size_t>(b * d)), score(static_cast<size_t>(b));
  for (int i = 0; i < n; ++i) {
    double total = 0.0;
    for (int j = 0; j < b; ++j) {
      double s = 0.0;
      for (int f = 0; f < d; ++f) {
        rows[static_cast<size_t>(j * d + f)] = normal(gen);
        s += (f % 2 ? -0.5 : 0.8) * rows[static_cast<size_t>(j * d + f)];
      }
      score[static_cast<size_t>(j)] = std::exp(s);
      total += score[static_cast<size_t>(j)];
    }
    double u = unif(gen) * total;
    uint32_t c = 0;
    while (c + 1 < static_cast<uint32_t>(b) && u > score[c]) u -= score[c++];
    data.Add(rows, c);
    data.group.push_back(static_cast<uint64_t>(i / 4));
  }
  return data;
}

}  // namespace

int main() {
  using prefsift::stats::ChoiceFitOptions;
  for (int b : {2, 4}) {
    const auto data = Synthetic(100000, 8, b, 7);
    auto start = std::chrono::steady_clock::now();
    auto fit = prefsift::stats::FitChoiceModel(data, ChoiceFitOptions{});
    const double t = Seconds(start);
    std::printf("choice fit: N=100000 B=%d d=8: %.3f s, %d Newton iterations, converged=%d\n", b, t,
                fit.value().iterations, fit.value().converged ? 1 : 0);
  }
  {
    const auto data = Synthetic(20000, 8, 2, 8);
    auto start = std::chrono::steady_clock::now();
    auto cv = prefsift::stats::CrossValidatedAccuracy(data, ChoiceFitOptions{}, 5, 1);
    std::printf("5-fold CV: N=20000 B=2 d=8: %.3f s, accuracy %.4f\n", Seconds(start),
                cv.value().accuracy);
  }
  {
    auto start = std::chrono::steady_clock::now();
    double p = prefsift::stats::BinomTestTwoSided(50010000, 100000000, 0.5);
    std::printf("binomial test n=1e8: %.4f ms (p=%.6g)\n", Seconds(start) * 1e3, p);
    start = std::chrono::steady_clock::now();
    p = prefsift::stats::BinomTestTwoSided(5500, 10000, 0.5);
    std::printf("binomial test n=1e4: %.4f ms (p=%.6g)\n", Seconds(start) * 1e3, p);
  }
  {
    std::mt19937_64 gen(3);
    std::vector<double> x(1000000), y(1000000);
    for (size_t i = 0; i < x.size(); ++i) {
      x[i] = static_cast<double>(gen() % 1000);
      y[i] = x[i] + static_cast<double>(gen() % 500);
    }
    auto start = std::chrono::steady_clock::now();
    auto s = prefsift::stats::SpearmanRank(x, y);
    std::printf("Spearman n=1e6 (ties): %.3f s (rho=%.4f)\n", Seconds(start), s.rho);
    x.resize(10000);
    y.resize(10000);
    start = std::chrono::steady_clock::now();
    double tau = prefsift::stats::KendallTauB(x, y);
    std::printf("Kendall tau-b n=1e4 (O(n^2)): %.3f s (tau=%.4f)\n", Seconds(start), tau);
  }
  {
    std::string text;
    for (int i = 0; i < 20000; ++i) {
      text += "## Heading\n\nSome words here, see www.example.com and caf\xC3\xA9.\n- item one\n- item two\n\n";
    }
    auto start = std::chrono::steady_clock::now();
    auto f = prefsift::stats::ComputeSurfaceFeatures(text);
    const double t = Seconds(start);
    std::printf("surface features: %.1f MB/s (%zu bytes, %llu words)\n", text.size() / t / 1e6,
                text.size(), static_cast<unsigned long long>(f.words));
  }
}
