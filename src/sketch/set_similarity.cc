// Exact Jaccard and containment; see set_similarity.h.
#include "sketch/set_similarity.h"

namespace prefsift::sketch {

uint64_t IntersectionSize(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  uint64_t common = 0;
  size_t i = 0;
  size_t j = 0;
  while (i < a.size() && j < b.size()) {
    if (a[i] < b[j]) {
      ++i;
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
