// core/byte_block.h: the SSE2 masks equal the portable byte loop's on random
// blocks and on every byte value (a differential test; the portable masks are
// the definition), and ForEachBlock64 visits each byte once with zeros after
// the text's end.
#include "core/byte_block.h"

#include <gtest/gtest.h>

#include <random>
#include <string>
#include <vector>

namespace prefsift {
namespace {

template <typename B>
std::vector<uint64_t> AllMasks(const unsigned char* p) {
  const B b(p);
  std::vector<uint64_t> out;
  for (int c = 0; c < 256; ++c) {
    const auto u = static_cast<unsigned char>(c);
    out.push_back(b.Eq(u));
    out.push_back(b.EqFolded(u));
  }
  for (auto [lo, hi] : {std::pair{0x80, 0xBF}, std::pair{9, 13}, std::pair{0, 255}, std::pair{97, 122},
                        std::pair{200, 200}, std::pair{0, 0}, std::pair{255, 255}}) {
    out.push_back(b.InRange(static_cast<unsigned char>(lo), static_cast<unsigned char>(hi)));
  }
  return out;
}

TEST(ByteBlock, PortableMasksByHand) {
  unsigned char block[64] = {};
  block[0] = 'A';
  block[5] = 'a';
  block[63] = 0x85;
  const ScalarBlock64 b(block);
  EXPECT_EQ(b.Eq('a'), uint64_t{1} << 5);
  EXPECT_EQ(b.EqFolded('a'), uint64_t{1} | uint64_t{1} << 5);
  EXPECT_EQ(b.InRange(0x80, 0xBF), uint64_t{1} << 63);
  EXPECT_EQ(b.Eq(0), ~(uint64_t{1} | uint64_t{1} << 5 | uint64_t{1} << 63));
}

TEST(ByteBlock, SseMasksEqualPortableMasks) {
#if defined(__SSE2__)
  std::mt19937_64 rng(5);
  std::vector<unsigned char> bytes(64 * 50);
  for (auto& c : bytes) c = static_cast<unsigned char>(rng());
  for (int c = 0; c < 256; ++c) bytes[static_cast<size_t>(c)] = static_cast<unsigned char>(c);  // every value
  for (size_t at = 0; at + 64 <= bytes.size(); at += 13) {
    ASSERT_EQ(AllMasks<SseBlock64>(bytes.data() + at), AllMasks<ScalarBlock64>(bytes.data() + at)) << at;
  }
#else
  GTEST_SKIP() << "no SSE2 on this target";
#endif
}

TEST(ByteBlock, PopCountCountsSetBits) {
  EXPECT_EQ(PopCount64(0), 0);
  EXPECT_EQ(PopCount64(~uint64_t{0}), 64);
  EXPECT_EQ(PopCount64(uint64_t{1} << 63 | 5), 3);
  std::mt19937_64 rng(9);
  for (int t = 0; t < 10000; ++t) {
    const uint64_t x = rng() & rng();
    int bits = 0;
    for (int k = 0; k < 64; ++k) bits += static_cast<int>((x >> k) & 1);
    ASSERT_EQ(PopCount64(x), bits) << x;
  }
}

TEST(ByteBlock, ForEachBlockVisitsEveryByteOnceWithZerosAfter) {
  std::string text;
  for (size_t n = 0; n < 300; ++n) {
    for (size_t look : {size_t{0}, size_t{1}, size_t{2}, kMaxLookAhead}) {
      std::string seen;
      size_t next_base = 0;
      ForEachBlock64(text, look, [&](const unsigned char* p, size_t base, uint64_t valid) {
        ASSERT_EQ(base, next_base);
        next_base += 64;
        for (size_t k = 0; k < 64 + look; ++k) {
          const bool inside = base + k < n;
          if (k < 64) {
            ASSERT_EQ((valid >> k) & 1, inside ? 1u : 0u);
          }
          ASSERT_EQ(p[k], inside ? static_cast<unsigned char>(text[base + k]) : 0) << n << " " << k;
          if (k < 64 && inside) seen.push_back(static_cast<char>(p[k]));
        }
      });
      ASSERT_EQ(seen, text);
    }
    text.push_back(static_cast<char>('a' + n % 26));
  }
}

}  // namespace
}  // namespace prefsift
