// The annotators stage on its own scenario (annotator_scenario.h): planted
// candidates for review, preference cycles and rushed judgments are found
// exactly; good annotators are not flagged on a seed that was not tuned on.
// Seed 1 is the tuning seed; seeds 2 and 3 informed min_shortfall; seeds 5
// and 6 were run once after the last change.
#include <gtest/gtest.h>

#include <map>
#include <set>

#include "annotator_scenario.h"
#include "run_helpers.h"
#include "stages/annotators/annotator_time.h"
#include "stages/annotators/annotators_stage.h"
#include "stats/agreement.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

struct Outcome {
  Json section;
  std::vector<Json> findings, rejects, kept;
};

Outcome RunScenario(const AnnotatorScenario& sc, const std::string& tag, Json settings = Json::object(), unsigned threads = 2,
            uint64_t seed = 11, Json gate = Json::object(), Json* summary = nullptr, std::string* out_dir = nullptr) {
  std::string in = WriteFile("ann_" + tag + ".jsonl", sc.jsonl);
  std::string out = TempPath("ann_out_" + tag);
  Plan plan = PlanFor({in}, sc.layout, out);
  plan.stages["annotators"] = settings;
  plan.seed = seed;
  plan.threads = threads;
  plan.gate = gate;
  PipelineOptions o;
  o.stages = {"annotators"};
  o.table = false;
  auto r = RunPipeline(plan, o, DefaultFileSystem(), stderr);
  EXPECT_TRUE(r.ok()) << r.status().message();
  Outcome oc;
  Json all = Json::parse(ReadFile(out + "/summary.json"));
  oc.section = all["stages"]["annotators"];
  if (summary) *summary = all;
  if (out_dir) *out_dir = out;
  oc.findings = ReadJsonl(out + "/annotator_findings.jsonl");
  oc.rejects = ReadJsonl(out + "/rejects.jsonl");
  oc.kept = ReadJsonl(out + "/" + "kept.jsonl");
  if (oc.kept.empty()) oc.kept = ReadJsonl(out + "/ann_" + tag + ".jsonl");
  return oc;
}

std::set<std::string> Flagged(const Outcome& o) {
  std::set<std::string> s;
  for (const auto& a : o.section["annotators"]["candidates_for_review"]) s.insert(a.get<std::string>());
  return s;
}

std::set<std::string> FindingIds(const Outcome& o, const std::string& kind) {
  std::set<std::string> s;
  for (const auto& f : o.findings) {
    if (f["kind"] != kind) continue;
    if (kind == "cycle") {
      for (const auto& id : f["judgments"]) s.insert(id.get<std::string>());
    } else {
      s.insert(f["id"].get<std::string>());
    }
  }
  return s;
}

void ExpectPlantedFound(uint64_t seed) {
  AnnotatorScenario sc = MakeAnnotatorScenario(seed);
  Outcome o = RunScenario(sc, "planted" + std::to_string(seed));
  const Json& ag = o.section["agreement"];
  // The stage's alpha equals alpha over the generator's own values (which answer
  // was chosen, whatever its slot): the identity mapping is right.
  // D_o and the pairwise rate do not depend on how the answers are labelled
  // within a comparison, so they must equal the figures over the generator's own
  // labels (0 = the better answer). Alpha itself does depend on the labels
  // through D_e (docs/annotators.md: the stage labels by candidate hash order).
  stats::AlphaResult truth = stats::KrippendorffAlphaNominal(sc.units);
  EXPECT_NEAR(ag["observed_disagreement"].get<double>(), truth.observed_disagreement, 1e-6) << "seed " << seed;
  EXPECT_NEAR(ag["expected_disagreement"].get<double>(), 0.5, 0.03);  // a random pick of two: 1 - 1/2
  EXPECT_EQ(ag["comparisons_judged_twice_or_more"].get<uint64_t>(), sc.units.size());
  EXPECT_LT(ag["interval"][0].get<double>(), ag["alpha"].get<double>());
  EXPECT_GT(ag["interval"][1].get<double>(), ag["alpha"].get<double>());
  EXPECT_EQ(Flagged(o), sc.bad_annotators) << o.section["annotators"]["table"].dump();
  EXPECT_EQ(o.section["cycles"]["prompts_with_cycle"].get<size_t>(), sc.cycle_prompts);
  EXPECT_EQ(FindingIds(o, "cycle"), sc.cycle_records);
  EXPECT_EQ(FindingIds(o, "rushed"), sc.rushed_records);
  EXPECT_FALSE(sc.rushed_records.empty());
  std::printf("seed %llu: alpha %.4f [%.4f, %.4f]; flagged %zu; cycles %zu; rushed %zu of %zu planted\n",
              static_cast<unsigned long long>(seed), ag["alpha"].get<double>(), ag["interval"][0].get<double>(),
              ag["interval"][1].get<double>(), Flagged(o).size(), o.section["cycles"]["prompts_with_cycle"].get<size_t>(),
              FindingIds(o, "rushed").size(), sc.rushed_records.size());
  for (const auto& row : o.section["annotators"]["table"]) std::printf("  %s\n", row.dump().c_str());
}

