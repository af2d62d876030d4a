#include "stages/leakage/packed_bytes.h"

#include <zstd.h>

namespace prefsift {

namespace {
// Level 1: about 6x on template text, 2x on random syllables, at several
// hundred MB/s (docs/leakage.md "Memory"); higher levels gain little here.
constexpr int kLevel = 1;
}  // namespace

bool PackBytes(std::span<const std::byte> bytes, std::vector<char>* packed) {
  packed->clear();
  std::vector<char> buf(ZSTD_compressBound(bytes.size()));
  const size_t n = ZSTD_compress(buf.data(), buf.size(), bytes.data(), bytes.size(), kLevel);
  if (ZSTD_isError(n)) {
    packed->shrink_to_fit();
    return false;
  }
  // Exactly the compressed size, not the bound.
  std::vector<char>(buf.begin(), buf.begin() + static_cast<std::ptrdiff_t>(n)).swap(*packed);
  return true;
}

bool UnpackBytes(std::span<const char> packed, std::span<std::byte> out) {
  const size_t n = ZSTD_decompress(out.data(), out.size(), packed.data(), packed.size());
  return !ZSTD_isError(n) && n == out.size();
}

}  // namespace prefsift
