// In-place radix sort of 64-bit words; see radix_sort.h.
#include "sketch/radix_sort.h"

#include <algorithm>
#include <array>
#include <utility>

namespace prefsift::sketch {
namespace {

// Partition by the byte at `shift`, then recurse into each bucket on the next
// byte; small buckets go to std::sort. Same result as std::sort of the range.
void RadixSortBytes(uint64_t* data, size_t n, int shift) {
  if (n <= 64 || shift < 0) {
    std::sort(data, data + n);
    return;
  }
  std::array<size_t, 257> start{};
  for (size_t i = 0; i < n; ++i) ++start[((data[i] >> shift) & 0xff) + 1];
  for (int b = 0; b < 256; ++b) start[b + 1] += start[b];
  std::array<size_t, 256> next;
  std::copy(start.begin(), start.begin() + 256, next.begin());
  for (int b = 0; b < 256; ++b) {
    const size_t end = start[b + 1];
    while (next[b] < end) {
      uint64_t x = data[next[b]];
      auto dest = static_cast<int>((x >> shift) & 0xff);
      while (dest != b) {  // cycle x to its bucket, bringing back the displaced word
        std::swap(x, data[next[dest]++]);
        dest = static_cast<int>((x >> shift) & 0xff);
      }
      data[next[b]++] = x;
    }
  }
  for (int b = 0; b < 256; ++b) {
    RadixSortBytes(data + start[b], start[b + 1] - start[b], shift - 8);
  }
}

}  // namespace

void SortWords(std::span<uint64_t> words) { RadixSortBytes(words.data(), words.size(), 56); }

}  // namespace prefsift::sketch
