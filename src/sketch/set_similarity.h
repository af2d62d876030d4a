// Exact similarity of two shingle sets (sorted, duplicate-free hash vectors).
//
// Thread-safety: pure functions.
#pragma once

#include <cstddef>
#include <cstdint>
#include <span>

namespace prefsift::sketch {

// |A ∩ B| by a linear merge. REQUIRES: both sorted ascending, no duplicates.
uint64_t IntersectionSize(std::span<const uint64_t> a, std::span<const uint64_t> b);

// |a ∩ b| when it is at least `need`; otherwise some smaller number: the merge
// stops once more than |a| - need elements of a are known to be missing from
// b (a containment test needs no more). IntersectionSize is the case need = 0.
// REQUIRES: as IntersectionSize; need <= a.size().
uint64_t IntersectionIfAtLeast(std::span<const uint64_t> a, std::span<const uint64_t> b, size_t need);

// |A ∩ B| / |A ∪ B|; 1 when both are empty. REQUIRES: as IntersectionSize.
double ExactJaccard(std::span<const uint64_t> a, std::span<const uint64_t> b);

// Containment of A in B (Broder 1997): |A ∩ B| / |A|; 0 when A is empty.
// REQUIRES: as IntersectionSize.
double Containment(std::span<const uint64_t> a, std::span<const uint64_t> b);

}  // namespace prefsift::sketch
