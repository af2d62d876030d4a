#include "core/hash.h"
#include "core/sha256.h"

#include <gtest/gtest.h>

namespace prefsift {
namespace {

// XXH3-128 of the empty input with seed 0: the xxHash project's reference value.
TEST(Hash, Xxh3EmptyReference) { EXPECT_EQ(ToHex(HashBytes("")), "99aa06d3014798d86001c324468d497f"); }

TEST(Hash, OrderOfHashesMatters) {
  Hash128 a = HashBytes("a"), b = HashBytes("b");
  Hash128 ab[] = {a, b}, ba[] = {b, a};
  EXPECT_NE(HashOfHashes(ab, 2), HashOfHashes(ba, 2));
  EXPECT_EQ(HashOfHashes(ab, 2), HashOfHashes(ab, 2));
}

// FIPS 180-2, appendix B.1 and B.2 examples.
TEST(Sha256, FipsExamples) {
  EXPECT_EQ(Sha256Hex("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(Sha256Hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  Sha256 h;
  h.Update("ab");
  h.Update("c");
  EXPECT_EQ(h.HexDigest(), Sha256Hex("abc"));
}

}  // namespace
}  // namespace prefsift
