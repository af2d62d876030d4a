// DigestingFileSystem: the SHA-256 of a file as it is read or written equals
// the digest of its bytes. Check values: FIPS 180-4 / NIST's published SHA-256
// examples ("abc", and the empty message), and a file read through the line
// reader to its end. Writes: a digest only after a clean Close, forgotten on
// reopening, carried along by renames, dropped by removals.
#include "io/digesting_file_system.h"

#include <gtest/gtest.h>

#include <unistd.h>

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <string>

#include "core/sha256.h"
#include "fault_fs.h"
#include "io/line_reader.h"
#include "io/memory_file_system.h"

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

void WriteThrough(FileSystem& fs, const std::string& path, const std::vector<std::string>& pieces) {
  auto f = fs.OpenWrite(path);
  ASSERT_TRUE(f.ok());
  for (const auto& p : pieces) ASSERT_TRUE(f.value()->Append(p).ok());
  ASSERT_TRUE(f.value()->Close().ok());
}

TEST(DigestingFileSystem, WritesAreDigestedOnClose) {
  MemoryFileSystem mem;
  DigestingFileSystem fs(&mem);
  ASSERT_TRUE(fs.MakeDir("/out").ok());
  auto f = fs.OpenWrite("/out/abc");
  ASSERT_TRUE(f.ok());
  ASSERT_TRUE(f.value()->Append("a").ok());
  ASSERT_TRUE(f.value()->Append("bc").ok());
  EXPECT_FALSE(fs.DigestOf("/out/abc").has_value());  // not closed yet
  ASSERT_TRUE(f.value()->Close().ok());
  auto d = fs.DigestOf("/out/abc");
  ASSERT_TRUE(d.has_value());
  // FIPS 180-4 example (NIST CSRC "SHA256.pdf"): SHA-256("abc").
  EXPECT_EQ(d->sha256, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(d->bytes, 3u);
  std::string big;
  for (int i = 0; i < 3000; ++i) big += "line " + std::to_string(i) + "\n";
  WriteThrough(fs, "/out/big", {big.substr(0, 7), big.substr(7, 5000), big.substr(5007)});
  EXPECT_EQ(fs.DigestOf("/out/big")->sha256, Sha256Hex(big));
  // Reopening forgets the old digest until the new bytes are closed.
  auto again = fs.OpenWrite("/out/abc");
  ASSERT_TRUE(again.ok());
  EXPECT_FALSE(fs.DigestOf("/out/abc").has_value());
  ASSERT_TRUE(again.value()->Close().ok());
  // The empty message (NIST's published value).
  EXPECT_EQ(fs.DigestOf("/out/abc")->sha256, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

// Pieces of 1 MiB and more are hashed on a helper thread beside the write;
// the digest must still be the one of the bytes in call order, whichever
// side of that size each piece falls.
TEST(DigestingFileSystem, LargeAppendsAreHashedInCallOrder) {
  MemoryFileSystem mem;
  DigestingFileSystem fs(&mem);
  const size_t mib = size_t{1} << 20;
  const std::string whole(3 * mib + 5, 'a');
  WriteThrough(fs, "/a", {whole.substr(0, mib - 1), whole.substr(mib - 1, mib), whole.substr(2 * mib - 1, 3),
                          whole.substr(2 * mib + 2)});
  // Python 3's hashlib.sha256(b"a" * (3 * 2**20 + 5)).hexdigest(), a
  // reference library outside the project.
  EXPECT_EQ(fs.DigestOf("/a")->sha256, "aff2c7498aae939dfb2fb1dc6c0c83fa3708b069428e51338801af7f5dc2bf0f");
  EXPECT_EQ(fs.DigestOf("/a")->bytes, whole.size());
  std::string mixed;
  for (uint64_t i = 0; mixed.size() < 5 * mib; ++i) mixed += "record " + std::to_string(i * 7919) + "\n";
  WriteThrough(fs, "/b", {mixed.substr(0, 2 * mib + 3), mixed.substr(2 * mib + 3, 10), mixed.substr(2 * mib + 13)});
  EXPECT_EQ(fs.DigestOf("/b")->sha256, Sha256Hex(mixed));
}

TEST(DigestingFileSystem, RenamesCarryDigestsAndRemovalsDropThem) {
  MemoryFileSystem mem;
  DigestingFileSystem fs(&mem);
  ASSERT_TRUE(fs.MakeDir("/stage").ok());
  WriteThrough(fs, "/stage/a", {"abc"});
  WriteThrough(fs, "/stage-b", {"other"});
  ASSERT_TRUE(fs.Rename("/stage", "/final").ok());  // a folder: the files inside move
  EXPECT_FALSE(fs.DigestOf("/stage/a").has_value());
  ASSERT_TRUE(fs.DigestOf("/final/a").has_value());
  EXPECT_EQ(fs.DigestOf("/final/a")->sha256, Sha256Hex("abc"));
  EXPECT_TRUE(fs.DigestOf("/stage-b").has_value());  // a sibling that shares the prefix stays
  WriteThrough(fs, "/tmp-x", {"new"});
  ASSERT_TRUE(fs.Rename("/tmp-x", "/stage-b").ok());  // replaces a file: its digest with it
  EXPECT_EQ(fs.DigestOf("/stage-b")->sha256, Sha256Hex("new"));
  ASSERT_TRUE(fs.RemoveAll("/final").ok());
  EXPECT_FALSE(fs.DigestOf("/final/a").has_value());
}

TEST(DigestingFileSystem, NoDigestWhenAWriteFails) {
  MemoryFileSystem mem;
  FaultFileSystem faulty(&mem);
  faulty.fail_writes_after = 4;  // a full disk after 4 bytes
  DigestingFileSystem fs(&faulty);
  auto f = fs.OpenWrite("/x");
  ASSERT_TRUE(f.ok());
  EXPECT_TRUE(f.value()->Append("abc").ok());
  EXPECT_FALSE(f.value()->Append("defgh").ok());
  (void)f.value()->Close();
  EXPECT_FALSE(fs.DigestOf("/x").has_value());
  // The same for a piece large enough to be hashed beside the write.
  faulty.fail_writes_after = (3LL << 20) + 4;
  auto g = fs.OpenWrite("/y");
  ASSERT_TRUE(g.ok());
  EXPECT_TRUE(g.value()->Append(std::string(size_t{3} << 20, 'b')).ok());
  EXPECT_FALSE(g.value()->Append(std::string(size_t{2} << 20, 'c')).ok());
  (void)g.value()->Close();
  EXPECT_FALSE(fs.DigestOf("/y").has_value());
}

}  // namespace
}  // namespace prefsift
