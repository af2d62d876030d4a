// MemoryFileSystem (src/io/memory_file_system.h): its own contract, and the
// same sequence of operations on it and on the real, POSIX file system in a
// scratch folder giving the same outcomes (success or failure, contents,
// listings), which is what lets tests use it in place of temporary files.
#include "io/memory_file_system.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <string>
#include <thread>
#include <vector>

#include "io/file_system.h"

namespace prefsift {
namespace {

Status WriteFile(FileSystem* fs, const std::string& path, const std::string& bytes) {
  auto f = fs->OpenWrite(path);
  if (!f.ok()) return f.status();
  Status s = f.value()->Append(bytes);
  return s.ok() ? f.value()->Close() : s;
}

std::vector<std::string> Names(FileSystem* fs, const std::string& dir) {
  auto r = fs->List(dir);
  return r.ok() ? r.value() : std::vector<std::string>{"<error>"};
}

TEST(MemoryFileSystem, ReadWriteAndVisibility) {
  MemoryFileSystem fs;
  EXPECT_FALSE(fs.OpenWrite("/a/b.txt").ok());  // no folder /a
  ASSERT_TRUE(fs.MakeDir("/a").ok());
  auto w = fs.OpenWrite("/a/b.txt");
  ASSERT_TRUE(w.ok());
  EXPECT_TRUE(fs.Exists("/a/b.txt"));  // created (empty) at open
  ASSERT_TRUE(w.value()->Append("hello ").ok());
  ASSERT_TRUE(w.value()->Append("world").ok());
  std::string seen;
  ASSERT_TRUE(fs.Get("/a/b.txt", &seen));
  EXPECT_EQ(seen, "");  // bytes become visible on Close
  auto early = fs.OpenRead("/a/b.txt");  // a snapshot taken now
  ASSERT_TRUE(w.value()->Close().ok());
  EXPECT_FALSE(w.value()->Append("more").ok());  // closed
  auto all = ReadWholeFile(&fs, "/a/b.txt");
  ASSERT_TRUE(all.ok());
  EXPECT_EQ(all.value(), "hello world");
  char buf[8];
  ASSERT_TRUE(early.ok());
  EXPECT_EQ(early.value()->Read(buf, sizeof buf).value(), 0u);
  // Reading in pieces.
  auto r = fs.OpenRead("/a/b.txt");
  ASSERT_TRUE(r.ok());
  std::string got;
  for (;;) {
    auto n = r.value()->Read(buf, 4);
    ASSERT_TRUE(n.ok());
    if (n.value() == 0) break;
    got.append(buf, n.value());
  }
  EXPECT_EQ(got, "hello world");
  // Errors name the path.
  auto missing = fs.OpenRead("/a/none.txt");
  ASSERT_FALSE(missing.ok());
  EXPECT_NE(missing.status().message().find("/a/none.txt"), std::string::npos);
  auto dir = fs.OpenRead("/a");
  ASSERT_FALSE(dir.ok());
  EXPECT_NE(dir.status().message().find("directory"), std::string::npos);
  EXPECT_FALSE(ReadWholeFile(&fs, "/a").ok());
}

TEST(MemoryFileSystem, FoldersRenameRemoveAndList) {
  MemoryFileSystem fs;
  fs.Put("/s/x/1.txt", "1");  // Put creates the folders
  fs.Put("/s/x/y/2.txt", "2");
  fs.Put("/s/top.txt", "t");
  EXPECT_TRUE(fs.IsDirectory("/s/x/y"));
  EXPECT_FALSE(fs.IsDirectory("/s/top.txt"));
  EXPECT_EQ(Names(&fs, "/s"), (std::vector<std::string>{"top.txt", "x"}));
  EXPECT_EQ(Names(&fs, "/s/x"), (std::vector<std::string>{"1.txt", "y"}));
  EXPECT_EQ(fs.ListFiles("/s/x"), std::vector<std::string>{"1.txt"});
  EXPECT_FALSE(fs.List("/nowhere").ok());
  // A folder moves with everything under it.
  ASSERT_TRUE(fs.Rename("/s/x", "/s/z").ok());
  EXPECT_FALSE(fs.Exists("/s/x"));
  std::string b;
  ASSERT_TRUE(fs.Get("/s/z/y/2.txt", &b));
  EXPECT_EQ(b, "2");
  // Only an empty folder may be replaced; a folder never replaces a file.
  ASSERT_TRUE(fs.MakeDir("/s/empty").ok());
  fs.Put("/s/full/f", "f");
  EXPECT_TRUE(fs.Rename("/s/z", "/s/empty").ok());
  EXPECT_FALSE(fs.Rename("/s/empty", "/s/full").ok());
  EXPECT_FALSE(fs.Rename("/s/empty", "/s/top.txt").ok());
  EXPECT_FALSE(fs.Rename("/s/none", "/s/other").ok());
  // MakeDir over a file fails; RemoveAll takes the tree.
  EXPECT_FALSE(fs.MakeDir("/s/top.txt").ok());
  EXPECT_FALSE(fs.MakeDir("/s/top.txt/sub").ok());
  ASSERT_TRUE(fs.RemoveAll("/s/empty").ok());
  EXPECT_FALSE(fs.Exists("/s/empty/y/2.txt"));
  EXPECT_EQ(Names(&fs, "/s"), (std::vector<std::string>{"full", "top.txt"}));
  EXPECT_TRUE(fs.RemoveAll("/s/never-there").ok());  // like remove_all: not an error
  fs.Clear();
  EXPECT_EQ(fs.AllPaths(), (std::vector<std::string>{".", "/"}));
}

TEST(MemoryFileSystem, ConcurrentWritersOfDistinctFiles) {
  MemoryFileSystem fs;
  ASSERT_TRUE(fs.MakeDir("/t").ok());
  std::vector<std::thread> threads;
  for (int t = 0; t < 4; ++t) {
    threads.emplace_back([&fs, t] {
      for (int i = 0; i < 50; ++i) {
        EXPECT_TRUE(WriteFile(&fs, "/t/" + std::to_string(t) + "_" + std::to_string(i), std::string(100, 'a' + t)).ok());
      }
    });
  }
  for (auto& th : threads) th.join();
  EXPECT_EQ(fs.ListFiles("/t").size(), 200u);
}

// The same operations on both file systems give the same outcomes.
struct Outcome {
  std::vector<bool> ok;
  std::vector<std::string> contents;
  bool operator==(const Outcome&) const = default;
};

Outcome Script(FileSystem* fs, const std::string& root) {
  Outcome o;
  auto note = [&](bool ok) { o.ok.push_back(ok); };
  auto read = [&](const std::string& p) {
    auto r = ReadWholeFile(fs, root + p);
    o.contents.push_back(r.ok() ? r.value() : "<error>");
  };
  note(fs->MakeDir(root + "/a/b").ok());
  note(WriteFile(fs, root + "/a/b/f.txt", "one").ok());
  note(WriteFile(fs, root + "/a/missing/f.txt", "x").ok());
  note(WriteFile(fs, root + "/a/b", "x").ok());  // a folder
  note(WriteFile(fs, root + "/a/b/f.txt", "two").ok());  // replaced
  read("/a/b/f.txt");
  read("/a/b");
  read("/a/none");
  note(fs->Rename(root + "/a/b/f.txt", root + "/a/g.txt").ok());
  note(fs->Rename(root + "/a/b/f.txt", root + "/a/h.txt").ok());  // gone already
  note(fs->MakeDir(root + "/c").ok());
  note(fs->Rename(root + "/a", root + "/c").ok());  // onto an empty folder
  read("/c/g.txt");
  note(fs->MakeDir(root + "/d/e").ok());
  note(WriteFile(fs, root + "/d/e/k", "k").ok());
  note(fs->Rename(root + "/c", root + "/d").ok());  // onto a non-empty folder
  note(fs->Exists(root + "/c/b"));
  note(fs->IsDirectory(root + "/c/b"));
  note(fs->IsDirectory(root + "/c/g.txt"));
  note(fs->MakeDir(root + "/c/g.txt").ok());  // over a file
  note(fs->RemoveAll(root + "/d").ok());
  note(fs->Exists(root + "/d/e/k"));
  note(fs->RemoveAll(root + "/none").ok());
  for (const std::string& n : Names(fs, root)) o.contents.push_back("entry " + n);
  for (const std::string& n : Names(fs, root + "/c")) o.contents.push_back("c entry " + n);
  note(fs->List(root + "/none").ok());
  return o;
}

TEST(MemoryFileSystem, BehavesLikeThePosixOne) {
  const std::string real_root = ::testing::TempDir() + "memfs_compare";
  std::filesystem::remove_all(real_root);
  ASSERT_TRUE(DefaultFileSystem()->MakeDir(real_root).ok());
  MemoryFileSystem mem;
  ASSERT_TRUE(mem.MakeDir("/scratch").ok());
  const Outcome real = Script(DefaultFileSystem(), real_root);
  const Outcome in_memory = Script(&mem, "/scratch");
  EXPECT_EQ(real.ok, in_memory.ok);
  EXPECT_EQ(real.contents, in_memory.contents);
  std::filesystem::remove_all(real_root);
}

}  // namespace
}  // namespace prefsift
