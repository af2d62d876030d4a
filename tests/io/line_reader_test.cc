#include "io/line_reader.h"

#include <gtest/gtest.h>
#include <zlib.h>
#include <zstd.h>

#include <vector>

#include "fault_fs.h"
#include "io/memory_file_system.h"

namespace prefsift {
namespace {

// The test files live in memory.
MemoryFileSystem& Files() {
  static MemoryFileSystem fs;
  return fs;
}

std::string Temp(const std::string& name, const std::string& bytes) {
  std::string path = "/tmp/" + name;
  Files().Put(path, bytes);
  return path;
}

// `text` in the gzip format (RFC 1952), as gzip(1) writes it.
std::string Gzip(const std::string& text) {
  z_stream z{};
  EXPECT_EQ(deflateInit2(&z, 6, Z_DEFLATED, 15 + 16, 8, Z_DEFAULT_STRATEGY), Z_OK);  // +16: gzip wrapper
  std::string out(deflateBound(&z, text.size()) + 32, '\0');
  z.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(text.data()));
  z.avail_in = static_cast<uInt>(text.size());
  z.next_out = reinterpret_cast<Bytef*>(out.data());
  z.avail_out = static_cast<uInt>(out.size());
  EXPECT_EQ(deflate(&z, Z_FINISH), Z_STREAM_END);
  out.resize(z.total_out);
  deflateEnd(&z);
  return out;
}

std::vector<std::string> ReadAll(const std::string& path, size_t max = 1 << 20, std::vector<uint64_t>* too_long = nullptr) {
  auto r = LineReader::Open(&Files(), path, max);
  EXPECT_TRUE(r.ok()) << r.status().message();
  std::vector<std::string> out;
  for (;;) {
    std::string_view line;
    uint64_t no;
    auto n = r.value()->Read(&line, &no);
    EXPECT_TRUE(n.ok());
    if (n.value() == LineReader::Next::kEnd) break;
    if (n.value() == LineReader::Next::kTooLong) {
      if (too_long) too_long->push_back(no);
      out.push_back("<too long>");
      continue;
    }
    out.emplace_back(line);
  }
  return out;
}

TEST(LineReader, CrlfBomAndMissingFinalNewline) {
  auto lines = ReadAll(Temp("crlf.jsonl", "\xEF\xBB\xBF" "a\r\nb\n\nc"));
  EXPECT_EQ(lines, (std::vector<std::string>{"a", "b", "", "c"}));
  EXPECT_TRUE(ReadAll(Temp("empty.jsonl", "")).empty());
  EXPECT_EQ(ReadAll(Temp("one.jsonl", "x\n")), std::vector<std::string>{"x"});
}

TEST(LineReader, TooLongLinesAreSkippedAndNumbered) {
  std::string big(5000, 'x');
  std::vector<uint64_t> too_long;
  auto lines = ReadAll(Temp("long.jsonl", "a\n" + big + "\nb\n" + big), 100, &too_long);
  EXPECT_EQ(lines, (std::vector<std::string>{"a", "<too long>", "b", "<too long>"}));
  EXPECT_EQ(too_long, (std::vector<uint64_t>{2, 4}));
}

TEST(LineReader, LinesSpanningBufferBoundaries) {
  std::string text;
  for (int i = 0; i < 300000; ++i) text += std::to_string(i) + "\n";
  auto lines = ReadAll(Temp("many.jsonl", text));
  ASSERT_EQ(lines.size(), 300000u);
  EXPECT_EQ(lines[299999], "299999");
}

TEST(LineReader, GzipAndZstdByMagicBytes) {
  std::string text = "first\nsecond\n";
  for (int i = 0; i < 1000; ++i) text += "line " + std::to_string(i) + "\n";
  auto lines = ReadAll(Temp("x.gz", Gzip(text)));
  ASSERT_EQ(lines.size(), 1002u);
  EXPECT_EQ(lines[1], "second");
  std::string z(ZSTD_compressBound(text.size()), '\0');
  z.resize(ZSTD_compress(z.data(), z.size(), text.data(), text.size(), 3));
  auto zl = ReadAll(Temp("x_no_extension", z));
  ASSERT_EQ(zl.size(), 1002u);
  EXPECT_EQ(zl[1001], "line 999");
}

TEST(LineReader, TruncatedCompressedInputIsAnError) {
  std::string text(100000, 'a');
  std::string z(ZSTD_compressBound(text.size()), '\0');
  z.resize(ZSTD_compress(z.data(), z.size(), text.data(), text.size(), 3));
  z.resize(z.size() / 2);
  auto r = LineReader::Open(&Files(), Temp("trunc.zst", z), 1 << 20);
  ASSERT_TRUE(r.ok());
  std::string_view line;
  uint64_t no;
  bool failed = false;
  for (int i = 0; i < 10 && !failed; ++i) {
    auto n = r.value()->Read(&line, &no);
    if (!n.ok()) failed = true;
    else if (n.value() == LineReader::Next::kEnd) break;
  }
  EXPECT_TRUE(failed);
}

TEST(LineReader, DirectoryAndMissingFileAreClearErrors) {
  // Both on the real file system (the messages are the POSIX one's) and in memory.
  for (FileSystem* fs : {DefaultFileSystem(), static_cast<FileSystem*>(&Files())}) {
    ASSERT_TRUE(fs->MakeDir(::testing::TempDir()).ok());
    auto dir = LineReader::Open(fs, ::testing::TempDir(), 100);
    ASSERT_FALSE(dir.ok());
    EXPECT_NE(dir.status().message().find("directory"), std::string::npos);
    auto missing = LineReader::Open(fs, "/nonexistent/file.jsonl", 100);
    ASSERT_FALSE(missing.ok());
    EXPECT_NE(missing.status().message().find("/nonexistent/file.jsonl"), std::string::npos);
  }
}

TEST(LineReader, InjectedReadErrorSurfaces) {
  FaultFileSystem fs(&Files());
  fs.fail_reads_after = 10;
  std::string text;
  for (int i = 0; i < 200000; ++i) text += "abcdefgh\n";
  auto r = LineReader::Open(&fs, Temp("readfault.jsonl", text), 100);
  ASSERT_TRUE(r.ok());
  std::string_view line;
  uint64_t no;
  bool failed = false;
  for (int i = 0; i < 300000 && !failed; ++i) {
    auto n = r.value()->Read(&line, &no);
    if (!n.ok()) failed = true;
    else if (n.value() == LineReader::Next::kEnd) break;
  }
  EXPECT_TRUE(failed);
}

}  // namespace
}  // namespace prefsift
