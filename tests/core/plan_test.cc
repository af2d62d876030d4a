#include "core/plan.h"

#include <gtest/gtest.h>

#include <fstream>

namespace prefsift {
namespace {

std::string WriteTemp(const std::string& name, const std::string& text) {
  std::string path = ::testing::TempDir() + name;
  std::ofstream(path) << text;
  return path;
}

TEST(Plan, CommentsRelativePathsAndNamedLayouts) {
  std::string path = WriteTemp("plan_ok.json", R"({
    // a comment
    "layouts": {"mine": {"prompt": "/q", "candidates": "/a", "choice": "/c"}},
    "inputs": [{"path": "data/x.jsonl", "layout": "mine"}, {"path": "/abs/y.jsonl.gz", "layout": "pairwise"}],
    "output": "out", /* another */ "seed": 9
  })");
  auto p = LoadPlanFile(path);
  ASSERT_TRUE(p.ok()) << p.status().message();
  EXPECT_EQ(p.value().inputs.size(), 2u);
  EXPECT_EQ(p.value().inputs[0].path, ::testing::TempDir() + "data/x.jsonl");
  EXPECT_EQ(p.value().inputs[0].name, "x");
  EXPECT_EQ(p.value().inputs[1].name, "y");
  EXPECT_EQ(p.value().seed, 9u);
  EXPECT_EQ(p.value().plan_digest.size(), 64u);
}

TEST(Plan, ErrorsNameFileLineAndKey) {
  auto bad = LoadPlanFile(WriteTemp("plan_bad.json", "{\n  \"inputs\": [\n  ,]\n}"));
  ASSERT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("plan_bad.json:3:"), std::string::npos) << bad.status().message();
  auto unknown = LoadPlanFile(WriteTemp("plan_unknown.json", R"({"inptus": []})"));
  ASSERT_FALSE(unknown.ok());
  EXPECT_NE(unknown.status().message().find("inptus"), std::string::npos);
  auto same = LoadPlanFile(WriteTemp("plan_same.json",
      R"({"inputs": [{"path": "a/x.jsonl", "layout": "pairwise"}, {"path": "b/x.jsonl", "layout": "pairwise"}]})"));
  ASSERT_FALSE(same.ok());
  EXPECT_NE(same.status().message().find("distinct"), std::string::npos);
  EXPECT_FALSE(LoadPlanFile("/nonexistent/plan.json").ok());
}

}  // namespace
}  // namespace prefsift
