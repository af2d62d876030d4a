// Cutting inputs into parts (pipeline/cut.h): every byte in exactly one part,
// cuts at line starts, first lines right, empty parts, compressed inputs whole.
// The expected values are counted independently here from the file bytes.
#include "pipeline/cut.h"

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>
#include <zlib.h>
#include <zstd.h>

#include <unistd.h>

#include <filesystem>
#include <fstream>
#include <random>

#include "io/fault_fs.h"

namespace prefsift {
namespace {

namespace fs = std::filesystem;

class CutTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = fs::temp_directory_path() / ("prefsift-cut-" + std::to_string(::getpid()) + "-" +
                                        ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::remove_all(dir_);
    fs::create_directories(dir_);
  }
  void TearDown() override { fs::remove_all(dir_); }

  std::string Write(const std::string& name, const std::string& bytes) {
    std::string p = (dir_ / name).string();
    std::ofstream(p, std::ios::binary) << bytes;
    return p;
  }
  std::vector<CutPart> Cut(const std::vector<std::string>& paths, CutOptions o) {
    auto r = CutInputs(DefaultFileSystem(), paths, o);
    EXPECT_TRUE(r.ok()) << r.status().message();
    if (r.ok()) {
      // The reader of parts.json (pipeline/parts.h, written apart from the cut) accepts every cut.
      auto back = ParsePartsJson(PartsJson(ToParts(r.value())), "cut", nullptr);
      EXPECT_TRUE(back.ok()) << back.status().message();
      if (back.ok()) EXPECT_EQ(back.value().size(), r.value().size());
    }
    return r.ok() ? r.value() : std::vector<CutPart>{};
  }
  fs::path dir_;
};

// Checks the parts of one plain input against its bytes: contiguous from 0 to
// the size, each begin at a line start (or the end), first_line = 1 + LFs
// before begin, lines = line starts in [begin, end).
void ExpectCovers(const std::vector<CutPart>& parts, uint64_t input, const std::string& data) {
  uint64_t at = 0, total_lines = 0;
  size_t n = 0;
  for (const CutPart& p : parts) {
    if (p.input != input) continue;
    ++n;
    ASSERT_TRUE(p.end.has_value());
    EXPECT_EQ(p.begin, at) << "part " << p.part;
    EXPECT_LE(p.begin, *p.end);
    EXPECT_TRUE(p.begin == 0 || p.begin == data.size() || data[p.begin - 1] == '\n') << "part " << p.part;
    // 1 + the lines that start before it (after a last line without LF, an
    // empty part's first line is the number the next line would have).
    uint64_t starts_before = 0;
    for (uint64_t i = 0; i < p.begin; ++i) starts_before += (i == 0 || data[i - 1] == '\n');
    EXPECT_EQ(p.first_line, 1 + starts_before) << "part " << p.part;
    uint64_t starts = 0;
    for (uint64_t i = p.begin; i < *p.end; ++i) starts += (i == 0 || data[i - 1] == '\n');
    EXPECT_EQ(p.lines, starts) << "part " << p.part;
    total_lines += p.lines;
    at = *p.end;
  }
  EXPECT_GT(n, 0u);
  EXPECT_EQ(at, data.size());
  uint64_t lines = static_cast<uint64_t>(std::count(data.begin(), data.end(), '\n')) +
                   (!data.empty() && data.back() != '\n' ? 1 : 0);
  EXPECT_EQ(total_lines, lines);
}

TEST_F(CutTest, EveryByteOnceAtLineStarts) {
  std::string data;
  for (int i = 0; i < 100; ++i) data += "{\"q\":\"question " + std::to_string(i) + std::string(i % 7, 'x') + "\"}\n";
  std::string p = Write("a.jsonl", data);
  for (uint64_t k : {1, 2, 3, 5, 7, 100}) {
    auto parts = Cut({p}, CutOptions{k, 0});
    ASSERT_EQ(parts.size(), k);
    ExpectCovers(parts, 0, data);
    for (size_t i = 0; i < parts.size(); ++i) EXPECT_EQ(parts[i].part, i);
  }
  // About equal: each cut is the first line start at or after i * size / k.
  auto parts = Cut({p}, CutOptions{4, 0});
  for (size_t i = 1; i < 4; ++i) {
    uint64_t t = i * data.size() / 4;
    uint64_t want = t;
    while (want < data.size() && want > 0 && data[want - 1] != '\n') ++want;
    EXPECT_EQ(parts[i].begin, want);
  }
}

TEST_F(CutTest, MorePartsThanLinesGivesEmptyParts) {
  std::string data = "{\"q\":1}\n{\"q\":2}\n{\"q\":3}\n";
  std::string p = Write("a.jsonl", data);
  auto parts = Cut({p}, CutOptions{10, 0});
  ASSERT_EQ(parts.size(), 10u);
  ExpectCovers(parts, 0, data);
  size_t empty = 0;
  for (const auto& part : parts) empty += part.lines == 0;
  EXPECT_EQ(empty, 7u);
  EXPECT_EQ(parts.back().first_line, 4u);  // an empty part after the last line: the next line's number
}

TEST_F(CutTest, CrlfAndLastLineWithoutNewline) {
  std::string crlf = "{\"q\":\"one\"}\r\n{\"q\":\"two\"}\r\n{\"q\":\"three\"}\r\n{\"q\":\"four\"}";
  std::string p = Write("crlf.jsonl", crlf);
  for (uint64_t k : {1, 2, 3, 4, 6}) {
    auto parts = Cut({p}, CutOptions{k, 0});
    ExpectCovers(parts, 0, crlf);
    for (const auto& part : parts) {
      // Never between CR and LF.
      if (part.begin > 0 && part.begin < crlf.size()) {
        EXPECT_EQ(crlf[part.begin - 1], '\n');
      }
    }
  }
  auto two = Cut({p}, CutOptions{2, 0});
  EXPECT_EQ(two[0].lines + two[1].lines, 4u);  // the last line counts without its LF
}

TEST_F(CutTest, EmptyFileAndOneLongLine) {
  std::string e = Write("empty.jsonl", "");
  auto parts = Cut({e}, CutOptions{3, 0});
  ASSERT_EQ(parts.size(), 3u);
  for (const auto& part : parts) {
    EXPECT_EQ(part.begin, 0u);
    EXPECT_EQ(*part.end, 0u);
    EXPECT_EQ(part.first_line, 1u);
  }
  std::string one = std::string(5000, 'x') + "\n";
  std::string p = Write("one.jsonl", one);
  parts = Cut({p}, CutOptions{4, 0});
  ExpectCovers(parts, 0, one);
  EXPECT_EQ(parts[0].lines, 1u);
  EXPECT_EQ(*parts[0].end, one.size());
}

TEST_F(CutTest, LargeFileUsesACoarserGridButStaysExactAtLineStarts) {
  // 3 MB: over the grid's 128 Ki entries, so the grid step doubles several times.
  std::mt19937_64 rng(7);
  std::string data;
  while (data.size() < 3'000'000) {
    data += std::string(1 + rng() % 400, 'a' + static_cast<char>(rng() % 26));
    data += '\n';
  }
  std::string p = Write("big.jsonl", data);
  auto parts = Cut({p}, CutOptions{9, 0});
  ASSERT_EQ(parts.size(), 9u);
  ExpectCovers(parts, 0, data);
  // About equal: the grid step is at most 64 bytes here (3 MB / 64 Ki), lines at most 401.
  for (const auto& part : parts) {
    EXPECT_NEAR(static_cast<double>(*part.end - part.begin), data.size() / 9.0, 2 * (64 + 401));
  }
}

TEST_F(CutTest, CompressedInputsAreWholeParts) {
  std::string plain = "{\"q\":1}\n{\"q\":2}\n";
  std::string gz_path = (dir_ / "b.jsonl.gz").string();
  gzFile g = gzopen(gz_path.c_str(), "wb");
  ASSERT_NE(g, nullptr);
  gzwrite(g, plain.data(), static_cast<unsigned>(plain.size()));
  gzclose(g);
  std::string z(ZSTD_compressBound(plain.size()), '\0');
  z.resize(ZSTD_compress(z.data(), z.size(), plain.data(), plain.size(), 3));
  std::string zst_path = Write("c.jsonl.zst", z);
  std::string a = Write("a.jsonl", plain + plain);
  auto parts = Cut({a, gz_path, zst_path}, CutOptions{6, 0});
  // Two compressed inputs take one part each; the plain one takes the other four.
  ASSERT_EQ(parts.size(), 6u);
  ExpectCovers(parts, 0, plain + plain);
  EXPECT_EQ(parts[4].input, 1u);
  EXPECT_FALSE(parts[4].end.has_value());
  EXPECT_EQ(parts[4].begin, 0u);
  EXPECT_EQ(parts[4].first_line, 1u);
  EXPECT_EQ(parts[5].input, 2u);
  EXPECT_FALSE(parts[5].end.has_value());
  auto j = nlohmann::json::parse(PartsJson(ToParts(parts)));
  EXPECT_EQ(j["format"], "prefsift-parts");
  EXPECT_EQ(j["version"], 1);
  ASSERT_EQ(j["parts"].size(), 6u);
  EXPECT_TRUE(j["parts"][4]["end"].is_null());
  EXPECT_EQ(j["parts"][4]["path"], gz_path);
  EXPECT_EQ(j["parts"][1]["begin"], parts[1].begin);
  EXPECT_EQ(j["parts"][1]["first_line"], parts[1].first_line);
  EXPECT_FALSE(j["parts"][1].contains("lines"));
}

TEST_F(CutTest, PartsAreSharedByInputSize) {
  std::string big(3000, 'x'), small(1000, 'y');
  for (size_t i = 99; i < big.size(); i += 100) big[i] = '\n';
  for (size_t i = 99; i < small.size(); i += 100) small[i] = '\n';
  std::string a = Write("a.jsonl", big), b = Write("b.jsonl", small);
  // 8 parts: one each, then 6 shared 3:1 = 4.5 and 1.5, the tie in remainders to the earlier input.
  auto parts = Cut({a, b}, CutOptions{8, 0});
  ASSERT_EQ(parts.size(), 8u);
  EXPECT_EQ(std::count_if(parts.begin(), parts.end(), [](const CutPart& p) { return p.input == 0; }), 6);
  ExpectCovers(parts, 0, big);
  ExpectCovers(parts, 1, small);
  // By size: 1000 bytes a part.
  parts = Cut({a, b}, CutOptions{0, 1000});
  ASSERT_EQ(parts.size(), 4u);
  ExpectCovers(parts, 0, big);
  parts = Cut({a, b}, CutOptions{0, 999});  // 3000 / 999 rounds up to 4, 1000 / 999 to 2
  EXPECT_EQ(parts.size(), 6u);
}

TEST_F(CutTest, ErrorsAreValues) {
  std::string a = Write("a.jsonl", "{}\n"), b = Write("b.jsonl", "{}\n");
  auto few = CutInputs(DefaultFileSystem(), {a, b}, CutOptions{1, 0});
  ASSERT_FALSE(few.ok());
  EXPECT_EQ(few.status().code(), StatusCode::kUsage);
  EXPECT_NE(few.status().message().find("2 inputs"), std::string::npos) << few.status().message();
  auto none = CutInputs(DefaultFileSystem(), {a}, CutOptions{0, 0});
  EXPECT_EQ(none.status().code(), StatusCode::kUsage);
  auto missing = CutInputs(DefaultFileSystem(), {(dir_ / "nope.jsonl").string()}, CutOptions{2, 0});
  ASSERT_FALSE(missing.ok());
  EXPECT_EQ(missing.status().code(), StatusCode::kInput);
  EXPECT_NE(missing.status().message().find("nope.jsonl"), std::string::npos);
  // A read that fails half-way (an I/O error) stops the cut with the error.
  std::string big(100000, 'x');
  std::string c = Write("c.jsonl", big);
  FaultFileSystem faulty(DefaultFileSystem());
  faulty.fail_reads_after = 5000;
  auto broken = CutInputs(&faulty, {c}, CutOptions{2, 0});
  ASSERT_FALSE(broken.ok());
  EXPECT_EQ(broken.status().code(), StatusCode::kInput);
}

TEST_F(CutTest, PartsFileIsWrittenOnceAndGuarded) {
  std::string data = "{\"q\":1}\n{\"q\":2}\n{\"q\":3}\n";
  Plan plan;
  InputSpec in;
  in.path = Write("a.jsonl", data);
  plan.inputs.push_back(in);
  std::string out = (dir_ / "work" / "parts.json").string();
  auto first = CutPlanToFile(DefaultFileSystem(), plan, CutOptions{2, 0}, out, false);
  ASSERT_TRUE(first.ok()) << first.status().message();
  std::ifstream f(out);
  std::string text((std::istreambuf_iterator<char>(f)), std::istreambuf_iterator<char>());
  EXPECT_EQ(text, PartsJson(ToParts(first.value())));
  // The same cut again: nothing changes, no error (a re-run of the job).
  EXPECT_TRUE(CutPlanToFile(DefaultFileSystem(), plan, CutOptions{2, 0}, out, false).ok());
  // Another cut: refused without --overwrite, written with it.
  auto other = CutPlanToFile(DefaultFileSystem(), plan, CutOptions{3, 0}, out, false);
  ASSERT_FALSE(other.ok());
  EXPECT_EQ(other.status().code(), StatusCode::kUsage);
  EXPECT_TRUE(CutPlanToFile(DefaultFileSystem(), plan, CutOptions{3, 0}, out, true).ok());
  // The parts file may not be an input.
  auto onto_input = CutPlanToFile(DefaultFileSystem(), plan, CutOptions{2, 0}, in.path, true);
  ASSERT_FALSE(onto_input.ok());
  EXPECT_EQ(onto_input.status().code(), StatusCode::kUsage);
  // No temporary file is left next to it.
  size_t files = 0;
  for (const auto& e : fs::directory_iterator(dir_ / "work")) files += e.is_regular_file();
  EXPECT_EQ(files, 1u);
}

}  // namespace
}  // namespace prefsift
