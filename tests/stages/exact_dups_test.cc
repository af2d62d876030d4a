#include <gtest/gtest.h>

#include <map>

#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

std::map<std::string, std::string> ReasonsById(const std::string& out) {
  std::map<std::string, std::string> m;
  for (const auto& j : ReadJsonl(&MemoryFiles(), out + "/rejects.jsonl")) m[j["id"].get<std::string>()] = j["reason"];
  return m;
}

Result<RunOutcome> RunStages(Plan plan, std::vector<std::string> stages) {
  PipelineOptions o;
  o.stages = std::move(stages);
  o.table = false;
  return RunPipeline(plan, o, &MemoryFiles(), stderr);
}

const char* kData =
    R"({"id":"a1","prompt":"Sow beans?","candidates":["In May.","In June."],"choice":0})" "\n"
    // same comparison, candidates swapped, same judgment, different case and spacing
    R"({"id":"a2","prompt":"sow  BEANS?","candidates":["in june.","IN MAY."],"choice":1})" "\n"
    // same comparison, other judgment (a 2 vs 1 conflict)
    R"({"id":"a3","prompt":"Sow beans?","candidates":["In May.","In June."],"choice":1})" "\n"
    // same prompt, different candidates: normal, kept
    R"({"id":"b1","prompt":"Sow beans?","candidates":["In May.","Never."],"choice":0})" "\n"
    // a 1 vs 1 conflict: no majority
    R"({"id":"c1","prompt":"Water?","candidates":["Daily","Weekly"],"choice":0})" "\n"
    R"({"id":"c2","prompt":"Water?","candidates":["Daily","Weekly"],"choice":1})" "\n"
    // degenerate: identical after normalisation (full-width letters), one preferred
    "{\"id\":\"d1\",\"prompt\":\"Soil?\",\"candidates\":[\"Loam\",\"\xEF\xBC\xAC\xEF\xBD\x8F\xEF\xBD\x81\xEF\xBD\x8D\"],\"choice\":0}\n";

TEST(ExactDups, KeepMajorityPolicy) {
  std::string in = WriteFile(&MemoryFiles(), "exact_in.jsonl", kData);
  std::string out = TempPath("exact_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  auto r = RunStages(plan, {"exact"});
  ASSERT_TRUE(r.ok()) << r.status().message();
  auto reasons = ReasonsById(out);
  EXPECT_EQ(reasons["a2"], "duplicate_comparison");
  EXPECT_EQ(reasons["a3"], "label_conflict_minority");
  EXPECT_EQ(reasons["c1"], "label_conflict_no_majority");
  EXPECT_EQ(reasons["c2"], "label_conflict_no_majority");
  EXPECT_EQ(reasons["d1"], "degenerate_comparison");
  EXPECT_EQ(reasons.count("a1"), 0u);
  EXPECT_EQ(reasons.count("b1"), 0u);
  auto summary = Json::parse(ReadFile(&MemoryFiles(), out + "/summary.json"));
  const Json& ex = summary["stages"]["exact"];
  EXPECT_EQ(ex["label_conflicts"]["comparisons"], 2);
  // Pairs of judgments: group a has 3 records (3 pairs, 1 agreeing), group c has 2 (1 pair, 0 agreeing): 1/4.
  EXPECT_DOUBLE_EQ(ex["agreement"]["pairwise_agreement_rate"].get<double>(), 0.25);
  EXPECT_TRUE(summary["ledger"]["balanced"].get<bool>());
  EXPECT_EQ(ReadJsonl(&MemoryFiles(), out + "/conflicts.jsonl").size(), 2u);
}

TEST(ExactDups, DropAllAndKeepAll) {
  std::string in = WriteFile(&MemoryFiles(), "exact_in2.jsonl", kData);
  std::string out = TempPath("exact_out2");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["exact"] = Json{{"conflicts", "drop-all"}};
  ASSERT_TRUE(RunStages(plan, {"exact"}).ok());
  auto reasons = ReasonsById(out);
  EXPECT_EQ(reasons["a1"], "label_conflict_dropped");
  EXPECT_EQ(reasons["a3"], "label_conflict_dropped");
  plan.stages["exact"] = Json{{"conflicts", "keep-all"}};
  ASSERT_TRUE(RunStages(plan, {"exact"}).ok());
  reasons = ReasonsById(out);
  EXPECT_EQ(reasons.count("a1"), 0u);
  EXPECT_EQ(reasons.count("a3"), 0u);
  EXPECT_EQ(reasons["a2"], "duplicate_comparison");
  EXPECT_EQ(reasons.count("c2"), 0u);
  plan.stages["exact"] = Json{{"conflicts", "vote"}};
  auto bad = RunStages(plan, {"exact"});
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.status().code(), StatusCode::kUsage);
}

TEST(ExactDups, TiedIdenticalCandidatesAreNotDegenerate) {
  std::string in = WriteFile(&MemoryFiles(), "exact_rank.jsonl",
                             R"({"id":"e1","prompt":"Pots?","candidates":["Clay","clay","Plastic"],"ranks":[1,1,3]})" "\n"
                             R"({"id":"e2","prompt":"Pots?","candidates":["Clay","clay","Plastic"],"ranks":[1,2,3]})" "\n");
  std::string out = TempPath("exact_rank_out");
  ASSERT_TRUE(RunStages(PlanFor({in}, Json{{"preset", "ranked"}}, out), {"exact"}).ok());
  auto reasons = ReasonsById(out);
  EXPECT_EQ(reasons.count("e1"), 0u);
  EXPECT_EQ(reasons["e2"], "degenerate_comparison");
}

}  // namespace
}  // namespace prefsift
