// Byte-class masks over 64 bytes at a time, for scans that count or find
// bytes of a few classes in a text (surface features, record facts): bit k
// of a mask is byte k of the block. SSE2 (the x86-64 baseline) where the
// compiler targets it, a portable byte loop elsewhere; both give the same
// masks (tests/core/byte_block_test.cc compares them).
//
// ForEachBlock64 walks a text in blocks of 64 bytes, each readable with some
// bytes after it (look-ahead, for classes of byte pairs or triples); past the
// text's end the bytes read are 0, and `valid` marks the text's own bytes.
//
// Thread-safety: pure functions and values.
#pragma once

#include <cstddef>
#include <cstdint>
#include <cstring>
#include <string_view>

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

namespace prefsift {

// The portable masks: one byte at a time.
class ScalarBlock64 {
 public:
  explicit ScalarBlock64(const unsigned char* p) { std::memcpy(b_, p, 64); }
  // Bytes equal to c.
  uint64_t Eq(unsigned char c) const {
    return Mask([c](unsigned char x) { return x == c; });
  }
  // Bytes b with b | 0x20 == c (for an ASCII letter c: the letter in either case).
  uint64_t EqFolded(unsigned char c) const {
    return Mask([c](unsigned char x) { return static_cast<unsigned char>(x | 0x20) == c; });
  }
  // Bytes in [lo, hi] (unsigned; lo <= hi).
  uint64_t InRange(unsigned char lo, unsigned char hi) const {
    return Mask([lo, hi](unsigned char x) { return x >= lo && x <= hi; });
  }

 private:
  template <typename P>
  uint64_t Mask(P pred) const {
    uint64_t m = 0;
    for (int k = 0; k < 64; ++k) m |= static_cast<uint64_t>(pred(b_[k]) ? 1 : 0) << k;
    return m;
  }
  unsigned char b_[64];
};

#if defined(__SSE2__)
// The same masks, 16 bytes a compare and a movemask.
class SseBlock64 {
 public:
  explicit SseBlock64(const unsigned char* p) {
    for (int q = 0; q < 4; ++q) v_[q] = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p + 16 * q));
  }
  uint64_t Eq(unsigned char c) const {
    const __m128i k = _mm_set1_epi8(static_cast<char>(c));
    return Mask([k](__m128i v) { return _mm_cmpeq_epi8(v, k); });
  }
  uint64_t EqFolded(unsigned char c) const {
    const __m128i k = _mm_set1_epi8(static_cast<char>(c));
    const __m128i bit = _mm_set1_epi8(0x20);
    return Mask([k, bit](__m128i v) { return _mm_cmpeq_epi8(_mm_or_si128(v, bit), k); });
  }
  uint64_t InRange(unsigned char lo, unsigned char hi) const {
    const __m128i low = _mm_set1_epi8(static_cast<char>(lo));
    const __m128i span = _mm_set1_epi8(static_cast<char>(hi - lo));
    return Mask([low, span](__m128i v) {  // v - lo <= hi - lo, unsigned
      const __m128i off = _mm_sub_epi8(v, low);
      return _mm_cmpeq_epi8(_mm_min_epu8(off, span), off);
    });
  }

 private:
  template <typename P>
  uint64_t Mask(P pred) const {
    uint64_t m = 0;
    for (int q = 0; q < 4; ++q) {
      m |= static_cast<uint64_t>(static_cast<uint16_t>(_mm_movemask_epi8(pred(v_[q])))) << (16 * q);
    }
    return m;
  }
  __m128i v_[4];
};
using Block64 = SseBlock64;
#else
using Block64 = ScalarBlock64;
#endif

// Set bits of a mask. The x86-64 baseline has no popcount instruction, and
// __builtin_popcountll there is a library call; this is the same count in
// a dozen inline operations (the classic bit-parallel sum).
inline int PopCount64(uint64_t x) {
#if defined(__POPCNT__) || !(defined(__x86_64__) || defined(__i386__))
  return __builtin_popcountll(x);
#else
  x = x - ((x >> 1) & 0x5555555555555555ULL);
  x = (x & 0x3333333333333333ULL) + ((x >> 2) & 0x3333333333333333ULL);
  x = (x + (x >> 4)) & 0x0F0F0F0F0F0F0F0FULL;
  return static_cast<int>((x * 0x0101010101010101ULL) >> 56);
#endif
}

// The largest look-ahead ForEachBlock64 allows.
inline constexpr size_t kMaxLookAhead = 16;

// Calls f(p, base, valid) for each block of 64 bytes of `text` in order: p
// points at text[base] and 64 + look_ahead bytes can be read from it (0 past
// the text's end); bit k of `valid` is set when base + k < text.size().
// REQUIRES: look_ahead <= kMaxLookAhead.
template <typename F>
void ForEachBlock64(std::string_view text, size_t look_ahead, F&& f) {
  const auto* bytes = reinterpret_cast<const unsigned char*>(text.data());
  const size_t n = text.size();
  size_t base = 0;
  for (; base + 64 + look_ahead <= n; base += 64) f(bytes + base, base, ~uint64_t{0});
  if (base >= n) return;
  // The rest (under 64 + look_ahead bytes) from a zero-padded copy.
  unsigned char pad[2 * 64 + kMaxLookAhead] = {};
  std::memcpy(pad, bytes + base, n - base);
  for (size_t off = 0; base + off < n; off += 64) {
    const size_t left = n - base - off;
    f(pad + off, base + off, left >= 64 ? ~uint64_t{0} : (uint64_t{1} << left) - 1);
  }
}

}  // namespace prefsift
