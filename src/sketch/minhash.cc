// One-permutation MinHash with optimal densification; see minhash.h.
#include "sketch/minhash.h"

#include <algorithm>
#include <bit>
#include <limits>
#include <thread>

#include "sketch/mix.h"

namespace prefsift::sketch {
namespace {

constexpr uint64_t kEmpty = std::numeric_limits<uint64_t>::max();
constexpr uint64_t kProbeSeedTweak = 0x5851f42d4c957f2dULL;

// floor(x * k / 2^64): maps a uniform 64-bit word to [0, k) by its high bits.
__extension__ typedef unsigned __int128 Uint128;
inline uint32_t Bin(uint64_t x, uint32_t k) {
  return static_cast<uint32_t>((static_cast<Uint128>(x) * k) >> 64);
}

// Bin probed by empty bin i at attempt (1-based).
inline uint32_t ProbeBin(uint64_t probe_seed, uint32_t i, uint64_t attempt, uint32_t k) {
  return Bin(Mix(probe_seed ^ ((static_cast<uint64_t>(i) << 32) | attempt)), k);
}

constexpr uint32_t kCachedProbes = 16;
constexpr uint32_t kSelectProbes = 8;
constexpr uint32_t kNoBin = 0xffffffffu;

struct ProbeTable {
  uint64_t seed = 0;
  uint32_t k = 0;
  uint64_t probe_seed = 0;
  std::vector<uint32_t> first;  // k * kCachedProbes
};

const ProbeTable& Probes(uint64_t seed, uint32_t k) {
  thread_local ProbeTable table;
  if (table.k != k || table.seed != seed) {
    table.seed = seed;
    table.k = k;
    table.probe_seed = Mix(seed ^ kProbeSeedTweak);
    table.first.resize(static_cast<size_t>(k) * kCachedProbes);
    for (uint32_t i = 0; i < k; ++i) {
      for (uint32_t a = 0; a < kCachedProbes; ++a) {
        table.first[static_cast<size_t>(i) * kCachedProbes + a] =
            ProbeBin(table.probe_seed, i, a + 1, k);
      }
    }
  }
  return table;
}

}  // namespace

void Sign(std::span<const uint64_t> shingles, const MinHashParams& params,
          std::span<uint64_t> out) {
  const uint32_t k = params.num_slots;
  std::fill(out.begin(), out.end(), kEmpty);
  const uint64_t seed_mix = Mix(params.seed);
  // Branch-free bin minimum. x == kEmpty (probability 2^-64) is moved one
  // below so that kEmpty can mark an empty bin.
  for (uint64_t h : shingles) {
    uint64_t x = Mix(h ^ seed_mix);
    x -= static_cast<uint64_t>(x == kEmpty);
    const uint32_t bin = Bin(x, k);
    out[bin] = std::min(out[bin], x);
  }
  thread_local std::vector<uint8_t> filled;
  thread_local std::vector<uint32_t> empty;
  filled.resize(k);
  empty.resize(k);
  uint32_t num_empty = 0;
  for (uint32_t i = 0; i < k; ++i) {
    const bool is_empty = out[i] == kEmpty;
    filled[i] = static_cast<uint8_t>(!is_empty);
    empty[num_empty] = i;
    num_empty += static_cast<uint32_t>(is_empty);
  }
  if (num_empty == 0 || num_empty == k) return;
  // Optimal densification: empty bin i probes bins j = h_i(1), h_i(2), ...
  // (a seeded hash of (i, attempt)) and copies the first non-empty one. The
  // first kCachedProbes probes of every bin depend only on (seed, K), so they
  // are computed once per thread and reused; the first kSelectProbes of them
  // are checked without branches (the first filled one wins).
  const ProbeTable& table = Probes(params.seed, k);
  const uint8_t* is_filled = filled.data();
  for (uint32_t e = 0; e < num_empty; ++e) {
    const uint32_t i = empty[e];
    const uint32_t* cached = &table.first[static_cast<size_t>(i) * kCachedProbes];
    // Gather the filled flags of the first 8 probes into a byte (independent
    // loads), then the lowest set bit is the first filled probe.
    const uint32_t mask = static_cast<uint32_t>(is_filled[cached[0]]) |
                          static_cast<uint32_t>(is_filled[cached[1]]) << 1 |
                          static_cast<uint32_t>(is_filled[cached[2]]) << 2 |
                          static_cast<uint32_t>(is_filled[cached[3]]) << 3 |
                          static_cast<uint32_t>(is_filled[cached[4]]) << 4 |
                          static_cast<uint32_t>(is_filled[cached[5]]) << 5 |
                          static_cast<uint32_t>(is_filled[cached[6]]) << 6 |
                          static_cast<uint32_t>(is_filled[cached[7]]) << 7;
    uint32_t j = mask != 0 ? cached[std::countr_zero(mask)] : kNoBin;
    if (j == kNoBin) {
      for (uint32_t a = kSelectProbes; a < kCachedProbes && j == kNoBin; ++a) {
        if (is_filled[cached[a]]) j = cached[a];
      }
      for (uint64_t attempt = kCachedProbes + 1; j == kNoBin; ++attempt) {
        const uint32_t probe = ProbeBin(table.probe_seed, i, attempt, k);
        if (is_filled[probe]) j = probe;
      }
    }
    out[i] = out[j];
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

void SignTextsCompact(std::span<const std::string_view> texts,
                      const ShingleOptions& shingle_options, const MinHashParams& params,
                      uint32_t threads, std::span<uint8_t> out) {
  const size_t n = texts.size();
  const size_t k = params.num_slots;
  auto work = [&](size_t begin, size_t end) {
    for (size_t i = begin; i < end; ++i) {
      SignTextCompact(texts[i], shingle_options, params, out.subspan(i * k, k));
    }
  };
  threads = std::max<uint32_t>(threads, 1);
  if (threads == 1 || n < 2 * static_cast<size_t>(threads)) {
    work(0, n);
    return;
  }
  std::vector<std::thread> pool;
  const size_t chunk = (n + threads - 1) / threads;
  for (uint32_t t = 0; t < threads; ++t) {
    const size_t begin = std::min(n, t * chunk);
    pool.emplace_back(work, begin, std::min(n, begin + chunk));
  }
  for (auto& th : pool) th.join();
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
