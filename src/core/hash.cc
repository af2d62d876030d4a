#include "core/hash.h"

#include <xxhash.h>

#include <cstring>
#include <vector>

namespace prefsift {

Hash128 HashBytes(std::string_view bytes) {
  XXH128_hash_t h = XXH3_128bits(bytes.data(), bytes.size());
  return Hash128{h.high64, h.low64};
}

Hash128 HashOfHashes(const Hash128* begin, size_t count) {
  // Up to 16 hashes (every comparison key of up to 15 candidates) on the
  // stack: this runs once or twice per record in several decide steps.
  constexpr size_t kOnStack = 16;
  unsigned char stack[kOnStack * 16];
  std::vector<unsigned char> heap;
  unsigned char* buf = stack;
  if (count > kOnStack) {
    heap.resize(count * 16);
    buf = heap.data();
  }
  for (size_t i = 0; i < count; ++i) {
    XXH128_canonical_t c;
    XXH128_canonicalFromHash(&c, XXH128_hash_t{begin[i].lo, begin[i].hi});
    std::memcpy(buf + i * 16, c.digest, 16);
  }
  XXH128_hash_t h = XXH3_128bits(buf, count * 16);
  return Hash128{h.high64, h.low64};
}

std::string ToHex(const Hash128& h) {
  XXH128_canonical_t c;
  XXH128_canonicalFromHash(&c, XXH128_hash_t{h.lo, h.hi});
  static const char* kDigits = "0123456789abcdef";
  std::string out(32, '0');
  for (int i = 0; i < 16; ++i) {
    out[2 * i] = kDigits[c.digest[i] >> 4];
    out[2 * i + 1] = kDigits[c.digest[i] & 15];
  }
  return out;
}

}  // namespace prefsift
