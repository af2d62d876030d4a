#include "stats/agreement.h"

#include "core/random.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <unordered_map>

namespace prefsift::stats {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

uint64_t Below(uint64_t* s, uint64_t bound) { return UniformBelow(s, bound); }

// Per unit: the diagonal sum of its coincidences (sum_c n_uc (n_uc - 1) / (m_u - 1))
// and its per-category value counts, accumulated into `nc`.
struct Tally {
  double diagonal = 0.0;  // sum_c o_cc
  double n = 0.0;
  std::vector<double> nc;  // by category
  uint64_t units = 0;

  void Add(const Unit& u, std::vector<uint32_t>* scratch) {
    if (u.size() < 2) return;
    scratch->assign(u.begin(), u.end());
    std::sort(scratch->begin(), scratch->end());
    const double m = static_cast<double>(u.size());
    for (size_t i = 0; i < scratch->size();) {
      size_t j = i;
      while (j < scratch->size() && (*scratch)[j] == (*scratch)[i]) ++j;
      const double c = static_cast<double>(j - i);
      diagonal += c * (c - 1.0) / (m - 1.0);
      const uint32_t cat = (*scratch)[i];
      if (cat >= nc.size()) nc.resize(cat + 1, 0.0);
      nc[cat] += c;
      i = j;
    }
    n += m;
    ++units;
  }

  AlphaResult Result() const {
    AlphaResult r;
    r.units = units;
    r.values = static_cast<uint64_t>(n);
    if (n < 2) {
      r.alpha = kNaN;
      return r;
    }
    double sum_sq = 0.0;
    for (double c : nc) sum_sq += c * c;
    const double off_observed = n - diagonal;    // sum_{c != k} o_ck
    const double off_expected = n * n - sum_sq;  // sum_{c != k} n_c n_k
    r.observed_disagreement = off_observed / n;
    r.expected_disagreement = off_expected / (n * (n - 1.0));
    r.alpha = off_expected > 0 ? 1.0 - (n - 1.0) * off_observed / off_expected : kNaN;
    return r;
  }
};

}  // namespace

AlphaResult KrippendorffAlphaNominal(const std::vector<Unit>& units) {
  Tally t;
  std::vector<uint32_t> scratch;
  for (const Unit& u : units) t.Add(u, &scratch);
  return t.Result();
}

Interval AlphaBootstrapInterval(const std::vector<Unit>& units, uint32_t replicates, uint64_t seed, double level) {
  Interval out{kNaN, kNaN, 0};
  std::vector<const Unit*> pairable;
  for (const Unit& u : units) {
    if (u.size() >= 2) pairable.push_back(&u);
  }
  if (pairable.empty() || replicates == 0 || !(level > 0 && level < 1)) return out;
  std::vector<double> alphas;
  alphas.reserve(replicates);
  uint64_t state = seed;
  std::vector<uint32_t> scratch;
  for (uint32_t r = 0; r < replicates; ++r) {
    Tally t;
    for (size_t i = 0; i < pairable.size(); ++i) t.Add(*pairable[Below(&state, pairable.size())], &scratch);
    double a = t.Result().alpha;
    if (!std::isnan(a)) alphas.push_back(a);
  }
  out.replicates = static_cast<uint32_t>(alphas.size());
  if (alphas.empty()) return out;
  std::sort(alphas.begin(), alphas.end());
  auto quantile = [&](double q) {
    const double pos = q * static_cast<double>(alphas.size() - 1);
    const size_t lo = static_cast<size_t>(std::floor(pos));
    const size_t hi = std::min(lo + 1, alphas.size() - 1);
    const double f = pos - static_cast<double>(lo);
    return alphas[lo] + f * (alphas[hi] - alphas[lo]);
  };
  out.lo = quantile((1.0 - level) / 2.0);
  out.hi = quantile((1.0 + level) / 2.0);
  return out;
}

double FleissKappa(const std::vector<std::vector<uint64_t>>& counts) {
  if (counts.empty()) return kNaN;
  uint64_t r = 0;
  size_t k = 0;
  for (const auto& row : counts) {
    uint64_t s = 0;
    for (uint64_t c : row) s += c;
    if (&row == &counts.front()) r = s;
    if (s != r) return kNaN;
    k = std::max(k, row.size());
  }
  if (r < 2) return kNaN;
  const double N = static_cast<double>(counts.size()), R = static_cast<double>(r);
  std::vector<double> pj(k, 0.0);
  double pbar = 0.0;
  for (const auto& row : counts) {
    double agree = 0.0;
    for (size_t j = 0; j < row.size(); ++j) {
      const double c = static_cast<double>(row[j]);
      pj[j] += c;
      agree += c * (c - 1.0);
    }
    pbar += agree / (R * (R - 1.0));
  }
  pbar /= N;
  double pe = 0.0;
  for (double& p : pj) {
    p /= N * R;
    pe += p * p;
  }
  if (pe >= 1.0) return kNaN;
  return (pbar - pe) / (1.0 - pe);
}

}  // namespace prefsift::stats
