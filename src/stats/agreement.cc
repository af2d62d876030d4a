#include "stats/agreement.h"

#include "core/random.h"
#include "core/thread_pool.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <utility>
#include <vector>
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

  // What Add does for a unit, from its runs of equal values computed once
  // (UnitRuns): the same additions in the same order, so the sums are bit for
  // bit those of Add.
  void AddRuns(const std::pair<uint32_t, double>* begin, const std::pair<uint32_t, double>* end, double m) {
    for (const auto* r = begin; r != end; ++r) {
      const double c = r->second;
      diagonal += c * (c - 1.0) / (m - 1.0);
      if (r->first >= nc.size()) nc.resize(r->first + 1, 0.0);
      nc[r->first] += c;
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

Interval AlphaBootstrapInterval(const std::vector<Unit>& units, uint32_t replicates, uint64_t seed, double level,
                                unsigned threads) {
  Interval out{kNaN, kNaN, 0};
  std::vector<const Unit*> pairable;
  for (const Unit& u : units) {
    if (u.size() >= 2) pairable.push_back(&u);
  }
  if (pairable.empty() || replicates == 0 || !(level > 0 && level < 1)) return out;
  // Each pairable unit's runs (value, count) in sorted value order, once.
  std::vector<std::pair<uint32_t, double>> runs;
  std::vector<size_t> run_start{0};
  {
    std::vector<uint32_t> sorted;
    for (const Unit* u : pairable) {
      sorted.assign(u->begin(), u->end());
      std::sort(sorted.begin(), sorted.end());
      for (size_t i = 0; i < sorted.size();) {
        size_t j = i;
        while (j < sorted.size() && sorted[j] == sorted[i]) ++j;
        runs.emplace_back(sorted[i], static_cast<double>(j - i));
        i = j;
      }
      run_start.push_back(runs.size());
    }
  }
  // The stream's state at the start of each replicate (the draws are cheap
  // next to the tallies), then the replicates side by side, each from its own
  // state: the same draws as one after the other.
  const uint64_t p = pairable.size();
  std::vector<uint64_t> start(replicates);
  uint64_t state = seed;
  for (uint32_t r = 0; r < replicates; ++r) {
    start[r] = state;
    for (uint64_t i = 0; i < p; ++i) Below(&state, p);
  }
  std::vector<double> alpha_of(replicates);
  ThreadPool pool(threads);
  pool.ParallelFor(replicates, [&](size_t r, unsigned) {
    uint64_t s = start[r];
    Tally t;
    for (uint64_t i = 0; i < p; ++i) {
      const size_t u = static_cast<size_t>(Below(&s, p));
      t.AddRuns(runs.data() + run_start[u], runs.data() + run_start[u + 1], static_cast<double>(pairable[u]->size()));
    }
    alpha_of[r] = t.Result().alpha;
  });
  std::vector<double> alphas;
  alphas.reserve(replicates);
  for (double a : alpha_of) {
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