TEST(Annotators, PlantedFoundOnTuningSeed) { ExpectPlantedFound(1); }
TEST(Annotators, PlantedFoundOnUntunedSeed) { ExpectPlantedFound(2); }
// Seeds 2 and 3 led to min_shortfall (docs/annotators.md); seeds 5 and 6 were
// run once after that, with nothing changed.
TEST(Annotators, PlantedFoundOnSeedRunAfterTheLastChange) { ExpectPlantedFound(5); }

TEST(Annotators, GoodAnnotatorsNotFlaggedOnUntunedSeeds) {
  for (uint64_t seed : {2, 3, 6}) {
    AnnotatorScenario sc = MakeAnnotatorScenario(seed, /*bad_annotators=*/false, 600, /*cycles=*/0, 40, /*rushed=*/0.0);
    Outcome o = RunScenario(sc, "clean" + std::to_string(seed));
    EXPECT_TRUE(Flagged(o).empty()) << "seed " << seed << ": " << o.section["annotators"]["table"].dump();
    EXPECT_EQ(o.section["annotators"]["tested"].get<uint64_t>(), 10u);
    EXPECT_EQ(o.section["cycles"]["prompts_with_cycle"].get<uint64_t>(), 0u);
    EXPECT_EQ(o.section["speed"]["rushed"].get<uint64_t>(), 0u);
    std::printf("clean seed %llu: alpha %.4f [%.4f, %.4f]\n", static_cast<unsigned long long>(seed),
                o.section["agreement"]["alpha"].get<double>(), o.section["agreement"]["interval"][0].get<double>(),
                o.section["agreement"]["interval"][1].get<double>());
    for (const auto& row : o.section["annotators"]["table"]) std::printf("  %s\n", row.dump().c_str());
  }
}

TEST(Annotators, DropPolicyRejectsExactlyTheFlaggedAnnotators) {
  AnnotatorScenario sc = MakeAnnotatorScenario(1);
  Outcome o = RunScenario(sc, "drop", Json{{"flagged", "drop"}});
  size_t expected = 0;
  for (const auto& [id, ann] : sc.annotator_of) expected += sc.bad_annotators.count(ann);
  ASSERT_EQ(o.rejects.size(), expected);
  for (const auto& r : o.rejects) {
    EXPECT_EQ(r["reason"], "flagged_annotator");
    EXPECT_EQ(sc.bad_annotators.count(sc.annotator_of.at(r["id"].get<std::string>())), 1u);
  }
  EXPECT_EQ(o.section["annotators"]["dropped"].get<size_t>(), expected);
}

TEST(Annotators, WeightPolicyWritesTheWeightOnlyForFlaggedAnnotators) {
  AnnotatorScenario sc = MakeAnnotatorScenario(1);
  Outcome o = RunScenario(sc, "weight", Json{{"flagged", "weight"}, {"weight_field", "/meta/weight"}});
  EXPECT_TRUE(o.rejects.empty());
  ASSERT_FALSE(o.kept.empty());
  size_t weighted = 0;
  for (const auto& r : o.kept) {
    const bool bad = sc.bad_annotators.count(r["annotator"].get<std::string>()) > 0;
    const Json* w = r.contains("meta") ? &r["meta"]["weight"] : nullptr;
    EXPECT_EQ(w != nullptr, bad) << r.dump();
    if (w) {
      ++weighted;
      EXPECT_GE(w->get<double>(), 0.0);
      EXPECT_LT(w->get<double>(), 1.0);
    }
  }
  EXPECT_EQ(o.section["annotators"]["weighted"].get<size_t>(), weighted);
}

TEST(Annotators, CyclePolicyRejectsTheCycleJudgments) {
  AnnotatorScenario sc = MakeAnnotatorScenario(1);
  Outcome o = RunScenario(sc, "cycles", Json{{"cycles", "reject"}});
  std::set<std::string> ids;
  for (const auto& r : o.rejects) {
    EXPECT_EQ(r["reason"], "intransitive_judgment");
    ids.insert(r["id"].get<std::string>());
  }
  EXPECT_EQ(ids, sc.cycle_records);
}

