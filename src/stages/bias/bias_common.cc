#include "stages/bias/bias_common.h"

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


}  // namespace prefsift::bias
