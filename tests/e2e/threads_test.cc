// Thread count never changes results: the whole pipeline with every stage on,
// run with --threads 1 and --threads 3, must write byte-identical files
// (the determinism rule of the project brief; docs/performance.md).
#include <gtest/gtest.h>
#include <unistd.h>

#include <algorithm>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include "e2e/e2e_helpers.h"

namespace prefsift::e2e {
namespace {

// Every regular file under `dir`, relative paths, sorted.
std::vector<std::string> FilesUnder(const std::string& dir) {
  std::vector<std::string> out;
  for (const auto& e : std::filesystem::recursive_directory_iterator(dir)) {
    if (e.is_regular_file()) out.push_back(std::filesystem::relative(e.path(), dir).string());
  }
  std::sort(out.begin(), out.end());
  return out;
}

void RunTwiceAndCompare(const std::string& plan, const std::string& tag) {
  std::string base = ::testing::TempDir() + "prefsift-threads-" + tag + "-" + std::to_string(::getpid());
  std::string outs[2] = {base + "-t1", base + "-t3"};
  const char* threads[2] = {"1", "3"};
  for (int i = 0; i < 2; ++i) {
    std::string log;
    int rc = Shell(std::string("SOURCE_DATE_EPOCH=1775000000 ") + PREFSIFT_BINARY + " run --plan " + plan +
                       " --out " + outs[i] + " --overwrite -q --threads " + threads[i],
                   &log);
    ASSERT_TRUE(rc == 0 || rc == 4) << "run with --threads " << threads[i] << " failed with exit " << rc << ":\n" << log;
  }
  std::vector<std::string> files = FilesUnder(outs[0]);
  ASSERT_EQ(files, FilesUnder(outs[1]));
  ASSERT_FALSE(files.empty());
  for (const auto& f : files) {
    EXPECT_TRUE(ReadFile(outs[0] + "/" + f) == ReadFile(outs[1] + "/" + f)) << tag << ": " << f << " differs";
  }
  std::filesystem::remove_all(outs[0]);
  std::filesystem::remove_all(outs[1]);
}

TEST(Threads, DemoPlanSameOutputsWithOneAndThreeThreads) {
  RunTwiceAndCompare(SourceDir() + "/samples/demo-plan.json", "demo");
}

// Several 1024-line chunks (9,000 lines: nine chunks), with planted duplicates, near-duplicates, leaks and
// fake personal data (example.com, 192.0.2.0/24), every stage on.
TEST(Threads, ManyChunksSameOutputsWithOneAndThreeThreads) {
  std::string dir = ::testing::TempDir() + "prefsift-threads-data-" + std::to_string(::getpid());
  std::filesystem::create_directories(dir);
  const char* words[] = {"seed", "tomato", "frost", "compost", "bean", "water", "leaf", "garden", "soil", "root",
                         "sun", "rain", "pot", "tray", "bed", "shade", "weed", "slug", "pea", "kale"};
  auto text = [&](uint32_t x, int n) {
    std::string s;
    for (int k = 0; k < n; ++k) {
      x = x * 1103515245u + 12345u;
      if (k) s += ' ';
      s += words[(x >> 16) % 20];
    }
    return s;
  };
  {
    std::ofstream eval(dir + "/eval.jsonl");
    for (int q = 0; q < 50; ++q) eval << R"({"qid":"q)" << q << R"(","question":")" << text(900000 + q, 25) << "\"}\n";
    std::ofstream data(dir + "/data.jsonl");
    for (int i = 0; i < 9000; ++i) {
      std::string prompt = i % 50 == 7    ? text(900000 + (i / 50) % 50, 25)       // leaked evaluation question
                           : i % 20 == 3  ? text(i - 3, 30) + " " + words[i % 20]  // near copy of an earlier prompt
                           : i % 25 == 11 ? text(i - 11, 30)                       // exact duplicate prompt
                                          : text(i, 30);
      std::string a = text(i * 7 + 1, 40), b = text(i * 7 + 2, 35), c = text(i * 7 + 3, 20);
      if (i % 30 == 5) a += " write to member" + std::to_string(i) + "@example.com";
      if (i % 45 == 9) b += " the kiosk at 192.0.2." + std::to_string(1 + i % 200) + " logged it";
      data << R"({"id":"r)" << i << R"(","prompt":")" << prompt << R"(","candidates":[")" << a << R"(",")" << b;
      if (i % 3 == 0) data << R"(",")" << c;
      data << R"("],"choice":)" << (i % (i % 3 == 0 ? 3 : 2)) << R"(,"annotator":"a)" << i % 17
           << R"(","source":"s)" << i % 4 << R"(","thread":"t)" << i / 3 << "\"}\n";
    }
    std::ofstream plan(dir + "/plan.json");
    plan << R"({"inputs": [{"path": "data.jsonl", "layout": {"preset": "choice", "annotator": "/annotator",
                 "source": "/source", "thread": "/thread"}}],
  "seed": 3,
  "stages": {"exact": {}, "near": {},
             "leakage": {"eval_sets": [{"name": "eval", "path": "eval.jsonl", "text": "/question", "id": "/qid"}]},
             "screen": {"action": "mask", "rules_dir": ")"
         << SourceDir() << R"(/rules"},
             "bias": {}, "split": {"splits": {"train": 0.8, "test": 0.2}}}})";
  }
  RunTwiceAndCompare(dir + "/plan.json", "chunks");
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace prefsift::e2e