TEST(Annotators, SameOutputWhateverTheThreads) {
  AnnotatorScenario sc = MakeAnnotatorScenario(4);
  Outcome a = RunScenario(sc, "t1", Json::object(), 1), b = RunScenario(sc, "t4", Json::object(), 4);
  EXPECT_EQ(a.section.dump(), b.section.dump());
  Outcome c = RunScenario(sc, "seed", Json::object(), 2, 12);  // another plan seed: another bootstrap draw
  EXPECT_EQ(a.section["agreement"]["alpha"], c.section["agreement"]["alpha"]);
  EXPECT_NE(a.section["agreement"]["interval"], c.section["agreement"]["interval"]);
}

TEST(Annotators, GateChecksReportAndDatasheet) {
  AnnotatorScenario sc = MakeAnnotatorScenario(1);
  Json summary;
  std::string out;
  RunScenario(sc, "gate", Json::object(), 2, 11, Json{{"min_annotator_alpha", 0.3}, {"max_flagged_annotator_share", 0.05}},
              &summary, &out);
  std::map<std::string, Json> checks;
  for (const auto& c : summary["gate"]["checks"]) checks[c["check"].get<std::string>()] = c;
  ASSERT_EQ(checks.size(), 2u);
  EXPECT_EQ(checks["min_annotator_alpha"]["verdict"], "pass");  // alpha 0.377 >= 0.3
  EXPECT_NEAR(checks["min_annotator_alpha"]["value"].get<double>(), summary["stages"]["annotators"]["agreement"]["alpha"].get<double>(), 1e-6);
  EXPECT_EQ(checks["max_flagged_annotator_share"]["verdict"], "fail");  // about 14% of judgments are by the two
  EXPECT_EQ(summary["gate"]["verdict"], "fail");
  const std::string html = ReadFile(out + "/report.html");
  EXPECT_NE(html.find("<h2 id=\"annotators\">"), std::string::npos);
  EXPECT_NE(html.find("candidates for review"), std::string::npos);
  EXPECT_NE(html.find("<tr class=\"review\"><td>clicker</td>"), std::string::npos);
  EXPECT_EQ(html.find("bad annotator"), std::string::npos);
  const std::string sheet = ReadFile(out + "/datasheet.md");
  const size_t collection = sheet.find("## 3. Collection process");
  ASSERT_NE(collection, std::string::npos);
  EXPECT_NE(sheet.find("Krippendorff's alpha (nominal)", collection), std::string::npos);
  // The stage did not run: the gate says so instead of passing.
  AnnotatorScenario small = MakeAnnotatorScenario(1, true, 30, 0, 0, 0.0);
  std::string in = WriteFile("ann_gate_off.jsonl", small.jsonl);
  Plan plan = PlanFor({in}, small.layout, TempPath("ann_gate_off"));
  plan.gate = Json{{"min_annotator_alpha", 0.3}};
  plan.stages["annotators"] = Json{{"enabled", false}};  // switched off in the plan
  plan.overwrite = true;
  PipelineOptions o;
  o.stages = {"exact", "annotators"};
  o.table = false;
  ASSERT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), stderr).ok());
  Json s2 = Json::parse(ReadFile(TempPath("ann_gate_off") + "/summary.json"));
  EXPECT_EQ(s2["gate"]["checks"][0]["verdict"], "not evaluated");
  // A command that does not run the stage at all skips its checks instead.
  o.stages = {"exact"};
  ASSERT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), stderr).ok());
  s2 = Json::parse(ReadFile(TempPath("ann_gate_off") + "/summary.json"));
  EXPECT_TRUE(s2["gate"]["checks"].empty()) << s2["gate"].dump();
  EXPECT_EQ(s2["gate"]["skipped"][0]["check"], "min_annotator_alpha");
}

