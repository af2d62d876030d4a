#include "io/stream_file.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "io/digesting_file_system.h"
#include "io/file_system.h"

namespace prefsift {
namespace {

std::string ReadBack(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

std::string Bytes(size_t n, uint32_t seed) {
  std::mt19937 rng(seed);
  std::string s(n, '\0');
  for (char& c : s) c = static_cast<char>('a' + rng() % 26);
  return s;
}

// Writes `text` in pieces of random sizes (some empty) and checks the file
// holds exactly those bytes: sizes around the 4 KiB alignment and the 4 MiB
// block, so the direct writes, the buffered tail and the block hand-over are
// each exercised, direct and buffered.
TEST(StreamFile, FileHoldsExactlyTheAppendedBytes) {
  const size_t kSizes[] = {0, 1, 4095, 4096, 4097, (4u << 20) - 1, 4u << 20, (4u << 20) + 1, (9u << 20) + 123};
  for (bool direct : {true, false}) {
    for (size_t n : kSizes) {
      const std::string path = ::testing::TempDir() + "stream_" + std::to_string(direct) + "_" + std::to_string(n);
      const std::string text = Bytes(n, static_cast<uint32_t>(n));
      auto f = OpenStreamFile(path, direct);
      ASSERT_TRUE(f.ok()) << f.status().message();
      std::mt19937 rng(7);
      for (size_t at = 0; at < text.size();) {
        const size_t take = std::min<size_t>(text.size() - at, rng() % 3 == 0 ? 0 : rng() % (3u << 20));
        ASSERT_TRUE(f.value()->Append(std::string_view(text).substr(at, take)).ok());
        at += take;
      }
      ASSERT_TRUE(f.value()->Close().ok());
      EXPECT_TRUE(f.value()->Close().ok());  // a second Close is harmless
      EXPECT_FALSE(f.value()->Append("x").ok());
      EXPECT_EQ(ReadBack(path), text) << "direct " << direct << ", " << n << " bytes";
      ::unlink(path.c_str());
    }
  }
}

TEST(StreamFile, ReopeningTruncatesAndErrorsNameThePath) {
  const std::string path = ::testing::TempDir() + "stream_truncate";
  for (const std::string text : {Bytes(10000, 1), std::string("short")}) {
    auto f = OpenStreamFile(path, true);
    ASSERT_TRUE(f.ok());
    ASSERT_TRUE(f.value()->Append(text).ok());
    ASSERT_TRUE(f.value()->Close().ok());
    EXPECT_EQ(ReadBack(path), text);
  }
  ::unlink(path.c_str());
  const std::string missing = ::testing::TempDir() + "no_such_folder/x.jsonl";
  auto f = OpenStreamFile(missing, true);
  ASSERT_FALSE(f.ok());
  EXPECT_NE(f.status().message().find(missing), std::string::npos) << f.status().message();
}

// The run's output folder digests what it writes (provenance): a stream file
// opened through DigestingFileSystem gets the same SHA-256 as its bytes.
// FIPS 180-4's example "abc" (NIST CSRC "SHA256.pdf").
TEST(StreamFile, DigestingFileSystemDigestsStreamFiles) {
  DigestingFileSystem fs(DefaultFileSystem());
  const std::string path = ::testing::TempDir() + "stream_abc";
  auto f = fs.OpenWriteStream(path);
  ASSERT_TRUE(f.ok());
  ASSERT_TRUE(f.value()->Append("a").ok());
  ASSERT_TRUE(f.value()->Append("bc").ok());
  ASSERT_TRUE(f.value()->Close().ok());
  auto d = fs.DigestOf(path);
  ASSERT_TRUE(d.has_value());
  EXPECT_EQ(d->sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(ReadBack(path), "abc");
  ::unlink(path.c_str());
}

}  // namespace
}  // namespace prefsift
