// Exact Jaccard and containment; see set_similarity.h.
#include "sketch/set_similarity.h"

namespace prefsift::sketch {

uint64_t IntersectionIfAtLeast(std::span<const uint64_t> a, std::span<const uint64_t> b, size_t need) {
  const size_t may_miss = a.size() - need;
  size_t missed = 0, i = 0, j = 0;
  uint64_t common = 0;
  while (i < a.size() && j < b.size()) {
    if (a[i] < b[j]) {
      ++i;
      if (++missed > may_miss) return common;
    } else if (b[j] < a[i]) {
      ++j;
    } else {
      ++common;
      ++i;
      ++j;
    }
  }
  return common;
}

uint64_t IntersectionSize(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  return IntersectionIfAtLeast(a, b, 0);
}

double ExactJaccard(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  if (a.empty() && b.empty()) return 1.0;
  const uint64_t common = IntersectionSize(a, b);
  return static_cast<double>(common) / static_cast<double>(a.size() + b.size() - common);
}

double Containment(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  if (a.empty()) return 0.0;
  return static_cast<double>(IntersectionSize(a, b)) / static_cast<double>(a.size());
}

}  // namespace prefsift::sketch
