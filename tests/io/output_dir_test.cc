#include "io/output_dir.h"

#include <gtest/gtest.h>

#include "fault_fs.h"
#include "io/memory_file_system.h"

namespace prefsift {
namespace {

// Every test runs on files in memory: the output folder is /work/out.

std::string Content(MemoryFileSystem& fs, const std::string& path) {
  std::string bytes;
  EXPECT_TRUE(fs.Get(path, &bytes)) << path;
  return bytes;
}

TEST(OutputDir, AppearsOnlyOnCommit) {
  MemoryFileSystem fs;
  const std::string dir = "/work/out";
  ASSERT_TRUE(fs.MakeDir("/work").ok());
  {
    auto out = OutputDir::Begin(&fs, dir, false);
    ASSERT_TRUE(out.ok());
    auto f = out.value()->Create("a.jsonl");
    ASSERT_TRUE(f.ok());
    ASSERT_TRUE(f.value()->Append("x\n").ok());
    ASSERT_TRUE(f.value()->Close().ok());
    EXPECT_FALSE(fs.Exists(dir));
    ASSERT_TRUE(out.value()->Commit().ok());
  }
  EXPECT_EQ(Content(fs, dir + "/a.jsonl"), "x\n");
  EXPECT_EQ(fs.AllPaths(), (std::vector<std::string>{".", "/", "/work", "/work/out", "/work/out/a.jsonl"}));
}

TEST(OutputDir, FailedRunLeavesNothingAndKeepsExisting) {
  MemoryFileSystem fs;
  const std::string dir = "/work/out";
  fs.Put(dir + "/old.txt", "old");
  EXPECT_FALSE(OutputDir::Begin(&fs, dir, false).ok());  // never overwritten unasked
  {
    auto out = OutputDir::Begin(&fs, dir, true);
    ASSERT_TRUE(out.ok());
    auto f = out.value()->Create("new.txt");
    ASSERT_TRUE(f.ok());
    // destroyed without Commit: a failed run
  }
  EXPECT_EQ(Content(fs, dir + "/old.txt"), "old");
  EXPECT_FALSE(fs.Exists(dir + "/new.txt"));
  // No staging folder left beside it.
  EXPECT_EQ(fs.AllPaths(), (std::vector<std::string>{".", "/", "/work", "/work/out", "/work/out/old.txt"}));
}

TEST(OutputDir, OverwriteReplacesWhole) {
  MemoryFileSystem fs;
  const std::string dir = "/work/out";
  fs.Put(dir + "/old.txt", "old");
  auto out = OutputDir::Begin(&fs, dir, true);
  ASSERT_TRUE(out.ok());
  auto f = out.value()->Create("new.txt");
  ASSERT_TRUE(f.value()->Close().ok());
  ASSERT_TRUE(out.value()->Commit().ok());
  EXPECT_TRUE(fs.Exists(dir + "/new.txt"));
  EXPECT_FALSE(fs.Exists(dir + "/old.txt"));
  auto left = fs.List("/work");  // the old folder set aside is gone
  ASSERT_TRUE(left.ok());
  EXPECT_EQ(left.value(), std::vector<std::string>{"out"});
}

TEST(OutputDir, AnExistingFileIsNeverReplaced) {
  MemoryFileSystem fs;
  fs.Put("/work/out", "a file");
  auto out = OutputDir::Begin(&fs, "/work/out", true);
  ASSERT_FALSE(out.ok());
  EXPECT_EQ(out.status().code(), StatusCode::kUsage);
  EXPECT_EQ(Content(fs, "/work/out"), "a file");
}

TEST(OutputDir, InjectedDiskFullIsAnError) {
  MemoryFileSystem mem;
  FaultFileSystem ffs(&mem);
  ffs.fail_writes_after = 5;
  auto out = OutputDir::Begin(&ffs, "/work/out", false);
  ASSERT_TRUE(out.ok());
  auto f = out.value()->Create("a.jsonl");
  ASSERT_TRUE(f.ok());
  Status s = f.value()->Append("0123456789");
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("No space"), std::string::npos);
}

TEST(WriteFileAtomically, WritesAndFailsClean) {
  MemoryFileSystem mem;
  const std::string path = "/work/atomic.txt";
  ASSERT_TRUE(mem.MakeDir("/work").ok());
  ASSERT_TRUE(WriteFileAtomically(&mem, path, "hello").ok());
  EXPECT_EQ(Content(mem, path), "hello");
  FaultFileSystem ffs(&mem);
  ffs.fail_writes_after = 0;
  EXPECT_FALSE(WriteFileAtomically(&ffs, path, "changed").ok());
  EXPECT_EQ(Content(mem, path), "hello");
  EXPECT_EQ(mem.ListFiles("/work"), std::vector<std::string>{"atomic.txt"});  // no temporary file left
}

TEST(WriteFileAtomically, OnTheRealFileSystem) {
  const std::string path = ::testing::TempDir() + "atomic.txt";
  ASSERT_TRUE(WriteFileAtomically(DefaultFileSystem(), path, "hello").ok());
  auto read = ReadWholeFile(DefaultFileSystem(), path);
  ASSERT_TRUE(read.ok());
  EXPECT_EQ(read.value(), "hello");
}

}  // namespace
}  // namespace prefsift