// Cycles from the pairwise layout and from rankings (implied pairs, majority per
// pair), worked by hand.
TEST(Annotators, CyclesFromPairwiseAndRankedLayouts) {
  auto run = [](const std::string& tag, const std::string& data, const Json& layout) {
    std::string in = WriteFile("ann_" + tag + ".jsonl", data);
    std::string out = TempPath("ann_out_" + tag);
    Plan plan = PlanFor({in}, layout, out);
    PipelineOptions o;
    o.stages = {"annotators"};
    o.table = false;
    EXPECT_TRUE(RunPipeline(plan, o, DefaultFileSystem(), stderr).ok());
    return Json::parse(ReadFile(out + "/summary.json"))["stages"]["annotators"]["cycles"];
  };
  // Pairwise: mulch over straw, straw over bark, bark over mulch.
  Json pw = run("pw",
                R"({"id":"p1","prompt":"Best cover?","chosen":"Mulch","rejected":"Straw","who":"a"})" "\n"
                R"({"id":"p2","prompt":"Best cover?","chosen":"Straw","rejected":"Bark","who":"b"})" "\n"
                R"({"id":"p3","prompt":"Best cover?","chosen":"Bark","rejected":"Mulch","who":"c"})" "\n"
                R"({"id":"p4","prompt":"Other?","chosen":"Yes","rejected":"No","who":"a"})" "\n",
                Json{{"preset", "pairwise"}, {"annotator", "/who"}});
  EXPECT_EQ(pw["prompts_with_cycle"], 1);
  ASSERT_EQ(pw["listed"].size(), 1u);
  EXPECT_EQ(pw["listed"][0]["judgments"], Json::array({"p1", "p2", "p3"}));
  EXPECT_EQ(pw["listed"][0]["annotators"], Json::array({"a", "b", "c"}));
  // Ranked: r1 ranks A > B > C (implies A>B, A>C, B>C); r2 and r3 put C over A,
  // so the majority on {A, C} is C>A (2 to 1): A>B, B>C, C>A is a cycle. With
  // only r2 the pair {A, C} is tied (no edge) and there is no cycle.
  const std::string r1 = R"({"id":"r1","prompt":"Sow?","candidates":["A","B","C"],"ranks":[1,2,3],"who":"a"})" "\n";
  const std::string r2 = R"({"id":"r2","prompt":"Sow?","candidates":["C","A"],"ranks":[1,2],"who":"b"})" "\n";
  const std::string r3 = R"({"id":"r3","prompt":"Sow?","candidates":["A","C"],"ranks":[2,1],"who":"c"})" "\n";
  Json rk = run("rk", r1 + r2 + r3, Json{{"preset", "ranked"}, {"annotator", "/who"}});
  EXPECT_EQ(rk["prompts_with_cycle"], 1);
  EXPECT_EQ(rk["listed"][0]["candidates_in_cycle"], 3);
  Json tie = run("rk_tie", r1 + r2, Json{{"preset", "ranked"}, {"annotator", "/who"}});
  EXPECT_EQ(tie["prompts_with_cycle"], 0);
}

TEST(Annotators, SettingsErrorsNameTheKey) {
  Plan plan;
  Status err;
  plan.stages["annotators"] = Json{{"flagged", "weight"}};
  EXPECT_EQ(MakeAnnotatorsStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("weight_field"), std::string::npos);
  plan.stages["annotators"] = Json{{"speed", 1}};
  EXPECT_EQ(MakeAnnotatorsStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("\"speed\""), std::string::npos);
  plan.stages["annotators"] = Json{{"confidence", 1.5}};
  EXPECT_EQ(MakeAnnotatorsStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("stages.annotators.confidence"), std::string::npos);
}

// Expected seconds from Python's datetime.fromisoformat(s).timestamp().
TEST(AnnotatorTime, IsoAndNumbers) {
  EXPECT_EQ(*ParseJudgmentTime("1970-01-01T00:00:00Z"), 0.0);
  EXPECT_EQ(*ParseJudgmentTime("2000-02-29T12:34:56Z"), 951827696.0);
  EXPECT_EQ(*ParseJudgmentTime("2026-12-02T19:24:35+00:00"), 1796239475.0);
  EXPECT_EQ(*ParseJudgmentTime("2024-03-10T08:00:00+05:30"), 1710037800.0);
  EXPECT_EQ(*ParseJudgmentTime("1999-12-31 23:59:59-08:00"), 946713599.0);
  EXPECT_NEAR(*ParseJudgmentTime("2000-02-29T12:34:56.25Z"), 951827696.25, 1e-6);
  EXPECT_EQ(*ParseJudgmentTime("1700000000"), 1700000000.0);
  EXPECT_NEAR(*ParseJudgmentTime("1700000000.5"), 1700000000.5, 1e-6);
  EXPECT_FALSE(ParseJudgmentTime("2001-02-29T00:00:00Z"));  // not a leap year
  EXPECT_FALSE(ParseJudgmentTime("yesterday"));
  EXPECT_FALSE(ParseJudgmentTime("2024-03-10T25:00:00Z"));
  EXPECT_FALSE(ParseJudgmentTime(""));
}

}  // namespace
}  // namespace prefsift
