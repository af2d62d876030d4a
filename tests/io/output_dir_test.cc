#include "io/output_dir.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <fstream>

#include "fault_fs.h"

namespace prefsift {
namespace {

namespace fs = std::filesystem;

TEST(OutputDir, AppearsOnlyOnCommit) {
  std::string dir = ::testing::TempDir() + "outdir_commit";
  fs::remove_all(dir);
  {
    auto out = OutputDir::Begin(DefaultFileSystem(), dir, false);
    ASSERT_TRUE(out.ok());
    auto f = out.value()->Create("a.jsonl");
    ASSERT_TRUE(f.ok());
    ASSERT_TRUE(f.value()->Append("x\n").ok());
    ASSERT_TRUE(f.value()->Close().ok());
    EXPECT_FALSE(fs::exists(dir));
    ASSERT_TRUE(out.value()->Commit().ok());
  }
  EXPECT_TRUE(fs::exists(dir + "/a.jsonl"));
}

TEST(OutputDir, FailedRunLeavesNothingAndKeepsExisting) {
  std::string dir = ::testing::TempDir() + "outdir_keep";
  fs::remove_all(dir);
  fs::create_directories(dir);
  std::ofstream(dir + "/old.txt") << "old";
  EXPECT_FALSE(OutputDir::Begin(DefaultFileSystem(), dir, false).ok());  // never overwritten unasked
  {
    auto out = OutputDir::Begin(DefaultFileSystem(), dir, true);
    ASSERT_TRUE(out.ok());
    auto f = out.value()->Create("new.txt");
    ASSERT_TRUE(f.ok());
    // destroyed without Commit: a failed run
  }
  EXPECT_TRUE(fs::exists(dir + "/old.txt"));
  EXPECT_FALSE(fs::exists(dir + "/new.txt"));
  for (auto& e : fs::directory_iterator(::testing::TempDir())) {
    EXPECT_EQ(e.path().filename().string().find("outdir_keep.partial"), std::string::npos);
  }
}

TEST(OutputDir, OverwriteReplacesWhole) {
  std::string dir = ::testing::TempDir() + "outdir_replace";
  fs::remove_all(dir);
  fs::create_directories(dir);
  std::ofstream(dir + "/old.txt") << "old";
  auto out = OutputDir::Begin(DefaultFileSystem(), dir, true);
  ASSERT_TRUE(out.ok());
  auto f = out.value()->Create("new.txt");
  ASSERT_TRUE(f.value()->Close().ok());
  ASSERT_TRUE(out.value()->Commit().ok());
  EXPECT_TRUE(fs::exists(dir + "/new.txt"));
  EXPECT_FALSE(fs::exists(dir + "/old.txt"));
}

TEST(OutputDir, InjectedDiskFullIsAnError) {
  FaultFileSystem ffs(DefaultFileSystem());
  ffs.fail_writes_after = 5;
  std::string dir = ::testing::TempDir() + "outdir_full";
  fs::remove_all(dir);
  auto out = OutputDir::Begin(&ffs, dir, false);
  ASSERT_TRUE(out.ok());
  auto f = out.value()->Create("a.jsonl");
  ASSERT_TRUE(f.ok());
  Status s = f.value()->Append("0123456789");
  EXPECT_FALSE(s.ok());
  EXPECT_NE(s.message().find("No space"), std::string::npos);
}

TEST(WriteFileAtomically, WritesAndFailsClean) {
  std::string path = ::testing::TempDir() + "atomic.txt";
  ASSERT_TRUE(WriteFileAtomically(DefaultFileSystem(), path, "hello").ok());
  std::ifstream in(path);
  std::string s;
  in >> s;
  EXPECT_EQ(s, "hello");
  FaultFileSystem ffs(DefaultFileSystem());
  ffs.fail_writes_after = 0;
  EXPECT_FALSE(WriteFileAtomically(&ffs, path, "changed").ok());
  std::ifstream in2(path);
  in2 >> s;
  EXPECT_EQ(s, "hello");
}

}  // namespace
}  // namespace prefsift
