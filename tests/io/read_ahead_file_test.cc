#include "io/read_ahead_file.h"

#include <gtest/gtest.h>
#include <fcntl.h>
#include <unistd.h>

#include <fstream>
#include <random>
#include <string>

#include "io/file_system.h"
#include "io/line_reader.h"

namespace prefsift {
namespace {

std::string Bytes(size_t n, uint32_t seed) {
  std::mt19937 rng(seed);
  std::string s(n, '\0');
  for (char& c : s) c = static_cast<char>('a' + rng() % 26);
  return s;
}

// Writes the file, then (evict) asks the kernel to drop it from the page
// cache (written back first), so that a direct open reads it past the cache
// rather than through it (OpenReadAheadFile reads a mostly cached file through
// the cache). On a file system without a cache of its own (tmpfs) nothing drops.
std::string WriteTemp(const std::string& name, const std::string& text, bool evict = true) {
  const std::string path = ::testing::TempDir() + name;
  std::ofstream(path, std::ios::binary) << text;
  if (!evict) return path;
  const int fd = ::open(path.c_str(), O_RDONLY);
  if (fd >= 0) {
    ::fdatasync(fd);
    ::posix_fadvise(fd, 0, 0, POSIX_FADV_DONTNEED);
    ::close(fd);
  }
  return path;
}

// Reads the file in pieces of random sizes (some empty) and checks that the
// pieces join up to exactly its bytes: sizes around the 4 KiB alignment and
// the 4 MiB block, so the direct reads, the short last block and the hand-over
// from the background read are each exercised, direct and through the cache.
TEST(ReadAheadFile, ReadsExactlyTheFilesBytes) {
  const size_t kSizes[] = {0, 1, 4095, 4096, 4097, (4u << 20) - 1, 4u << 20, (4u << 20) + 1, (9u << 20) + 123};
  for (bool direct : {true, false}) {
    for (size_t n : kSizes) {
      const std::string text = Bytes(n, static_cast<uint32_t>(n));
      const std::string path = WriteTemp("read_ahead_" + std::to_string(direct) + "_" + std::to_string(n), text);
      auto f = OpenReadAheadFile(path, direct);
      ASSERT_TRUE(f.ok()) << f.status().message();
      std::mt19937 rng(7);
      std::string got;
      std::string piece;
      for (;;) {
        const size_t want = rng() % 3 == 0 ? 0 : rng() % (3u << 20);
        piece.resize(want);
        auto r = f.value()->Read(piece.data(), want);
        ASSERT_TRUE(r.ok()) << r.status().message();
        ASSERT_LE(r.value(), want);
        got.append(piece.data(), r.value());
        if (want > 0 && r.value() < want) break;  // fewer than asked: the end (as fread)
      }
      EXPECT_EQ(got.size(), text.size()) << "direct " << direct << ", " << n << " bytes";
      EXPECT_TRUE(got == text) << "direct " << direct << ", " << n << " bytes";
      char c;
      auto again = f.value()->Read(&c, 1);
      ASSERT_TRUE(again.ok());
      EXPECT_EQ(again.value(), 0u);
      ::unlink(path.c_str());
    }
  }
}

// Skip moves forward from wherever reading stopped: within the current block,
// across blocks (to unaligned offsets), to the exact end; past the end is an
// error naming the path and the file's size.
TEST(ReadAheadFile, SkipLandsOnTheRightByte) {
  const size_t n = (9u << 20) + 777;
  const std::string text = Bytes(n, 3);
  const std::string path = WriteTemp("read_ahead_skip", text);
  std::mt19937 rng(11);
  for (int trial = 0; trial < 40; ++trial) {
    for (bool direct : {true, false}) {
      auto f = OpenReadAheadFile(path, direct);
      ASSERT_TRUE(f.ok());
      size_t at = 0;
      for (int step = 0; step < 4 && at < n; ++step) {
        const size_t head = std::min<size_t>(n - at, rng() % 5000);
        std::string buf(head, '\0');
        auto r = f.value()->Read(buf.data(), head);
        ASSERT_TRUE(r.ok());
        ASSERT_EQ(r.value(), head);
        ASSERT_TRUE(buf == text.substr(at, head)) << "trial " << trial << " at " << at;
        at += head;
        const size_t skip = std::min<size_t>(n - at, step % 2 == 0 ? rng() % 9000 : rng() % (6u << 20));
        ASSERT_TRUE(f.value()->Skip(skip).ok());
        at += skip;
      }
      std::string rest(n - at + 10, '\0');
      auto r = f.value()->Read(rest.data(), rest.size());
      ASSERT_TRUE(r.ok());
      ASSERT_EQ(r.value(), n - at);
      EXPECT_TRUE(rest.substr(0, n - at) == text.substr(at)) << "trial " << trial;
    }
  }
  auto f = OpenReadAheadFile(path, true);
  ASSERT_TRUE(f.ok());
  EXPECT_TRUE(f.value()->Skip(n).ok());  // to the end exactly: then nothing is left
  char c;
  auto r = f.value()->Read(&c, 1);
  ASSERT_TRUE(r.ok());
  EXPECT_EQ(r.value(), 0u);
  auto g = OpenReadAheadFile(path, true);
  ASSERT_TRUE(g.ok());
  Status past = g.value()->Skip(n + 1);
  ASSERT_FALSE(past.ok());
  EXPECT_NE(past.message().find(path), std::string::npos) << past.message();
  EXPECT_NE(past.message().find(std::to_string(n) + " bytes"), std::string::npos) << past.message();
  ::unlink(path.c_str());
}

// A file the page cache holds (just written) is read through the cache even
// when a direct read is asked for: the same bytes either way.
TEST(ReadAheadFile, CachedFileReadsTheSame) {
  const std::string text = Bytes((5u << 20) + 3, 5);
  const std::string path = WriteTemp("read_ahead_cached", text, /*evict=*/false);
  auto f = OpenReadAheadFile(path, true);
  ASSERT_TRUE(f.ok()) << f.status().message();
  std::string got(text.size() + 1, '\0');
  auto r = f.value()->Read(got.data(), got.size());
  ASSERT_TRUE(r.ok());
  ASSERT_EQ(r.value(), text.size());
  got.resize(text.size());
  EXPECT_TRUE(got == text);
  ::unlink(path.c_str());
}

TEST(ReadAheadFile, MissingFileNamesThePath) {
  const std::string missing = ::testing::TempDir() + "no_such_folder/x.jsonl";
  auto f = OpenReadAheadFile(missing, true);
  ASSERT_FALSE(f.ok());
  EXPECT_NE(f.status().message().find(missing), std::string::npos) << f.status().message();
}

// The real file system reads a file of kReadAheadMinBytes or more this way:
// a line reader over it gives every line, the same as through the page cache.
TEST(ReadAheadFile, DefaultFileSystemReadsLargeInputsTheSame) {
  std::string text;
  text.reserve(kReadAheadMinBytes + (1u << 20));
  for (uint64_t i = 0; text.size() <= kReadAheadMinBytes; ++i) {
    text += "{\"n\":" + std::to_string(i) + ",\"pad\":\"" + std::string(i % 97, 'x') + "\"}\n";
  }
  const std::string path = WriteTemp("read_ahead_large.jsonl", text);
  for (FileSystem* fs : {DefaultFileSystem(), PosixFileSystemWith(true, false)}) {
    auto r = LineReader::Open(fs, path, 1 << 20);
    ASSERT_TRUE(r.ok()) << r.status().message();
    std::string joined;
    joined.reserve(text.size());
    std::string_view line;
    uint64_t line_no = 0, lines = 0;
    for (;;) {
      auto next = r.value()->Read(&line, &line_no);
      ASSERT_TRUE(next.ok()) << next.status().message();
      if (next.value() != LineReader::Next::kLine) break;
      joined.append(line);
      joined.push_back('\n');
      ++lines;
      ASSERT_EQ(line_no, lines);
    }
    EXPECT_TRUE(joined == text);
  }
  ::unlink(path.c_str());
}

}  // namespace
}  // namespace prefsift
