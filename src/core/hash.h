// 128-bit content hashes (XXH3-128) used for exact matching.
//
// Thread-safe: pure functions.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>

namespace prefsift {

struct Hash128 {
  uint64_t hi = 0;
  uint64_t lo = 0;
  friend bool operator==(const Hash128&, const Hash128&) = default;
  friend auto operator<=>(const Hash128&, const Hash128&) = default;
};

// XXH3-128 of the bytes, with seed 0 (the stable, documented default).
Hash128 HashBytes(std::string_view bytes);

// Hash of a sequence of hashes (order-sensitive): XXH3-128 over their canonical
// big-endian bytes. Sort first for an order-free hash.
Hash128 HashOfHashes(const Hash128* begin, size_t count);

// 32 lowercase hex digits, big-endian (XXH128_canonicalFromHash order).
std::string ToHex(const Hash128& h);

struct Hash128Hasher {
  size_t operator()(const Hash128& h) const noexcept { return static_cast<size_t>(h.lo ^ (h.hi * 0x9E3779B97F4A7C15ULL)); }
};

}  // namespace prefsift
