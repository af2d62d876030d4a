// Shared pieces of the bias stage (docs/bias.md): the per-candidate surface
// facts kept from Observe, the multiple-testing family helper, and the seeded
// hashes every deterministic choice of the stage is drawn from.
//
// Pure functions and plain structs; thread-safe.
#pragma once

#include "core/random.h"

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "core/run_state.h"
#include "core/small_vector.h"

namespace prefsift::bias {

// Surface facts of one candidate, computed in Observe from its text
// (stats/surface_features.h) and kept for the shortcut audit.
struct CandidateSurface {
  uint32_t words = 0;
  uint16_t list_items = 0;  // capped at 65535
  uint8_t flags = 0;        // kCodeBlock | kHeading | kRefusal | kUrl
  static constexpr uint8_t kCodeBlock = 1, kHeading = 2, kRefusal = 4, kUrl = 8;
};

// One record's candidates' surface features, inside the record's slot for up
// to 4 candidates (40 bytes, no heap block; a std::vector took 24 bytes and a
// heap block of at least 32).
using CandidateSurfaces = SmallVector<CandidateSurface, 4>;

enum class Correction { kHolm, kBenjaminiHochberg };
const char* CorrectionName(Correction c);  // "holm" or "benjamini-hochberg"

// Adjusted p-values of one family, in input order (Holm or BH).
std::vector<double> AdjustFamily(const std::vector<double>& p, Correction c);

// True for records whose judgment has a slot (choice, ranks, order); false for
// pairwise layouts (chosen/rejected fields).
inline bool HasSlots(const RecordFacts& f) { return f.shape != JudgmentShape::kPairwise; }

// The single preferred candidate: facts.chosen, or 0 (the chosen field) for a
// pairwise record; -1 when the top is tied.
inline int PreferredIndex(const RecordFacts& f) { return f.shape == JudgmentShape::kPairwise ? 0 : f.chosen; }

// 64-bit hash of (seed, purpose, record id): XXH3-64 over the seed's 8
// little-endian bytes, the purpose, a 0 byte and the id. Different purposes
// give independent streams; the same id gets the same value wherever its line is.
uint64_t SeededHash(uint64_t seed, std::string_view purpose, std::string_view id);

// SplitMix64 and UniformBelow: core/random.h.

}  // namespace prefsift::bias
