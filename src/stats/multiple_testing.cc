// Holm and Benjamini-Hochberg adjusted p-values; see multiple_testing.h.
// Pure, thread-safe.
#include "stats/multiple_testing.h"

#include <algorithm>
#include <cstddef>
#include <numeric>

namespace prefsift::stats {
namespace {

// Indices that sort p ascending; ties keep input order (the adjusted values
// of tied p come out equal either way).
std::vector<size_t> AscendingOrder(const std::vector<double>& p) {
  std::vector<size_t> order(p.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(), [&](size_t a, size_t b) { return p[a] < p[b]; });
  return order;
}

}  // namespace

std::vector<double> HolmAdjust(const std::vector<double>& p) {
  const size_t m = p.size();
  std::vector<double> adj(m);
  const std::vector<size_t> order = AscendingOrder(p);
  double running_max = 0.0;
  for (size_t i = 0; i < m; ++i) {
    const double v = std::min(1.0, static_cast<double>(m - i) * p[order[i]]);
    running_max = std::max(running_max, v);
    adj[order[i]] = running_max;
  }
  return adj;
}

std::vector<double> BenjaminiHochbergAdjust(const std::vector<double>& p) {
  const size_t m = p.size();
  std::vector<double> adj(m);
  const std::vector<size_t> order = AscendingOrder(p);
  double running_min = 1.0;
  for (size_t i = m; i-- > 0;) {
    const double v = std::min(1.0, static_cast<double>(m) * p[order[i]] /
                                       static_cast<double>(i + 1));
    running_min = std::min(running_min, v);
    adj[order[i]] = running_min;
  }
  return adj;
}

}  // namespace prefsift::stats
