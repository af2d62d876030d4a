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
  std::vector<unsigned char> buf(count * 16);
  for (size_t i = 0; i < count; ++i) {
    XXH128_canonical_t c;
    XXH128_canonicalFromHash(&c, XXH128_hash_t{begin[i].lo, begin[i].hi});
    std::memcpy(buf.data() + i * 16, c.digest, 16);
  }
  XXH128_hash_t h = XXH3_128bits(buf.data(), buf.size());
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
