// One-permutation MinHash with optimal densification; see minhash.h.
#include "sketch/minhash.h"

#include <algorithm>
#include <limits>

namespace prefsift::sketch {
namespace {

constexpr uint64_t kEmpty = std::numeric_limits<uint64_t>::max();
constexpr uint64_t kProbeSeedTweak = 0x5851f42d4c957f2dULL;

// Murmur3 64-bit finaliser (a bijection on 64-bit words with full avalanche).
inline uint64_t Mix(uint64_t x) {
  x ^= x >> 33;
  x *= 0xff51afd7ed558ccdULL;
  x ^= x >> 33;
  x *= 0xc4ceb9fe1a85ec53ULL;
  x ^= x >> 33;
  return x;
}

// floor(x * k / 2^64): maps a uniform 64-bit word to [0, k) by its high bits.
__extension__ typedef unsigned __int128 Uint128;
inline uint32_t Bin(uint64_t x, uint32_t k) {
  return static_cast<uint32_t>((static_cast<Uint128>(x) * k) >> 64);
}

}  // namespace

void Sign(std::span<const uint64_t> shingles, const MinHashParams& params,
          std::span<uint64_t> out) {
  const uint32_t k = params.num_slots;
  thread_local std::vector<uint8_t> filled;
  filled.assign(k, 0);
  std::fill(out.begin(), out.end(), kEmpty);
  const uint64_t seed_mix = Mix(params.seed);
  uint32_t num_filled = 0;
  for (uint64_t h : shingles) {
    const uint64_t x = Mix(h ^ seed_mix);
    const uint32_t bin = Bin(x, k);
    if (!filled[bin]) {
      filled[bin] = 1;
      ++num_filled;
      out[bin] = x;
    } else if (x < out[bin]) {
      out[bin] = x;
    }
  }
  if (num_filled == 0 || num_filled == k) return;
  // Optimal densification: empty bin i probes bins j = h_i(1), h_i(2), ...
  // (a seeded hash of (i, attempt)) and copies the first non-empty one.
  const uint64_t probe_seed = Mix(params.seed ^ kProbeSeedTweak);
  for (uint32_t i = 0; i < k; ++i) {
    if (filled[i]) continue;
    for (uint64_t attempt = 1;; ++attempt) {
      const uint32_t j = Bin(Mix(probe_seed ^ ((static_cast<uint64_t>(i) << 32) | attempt)), k);
      if (filled[j]) {
        out[i] = out[j];
        break;
      }
    }
  }
}

std::vector<uint64_t> Sign(std::span<const uint64_t> shingles, const MinHashParams& params) {
  std::vector<uint64_t> out(params.num_slots);
  Sign(shingles, params, out);
  return out;
}

void Compact(std::span<const uint64_t> signature, std::span<uint8_t> out) {
  for (size_t i = 0; i < signature.size(); ++i) out[i] = static_cast<uint8_t>(signature[i]);
}

void SignTextCompact(std::string_view text, const ShingleOptions& shingle_options,
                     const MinHashParams& params, std::span<uint8_t> out) {
  thread_local std::vector<uint64_t> shingles;
  thread_local std::vector<uint64_t> full;
  shingles.clear();
  AppendShingles(text, shingle_options, &shingles);
  full.resize(params.num_slots);
  Sign(shingles, params, full);
  Compact(full, out);
}

double EstimateJaccard(std::span<const uint64_t> a, std::span<const uint64_t> b) {
  size_t equal = 0;
  for (size_t i = 0; i < a.size(); ++i) equal += (a[i] == b[i]);
  return static_cast<double>(equal) / static_cast<double>(a.size());
}

uint32_t CountEqualSlots(std::span<const uint8_t> a, std::span<const uint8_t> b) {
  uint32_t equal = 0;
  const uint8_t* pa = a.data();
  const uint8_t* pb = b.data();
  for (size_t i = 0; i < a.size(); ++i) equal += static_cast<uint32_t>(pa[i] == pb[i]);
  return equal;
}

double CompactMatchesToJaccard(uint32_t equal_slots, uint32_t num_slots) {
  constexpr double kChance = 1.0 / 256.0;
  const double p = static_cast<double>(equal_slots) / static_cast<double>(num_slots);
  const double j = (p - kChance) / (1.0 - kChance);
  return std::clamp(j, 0.0, 1.0);
}

double EstimateJaccardCompact(std::span<const uint8_t> a, std::span<const uint8_t> b) {
  return CompactMatchesToJaccard(CountEqualSlots(a, b), static_cast<uint32_t>(a.size()));
}

}  // namespace prefsift::sketch
