// observe / decide / apply over parts (issue 20, items 1-2): the parts' split
// files and rejects, concatenated in part order, are the files of `run`; the
// stages' own files are the same; summary.json differs only in its provenance
// (which lists the files each folder holds); the gate verdict is the same.
// For 1, 2 and 5 parts, one of them holding no lines.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <stdlib.h>

#include <filesystem>

#include "pipeline/part_commands.h"
#include "parts_helpers.h"
#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;
namespace fs = std::filesystem;

std::vector<std::string> JsonlFiles(const std::string& dir) {
  std::vector<std::string> names;
  for (const auto& e : fs::directory_iterator(dir)) {
    const std::string name = e.path().filename().string();
    if (name.size() > 6 && name.substr(name.size() - 6) == ".jsonl") names.push_back(name);
  }
  std::sort(names.begin(), names.end());
  return names;
}

// Runs the plan whole, then as observe / decide / apply over `parts`, and
// compares every file.
void ExpectPartsMatchRun(Plan plan, const std::vector<Part>& parts, const std::string& tag) {
  ::setenv("SOURCE_DATE_EPOCH", "1780000000", 1);  // byte-identical provenance times
  const std::string whole = TempPath(tag + "_run");
  plan.output = whole;
  PipelineOptions opts;
  opts.stages = AllStageNames();
  opts.table = false;
  auto ran = RunPipeline(plan, opts, DefaultFileSystem(), stderr);
  ASSERT_TRUE(ran.ok()) << ran.status().message();

  std::vector<std::string> states;
  for (const Part& p : parts) {
    states.push_back(TempPath(tag + "_part" + std::to_string(p.part) + ".state"));
    Status s = ObservePartToFile(plan, opts.stages, p, DefaultFileSystem(), states.back());
    ASSERT_TRUE(s.ok()) << s.message();
  }
  const std::string decided = TempPath(tag + "_decided");
  plan.output = decided;
  auto dec = DecideFromStates(plan, opts, states, DefaultFileSystem(), stderr);
  ASSERT_TRUE(dec.ok()) << dec.status().message();
  EXPECT_EQ(dec.value().gate_failed, ran.value().gate_failed);
  EXPECT_EQ(dec.value().kept, ran.value().kept);
  EXPECT_EQ(dec.value().rejected, ran.value().rejected);
  EXPECT_EQ(dec.value().blank_lines, ran.value().blank_lines);

  std::vector<std::string> part_dirs;
  for (const Part& p : parts) {
    part_dirs.push_back(TempPath(tag + "_apply" + std::to_string(p.part)));
    plan.output = part_dirs.back();
    auto applied = ApplyPart(plan, opts.stages, p, decided + "/" + DecisionFileName(p.part), DefaultFileSystem());
    ASSERT_TRUE(applied.ok()) << applied.status().message();
  }

  // Split files and rejects: concatenated in part order.
  size_t compared = 0;
  for (const auto& name : JsonlFiles(part_dirs[0])) {
    std::string joined;
    for (const auto& d : part_dirs) joined += ReadFile(d + "/" + name);
    EXPECT_EQ(joined, ReadFile(whole + "/" + name)) << name;
    ++compared;
  }
  EXPECT_GE(compared, 4u);  // rejects and three splits at least
  // The stages' own files: as decide wrote them.
  for (const auto& name : JsonlFiles(decided)) {
    EXPECT_EQ(ReadFile(decided + "/" + name), ReadFile(whole + "/" + name)) << name;
    ++compared;
  }
  EXPECT_EQ(JsonlFiles(whole).size(), compared);
  // summary.json: equal but for the provenance's list of output files.
  Json a = Json::parse(ReadFile(whole + "/summary.json"));
  Json b = Json::parse(ReadFile(decided + "/summary.json"));
  for (Json* j : {&a, &b}) {
    (*j)["provenance"].erase("outputs");
    (*j)["provenance"].erase("parts");
  }
  EXPECT_EQ(a.dump(1), b.dump(1));
  ::unsetenv("SOURCE_DATE_EPOCH");
}

Plan RewritingPlan(const Generated& g) {
  Plan plan = QuaysidePlan(g);
  // Both rewrites of pass 2 take part: the screen masks (and drops), bias reorders candidates.
  plan.stages["screen"] = Json{{"action", "mask"}};
  plan.stages["bias"]["position"]["rebalance"] = true;
  return plan;
}

TEST(PartCommands, OnePartMatchesRun) {
  Generated g = MakeQuaysideInput(20260420, 400);
  Plan plan = RewritingPlan(g);
  ExpectPartsMatchRun(plan, CutAt(plan, {}), "pc1");
}

TEST(PartCommands, TwoPartsMatchRun) {
  Generated g = MakeQuaysideInput(20260421, 700);
  Plan plan = RewritingPlan(g);
  ExpectPartsMatchRun(plan, CutAt(plan, {0.5}), "pc2");
}

TEST(PartCommands, FivePartsWithAnEmptyOneMatchRun) {
  Generated g = MakeQuaysideInput(20260422, 700);
  Plan plan = RewritingPlan(g);
  std::vector<Part> parts = CutAt(plan, {0.1, 0.5, 0.5, 0.9});
  ASSERT_EQ(parts.size(), 5u);
  ASSERT_EQ(parts[2].begin, *parts[2].end);
  ExpectPartsMatchRun(plan, parts, "pc5");
}

TEST(PartCommands, SamplesInPartsMatchRun) {
  auto loaded = LoadPlanFile(std::string(PREFSIFT_TEST_SOURCE_DIR) + "/samples/demo-plan.json");
  ASSERT_TRUE(loaded.ok()) << loaded.status().message();
  Plan plan = loaded.value();
  plan.overwrite = true;
  // Three inputs in three layouts: six parts, a pairwise one empty.
  std::vector<Part> parts = CutAt(plan, {0.5});
  ExpectPartsMatchRun(plan, parts, "pcs");
}

TEST(PartCommands, AWrongDecisionFileIsRefused) {
  Generated g = MakeQuaysideInput(20260423, 120);
  Plan plan = RewritingPlan(g);
  std::vector<Part> parts = CutAt(plan, {0.5});
  const std::vector<std::string> stages = AllStageNames();
  std::vector<std::string> states;
  for (const Part& p : parts) {
    states.push_back(TempPath("wrong_part" + std::to_string(p.part) + ".state"));
    ASSERT_TRUE(ObservePartToFile(plan, stages, p, DefaultFileSystem(), states.back()).ok());
  }
  plan.output = TempPath("wrong_decided");
  PipelineOptions opts;
  opts.stages = stages;
  opts.table = false;
  ASSERT_TRUE(DecideFromStates(plan, opts, states, DefaultFileSystem(), stderr).ok());
  const std::string decided = plan.output;
  plan.output = TempPath("wrong_apply");
  // Part 1's decisions given for part 0.
  auto r = ApplyPart(plan, stages, parts[0], decided + "/" + DecisionFileName(1), DefaultFileSystem());
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("is for part 1"), std::string::npos) << r.status().message();
  EXPECT_FALSE(fs::exists(plan.output));
  // A state file missing: decide refuses before writing anything.
  plan.output = TempPath("wrong_decided2");
  auto d = DecideFromStates(plan, opts, {states[0]}, DefaultFileSystem(), stderr);
  ASSERT_FALSE(d.ok());
  EXPECT_FALSE(fs::exists(plan.output));
}

}  // namespace
}  // namespace prefsift
