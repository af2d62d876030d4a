// MinHash signatures by one-permutation hashing with optimal densification.
//
// Construction (Shrivastava 2017, "Optimal Densification for Fast and
// Accurate Minwise Hashing", ICML, arXiv:1703.04664): each shingle hash is
// mixed with the seed into x (a 64-bit bijection, so distinct shingles stay
// distinct), x picks one of K bins by its high bits (multiply-shift) and the
// bin keeps the smallest x. A bin left empty copies the value of the first
// non-empty bin met along its own seeded probe sequence. The paper shows each
// slot then collides for two sets with probability equal to their Jaccard
// similarity, like K independent minwise permutations (Broder 1997), at
// O(d + K) cost instead of O(d K).
//
// Compact signatures keep the low 8 bits of each slot (b-bit minwise hashing,
// Li & Koenig 2010). Two unequal 64-bit slots agree in their low 8 bits with
// probability 1/256, so the share of equal bytes p estimates J by
// (p - 1/256) / (1 - 1/256). This is what the clusterer stores: K bytes per
// record.
//
// Thread-safety: all functions are pure (scratch space is thread_local) and
// may be called concurrently.
#pragma once

#include <cstdint>
#include <span>
#include <string_view>
#include <vector>

#include "sketch/shingles.h"

namespace prefsift::sketch {

struct MinHashParams {
  // Number of slots K. 256 compact slots = 256 bytes a record; see docs.
  uint32_t num_slots = 256;
  uint64_t seed = 0x6d696e68617368ULL;  // "minhash"
};

// Full 64-bit signature of a multiset of shingle hashes (order and repeats do
// not matter). An empty input gives all slots equal to UINT64_MAX.
// REQUIRES: out.size() == params.num_slots >= 1.
void Sign(std::span<const uint64_t> shingles, const MinHashParams& params,
          std::span<uint64_t> out);
std::vector<uint64_t> Sign(std::span<const uint64_t> shingles, const MinHashParams& params);

// Compact(Sign(...)) in one call, without the full signature's copies into
// empty bins. REQUIRES: out.size() == params.num_slots >= 1.
void SignCompact(std::span<const uint64_t> shingles, const MinHashParams& params,
                 std::span<uint8_t> out);

// The plain loops Sign is checked against: each empty bin's probes are
// hashed afresh, one at a time (no cached probes, no wide path).
void SignReference(std::span<const uint64_t> shingles, const MinHashParams& params,
                   std::span<uint64_t> out);

// Low 8 bits of each slot. REQUIRES: out.size() == signature.size().
void Compact(std::span<const uint64_t> signature, std::span<uint8_t> out);

// Shingles `text` and writes its compact signature: the hot path, no set is
// built. REQUIRES: out.size() == params.num_slots; shingle options valid.
void SignTextCompact(std::string_view text, const ShingleOptions& shingle_options,
                     const MinHashParams& params, std::span<uint8_t> out);

// SignTextCompact for many texts, split into contiguous chunks over up to
// `threads` std::threads; record i goes to out[i*K, (i+1)*K). The output does
// not depend on the thread count. REQUIRES: out.size() == texts.size() * K.
void SignTextsCompact(std::span<const std::string_view> texts,
                      const ShingleOptions& shingle_options, const MinHashParams& params,
                      uint32_t threads, std::span<uint8_t> out);

// Share of equal slots: unbiased estimate of Jaccard similarity.
// REQUIRES: a.size() == b.size() >= 1.
double EstimateJaccard(std::span<const uint64_t> a, std::span<const uint64_t> b);

// Number of equal bytes of two compact signatures. REQUIRES: equal sizes.
uint32_t CountEqualSlots(std::span<const uint8_t> a, std::span<const uint8_t> b);

// Jaccard estimate from compact signatures, corrected for the 1/256 chance
// agreement and clamped to [0, 1]. REQUIRES: a.size() == b.size() >= 1.
double EstimateJaccardCompact(std::span<const uint8_t> a, std::span<const uint8_t> b);

// The correction above as a function of the equal-slot count.
double CompactMatchesToJaccard(uint32_t equal_slots, uint32_t num_slots);

}  // namespace prefsift::sketch
