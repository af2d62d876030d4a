// DigestingFileSystem: the SHA-256 of a file as it is read equals the digest
// of its bytes. Check values: FIPS 180-4 / NIST's published SHA-256 examples
// ("abc", and the empty message), and a file read through the line reader to
// its end.
#include "io/digesting_file_system.h"

#include <gtest/gtest.h>

#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

#include "core/sha256.h"
#include "io/line_reader.h"

namespace prefsift {
namespace {

std::string WriteTemp(const std::string& name, const std::string& bytes) {
  auto dir = std::filesystem::temp_directory_path() / ("prefsift_digest_" + std::to_string(::getpid()));
  std::filesystem::create_directories(dir);
  std::string path = (dir / name).string();
  std::ofstream(path, std::ios::binary) << bytes;
  return path;
}

std::optional<FileDigest> ReadAllThrough(DigestingFileSystem& fs, const std::string& path, size_t chunk) {
  auto f = fs.OpenRead(path);
  EXPECT_TRUE(f.ok());
  std::string buf(chunk, '\0');
  for (;;) {
    auto n = f.value()->Read(buf.data(), buf.size());
    EXPECT_TRUE(n.ok());
    if (n.value() == 0) break;
  }
  return fs.DigestOf(path);
}

TEST(DigestingFileSystem, MatchesPublishedSha256Examples) {
  DigestingFileSystem fs(DefaultFileSystem());
  // FIPS 180-4 example (NIST CSRC "SHA256.pdf"): SHA-256("abc").
  auto d = ReadAllThrough(fs, WriteTemp("abc", "abc"), 1);
  ASSERT_TRUE(d.has_value());
  EXPECT_EQ(d->sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(d->bytes, 3u);
  // The empty message (NIST's published value).
  d = ReadAllThrough(fs, WriteTemp("empty", ""), 7);
  ASSERT_TRUE(d.has_value());
  EXPECT_EQ(d->sha256, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

TEST(DigestingFileSystem, NoDigestUntilTheEndIsRead) {
  DigestingFileSystem fs(DefaultFileSystem());
  const std::string path = WriteTemp("partial", std::string(1000, 'x'));
  auto f = fs.OpenRead(path);
  ASSERT_TRUE(f.ok());
  char buf[10];
  ASSERT_TRUE(f.value()->Read(buf, sizeof buf).ok());
  EXPECT_FALSE(fs.DigestOf(path).has_value());
}

TEST(DigestingFileSystem, LineReaderToTheEndGivesTheFilesDigest) {
  std::string text;
  for (int i = 0; i < 5000; ++i) text += "{\"line\": " + std::to_string(i) + "}\n";
  const std::string path = WriteTemp("lines.jsonl", text);
  DigestingFileSystem fs(DefaultFileSystem());
  auto r = LineReader::Open(&fs, path, 1 << 20);
  ASSERT_TRUE(r.ok());
  std::string_view line;
  uint64_t no = 0;
  for (;;) {
    auto next = r.value()->Read(&line, &no);
    ASSERT_TRUE(next.ok());
    if (next.value() == LineReader::Next::kEnd) break;
  }
  auto d = fs.DigestOf(path);
  ASSERT_TRUE(d.has_value());
  EXPECT_EQ(d->bytes, text.size());
  EXPECT_EQ(d->sha256, Sha256Hex(text));
}

}  // namespace
}  // namespace prefsift
