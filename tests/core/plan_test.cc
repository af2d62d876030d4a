#include "core/plan.h"
#include "core/limits.h"

#include <gtest/gtest.h>

#include <nlohmann/json.hpp>

#include "io/memory_file_system.h"

namespace prefsift {
namespace {

// Plan files live in memory, in the folder /plans.
MemoryFileSystem& Files() {
  static MemoryFileSystem fs;
  return fs;
}

std::string WriteTemp(const std::string& name, const std::string& text) {
  std::string path = "/plans/" + name;
  Files().Put(path, text);
  return path;
}

Result<Plan> LoadPlanFile(const std::string& path) { return prefsift::LoadPlanFile(&Files(), path); }

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
  EXPECT_EQ(p.value().inputs[0].path, "/plans/data/x.jsonl");
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

TEST(Plan, UsageErrorsOfStageSettingsGetThePlaceInTheFile) {
  std::string path = WriteTemp("plan_place.json", "{\n  \"stages\": {\n    \"near\": {\"threshold\": 7}\n  }\n}");
  EXPECT_EQ(PlaceInPlanFile(&Files(), path, "stages.near.threshold: must be at most 1"),
            "/plans/plan_place.json:3:14: stages.near.threshold: must be at most 1");
  // Not a key path: unchanged; an unreadable plan file: unchanged.
  EXPECT_EQ(PlaceInPlanFile(&Files(), path, "no key here"), "no key here");
  EXPECT_EQ(PlaceInPlanFile(&Files(), "/plans/missing.json", "stages.near: x"), "stages.near: x");
}

// docs/hardening.md: every limit is settable in the plan and named in its error.
TEST(Plan, LimitsAreSettableAndErrorsNameTheKey) {
  using Json = nlohmann::ordered_json;
  InputLimits lim;
  ASSERT_TRUE(LimitsFromJson(Json{{"max_line_bytes", 100u}, {"max_depth", 10u}, {"max_candidates", 3u},
                                  {"max_text_bytes", 9u}},
                             "p.limits", &lim)
                  .ok());
  EXPECT_EQ(lim.max_line_bytes, 100u);
  EXPECT_EQ(lim.max_depth, 10u);
  EXPECT_EQ(lim.max_candidates, 3u);
  EXPECT_EQ(lim.max_text_bytes, 9u);
  struct Bad { Json j; std::string words; };
  for (const auto& b : std::vector<Bad>{{Json{{"max_depth", 0u}}, "p.limits.max_depth"},
                                        {Json{{"max_depth", 5000u}}, "p.limits.max_depth: at most 1024"},
                                        {Json{{"max_candidates", 1u}}, "p.limits.max_candidates"},
                                        {Json{{"max_text_bytes", -4}}, "p.limits.max_text_bytes"},
                                        {Json{{"max_line_bytes", "1M"}}, "p.limits.max_line_bytes"},
                                        {Json{{"max_lines", 1u}}, "max_lines"},
                                        {Json::array(), "p.limits: must be an object"}}) {
    Status s = LimitsFromJson(b.j, "p.limits", &lim);
    EXPECT_EQ(s.code(), StatusCode::kUsage) << b.j.dump();
    EXPECT_NE(s.message().find(b.words), std::string::npos) << s.message();
  }
}

TEST(Plan, MalformedPlanTextsAreUsageErrorsNotCrashes) {
  // Each a value, never an exception: bad JSON, a non-object, deep nesting
  // (echoed into summary.json later, so refused), wrong types everywhere.
  std::vector<std::string> texts = {
      "", "{", "[]", "null", "{\"inputs\": 3}", "{\"inputs\": [3]}", "{\"inputs\": [{\"path\": 3}]}",
      "{\"inputs\": [{\"path\": \"a\", \"layout\": 7}]}", "{\"layouts\": 3, \"inputs\": [{\"path\": \"a\", \"layout\": \"x\"}]}",
      "{\"seed\": -1}", "{\"threads\": 1.5}", "{\"stages\": []}", "{\"normalize\": {\"strip_punctuation\": 1}}",
      "{\"limits\": {\"max_depth\": 1e400}}", "{\"output\": \"\\ud800\"}",
      "{\"provenance\": " + std::string(100, '[') + std::string(100, ']') + "}",
      "{\"gate\": " + std::string(200000, '[') + std::string(200000, ']') + "}"};
  for (size_t i = 0; i < texts.size(); ++i) {
    auto p = LoadPlanFile(WriteTemp("plan_bad" + std::to_string(i) + ".json", texts[i]));
    EXPECT_FALSE(p.ok()) << texts[i].substr(0, 80);
    EXPECT_EQ(p.status().code(), StatusCode::kUsage) << texts[i].substr(0, 80);
  }
  // A UTF-8 byte-order mark before the plan is skipped (nlohmann does), not an error.
  EXPECT_TRUE(LoadPlanFile(WriteTemp("plan_bom.json", "\xef\xbb\xbf{}")).ok());
}

}  // namespace
}  // namespace prefsift
