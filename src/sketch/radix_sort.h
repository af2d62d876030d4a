// In-place sort of 64-bit words (MSD radix sort, "American flag sort"): the
// same order as std::sort, no scratch array, faster on the large arrays of
// packed keys that LSH banding and key sketches sort.
// Thread-safety: pure function.
#pragma once

#include <cstdint>
#include <span>

namespace prefsift::sketch {

void SortWords(std::span<uint64_t> words);

}  // namespace prefsift::sketch
