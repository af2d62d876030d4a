#include "stages/bias_common.h"

#include <xxhash.h>

#include "stats/multiple_testing.h"

namespace prefsift::bias {

const char* CorrectionName(Correction c) {
  return c == Correction::kHolm ? "holm" : "benjamini-hochberg";
}

std::vector<double> AdjustFamily(const std::vector<double>& p, Correction c) {
  if (p.empty()) return {};
  return c == Correction::kHolm ? stats::HolmAdjust(p) : stats::BenjaminiHochbergAdjust(p);
}

uint64_t SeededHash(uint64_t seed, std::string_view purpose, std::string_view id) {
  std::string bytes;
  bytes.reserve(9 + purpose.size() + id.size());
  for (int i = 0; i < 8; ++i) bytes.push_back(static_cast<char>((seed >> (8 * i)) & 0xFF));
  bytes.append(purpose);
  bytes.push_back('\0');
  bytes.append(id);
  return XXH3_64bits(bytes.data(), bytes.size());
}

uint64_t SplitMix64(uint64_t* state) {
  uint64_t z = (*state += 0x9E3779B97F4A7C15ULL);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
  return z ^ (z >> 31);
}

uint64_t UniformBelow(uint64_t* state, uint64_t bound) {
  if (bound <= 1) return 0;
  const uint64_t limit = UINT64_MAX - UINT64_MAX % bound;
  uint64_t r;
  do {
    r = SplitMix64(state);
  } while (r >= limit);
  return r % bound;
}

}  // namespace prefsift::bias
