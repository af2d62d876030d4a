// Split stage, gate and documents: group integrity, stability when data is
// added, realised fractions, gate verdicts, byte-identical reruns.
#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <random>
#include <set>
#include <vector>

#include "report/datasheet.h"
#include "report/gate.h"
#include "run_helpers.h"
#include "stages/split/split_stage.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;
using testing::PlanFor;
using testing::ReadFile;
using testing::ReadJsonl;
using testing::TempPath;
using testing::WriteFile;

const Json kLayout = Json{{"id", "/id"}, {"prompt", "/q"}, {"candidates", "/a"}, {"choice", "/pick"},
                          {"thread", "/thread"}, {"source", "/src"}, {"annotator", "/who"}};

std::string Line(const std::string& id, const std::string& q, const std::string& thread, int pick = 0,
                 const std::string& src = "web") {
  Json j{{"id", id}, {"q", q}, {"a", {"answer one for " + q, "answer two for " + q}}, {"pick", pick},
         {"src", src}, {"who", "w" + std::to_string(id.size() % 3)}};
  if (!thread.empty()) j["thread"] = thread;
  return j.dump() + "\n";
}

// n records: prompt k is "question number k about topic ...", thread every 3 records.
std::string Corpus(int from, int to, bool threads = true) {
  std::string s;
  for (int k = from; k < to; ++k) {
    s += Line("r" + std::to_string(k), "question number " + std::to_string(k) + " about seeds and soil",
              threads ? "t" + std::to_string(k / 3) : "", k % 2);
  }
  return s;
}

struct RunResult {
  Json summary;
  std::map<std::string, std::string> split_of;  // id -> split
  std::map<std::string, std::string> group_of;  // id -> group key
  int rc_gate = 0;
};

RunResult RunSplit(const std::string& name, const std::string& data, Json split_settings = Json::object(),
              std::vector<std::string> stages = {"split"}, Json gate = Json::object()) {
  std::string in = WriteFile(name + ".jsonl", data);
  Plan plan = PlanFor({in}, kLayout, TempPath(name + "-out"));
  if (!split_settings.empty()) plan.stages["split"] = split_settings;
  plan.gate = gate;
  PipelineOptions opts;
  opts.stages = stages;
  opts.table = false;
  auto r = RunPipeline(plan, opts, DefaultFileSystem(), stderr);
  EXPECT_TRUE(r.ok()) << r.status().message();
  RunResult out;
  if (!r.ok()) return out;
  out.rc_gate = r.value().gate_failed;
  out.summary = Json::parse(ReadFile(plan.output + "/summary.json"));
  for (const auto& j : ReadJsonl(plan.output + "/assignments.jsonl")) {
    out.split_of[j["id"]] = j["split"];
    out.group_of[j["id"]] = j["group"];
  }
  return out;
}

TEST(Splits, NoGroupSpansTwoSplitsAndFilesMatchAssignments) {
  RunResult r = RunSplit("span", Corpus(0, 600));
  const Json& sp = r.summary["stages"]["split"];
  EXPECT_EQ(sp["checks"]["groups_spanning_splits"], 0);
  EXPECT_EQ(sp["checks"]["prompts_split_apart"], 0);
  // Independent check from the per-record assignments: one split per group and per thread.
  std::map<std::string, std::set<std::string>> by_group, by_thread;
  for (const auto& [id, split] : r.split_of) {
    by_group[r.group_of[id]].insert(split);
    by_thread["t" + std::to_string(std::stoi(id.substr(1)) / 3)].insert(split);
  }
  for (const auto& [g, s] : by_group) EXPECT_EQ(s.size(), 1u) << g;
  for (const auto& [t, s] : by_thread) EXPECT_EQ(s.size(), 1u) << t;
  EXPECT_EQ(by_thread.size(), 200u);
  // The split files hold exactly the assigned records.
  std::string out = TempPath("span-out");
  size_t total = 0;
  for (const char* name : {"train", "valid", "test"}) {
    for (const auto& j : ReadJsonl(out + "/" + name + ".jsonl")) {
      EXPECT_EQ(r.split_of[j["id"]], name);
      ++total;
    }
  }
  EXPECT_EQ(total, 600u);
}

TEST(Splits, SamePromptStaysTogetherEvenWithoutThreads) {
  std::string data;
  for (int k = 0; k < 200; ++k) {
    // Each prompt appears twice, with different candidates (not exact duplicates).
    std::string q = "shared prompt " + std::to_string(k % 100);
    data += Line("p" + std::to_string(k), q, "", k % 2);
  }
  RunResult r = RunSplit("prompt", data, Json{{"tie_by", {"prompt"}}});
  for (int k = 0; k < 100; ++k) {
    EXPECT_EQ(r.split_of["p" + std::to_string(k)], r.split_of["p" + std::to_string(k + 100)]);
  }
  EXPECT_EQ(r.summary["stages"]["split"]["groups"]["count"], 100);
}

// Stability: adding records keeps existing records' splits unless their group
// gained a member with a smaller key (then the whole group moves together).
TEST(Splits, AddingRecordsKeepsExistingSplits) {
  RunResult before = RunSplit("stable-a", Corpus(0, 900));
  // Extra data: 300 new records in new threads, plus 30 records that join
  // existing threads (t0..t29), interleaved at the front to change input order.
  std::string extra;
  for (int k = 0; k < 30; ++k) extra += Line("j" + std::to_string(k), "late follow-up " + std::to_string(k), "t" + std::to_string(k));
  RunResult after = RunSplit("stable-b", extra + Corpus(900, 1200) + Corpus(0, 900),
                        Json{{"previous", TempPath("stable-a-out") + "/assignments.jsonl"}});
  std::set<std::string> joined_threads;
  for (int k = 0; k < 30; ++k) joined_threads.insert("t" + std::to_string(k));
  int moved = 0, moved_unexplained = 0;
  for (const auto& [id, split] : before.split_of) {
    ASSERT_TRUE(after.split_of.count(id)) << id;
    if (after.split_of[id] == split) continue;
    ++moved;
    std::string thread = "t" + std::to_string(std::stoi(id.substr(1)) / 3);
    if (!joined_threads.count(thread)) ++moved_unexplained;
  }
  EXPECT_EQ(moved_unexplained, 0) << "records moved although their group did not change";
  // Groups that did not gain members keep their key too.
  for (const auto& [id, g] : before.group_of) {
    std::string thread = "t" + std::to_string(std::stoi(id.substr(1)) / 3);
    if (!joined_threads.count(thread)) EXPECT_EQ(after.group_of[id], g) << id;
  }
  // The stage reports the moves against the previous assignments.
  const Json& prev = after.summary["stages"]["split"]["previous"];
  EXPECT_EQ(prev["moved"], moved);
  EXPECT_EQ(prev["unchanged"], 900 - moved);
  EXPECT_EQ(prev["new"], 330);
  EXPECT_EQ(prev["no_longer_kept"], 0);
  std::printf("stability: %d of 900 existing records moved (their thread gained a record)\n", moved);
}

// stages.split.previous is read through the shared line reader: a gzip file
// (RFC 1952, recognised by its magic bytes) works, and a bad line is named
// by file and line.
TEST(Splits, PreviousAssignmentsCompressedAndBadLineNamed) {
  RunResult first = RunSplit("prevgz-a", Corpus(0, 300));
  std::string prev = TempPath("prevgz-a-out") + "/assignments.jsonl";
  std::remove((prev + ".gz").c_str());
  ASSERT_EQ(std::system(("gzip -k " + prev).c_str()), 0);
  RunResult again = RunSplit("prevgz-b", Corpus(0, 300), Json{{"previous", prev + ".gz"}});
  EXPECT_EQ(again.summary["stages"]["split"]["previous"]["unchanged"], first.split_of.size());
  std::string bad = WriteFile("prevgz-bad.jsonl", "{\"id\": \"a\", \"split\": \"train\"}\n{\"id\": 7}\n");
  std::string in = WriteFile("prevgz-c.jsonl", Corpus(0, 30));
  Plan plan = PlanFor({in}, kLayout, TempPath("prevgz-c-out"));
  plan.stages["split"] = Json{{"previous", bad}};
  PipelineOptions opts;
  opts.stages = {"split"};
  opts.table = false;
  auto r = RunPipeline(plan, opts, DefaultFileSystem(), stderr);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find(bad + ":2:"), std::string::npos) << r.status().message();
}

// Realised fractions: 3000 singleton groups; each share should fall within
// 3 sd of its ratio, sd = sqrt(p(1-p)/n) for n independent groups (the
// binomial proportion's standard deviation, common practice).
TEST(Splits, RealisedFractionsWithinBinomialTolerance) {
  RunResult r = RunSplit("fractions", Corpus(0, 3000, false), Json{{"tie_by", {"prompt"}}});
  const Json& sp = r.summary["stages"]["split"];
  ASSERT_EQ(sp["splits"].size(), 3u);
  for (const auto& e : sp["splits"]) {
    double p = e["ratio"].get<double>();
    double sd = std::sqrt(p * (1 - p) / 3000.0);
    EXPECT_NEAR(e["sd"].get<double>(), sd, 1e-6);
    EXPECT_LE(std::fabs(e["share"].get<double>() - p), 3 * sd) << e.dump();
  }
  EXPECT_EQ(sp["checks"]["fractions_within_tolerance"], true);
  EXPECT_EQ(sp["checks"]["passed"], true);
}

TEST(Splits, StratifiedBySourceGivesNearExactFractionsPerSource) {
  std::string data;
  for (int k = 0; k < 1000; ++k) {
    data += Line("s" + std::to_string(k), "stratified question " + std::to_string(k), "", 0, k % 4 ? "web" : "kiosk");
  }
  RunResult r = RunSplit("strat", data,
                    Json{{"tie_by", {"prompt"}}, {"stratify_by", "source"}, {"splits", {{"a", 0.5}, {"b", 0.3}, {"c", 0.2}}}});
  std::map<std::string, std::map<std::string, int>> counts;
  for (const auto& [id, split] : r.split_of) counts[std::stoi(id.substr(1)) % 4 ? "web" : "kiosk"][split]++;
  EXPECT_NEAR(counts["kiosk"]["a"], 125, 1);
  EXPECT_NEAR(counts["kiosk"]["b"], 75, 1);
  EXPECT_NEAR(counts["web"]["a"], 375, 1);
  EXPECT_NEAR(counts["web"]["c"], 150, 1);
}

TEST(Splits, SettingsErrorsNameTheKey) {
  Plan plan;
  Status err;
  plan.stages["split"] = Json{{"splits", {{"train", 0.5}, {"test", 0.4}}}};
  EXPECT_EQ(MakeSplitStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("add up to 1"), std::string::npos);
  plan.stages["split"] = Json{{"tie_by", {"colour"}}};
  EXPECT_EQ(MakeSplitStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("tie_by"), std::string::npos);
  plan.stages["split"] = Json{{"ratio", 1}};
  EXPECT_EQ(MakeSplitStage(plan, DefaultFileSystem(), &err), nullptr);
  EXPECT_NE(err.message().find("ratio"), std::string::npos);
}

TEST(Splits, SplitPositionIsUniformAndSaltDependent) {
  // A crude uniformity check over 10000 keys: each decile within 5 sd of 1000
  // (binomial sd = sqrt(10000 * 0.1 * 0.9) = 30; common practice).
  int deciles[10] = {};
  int same = 0;
  for (uint64_t k = 0; k < 10000; ++k) {
    Hash128 key{k * 0x9E3779B97F4A7C15ULL, k};
    double u = SplitPosition("salt", key);
    ASSERT_GE(u, 0.0);
    ASSERT_LT(u, 1.0);
    ++deciles[static_cast<int>(u * 10)];
    same += SplitPosition("other", key) == u;
  }
  for (int d : deciles) EXPECT_NEAR(d, 1000, 150);
  EXPECT_LT(same, 5);
}

// Script detection by Unicode block (ranges from the Unicode Blocks.txt, from memory).
TEST(Splits, DominantScript) {
  EXPECT_EQ(DominantScript("How do I save tomato seed?"), "Latin");
  EXPECT_EQ(DominantScript("Как сохранить семена томатов?"), "Cyrillic");
  EXPECT_EQ(DominantScript("トマトの種の保存方法"), "Kana");
  EXPECT_EQ(DominantScript("番茄种子怎么保存"), "Han");
  EXPECT_EQ(DominantScript("كيف أحفظ البذور"), "Arabic");
  EXPECT_EQ(DominantScript("12345 !!"), "none");
}

// The reference: the script of every code point counted one at a time (the
// loop before ASCII runs were counted in bulk), with the same block ranges.
std::string DominantScriptByCodePoint(std::string_view s) {
  std::map<std::string, uint32_t> counts;
  std::string best = "none";
  std::vector<std::string> order;
  for (size_t i = 0; i < s.size();) {
    const auto b = static_cast<unsigned char>(s[i]);
    size_t len = b < 0x80 ? 1 : (b >> 5) == 6 ? 2 : (b >> 4) == 14 ? 3 : (b >> 3) == 30 ? 4 : 1;
    if (len > 1 && i + len > s.size()) len = 1;
    // An ASCII byte: a letter is Latin, anything else no script (the ranges
    // above); another code point: its script alone, by the stage's own
    // block table (the part the bulk count does not touch).
    const std::string one = b < 0x80 ? (((b >= 'A' && b <= 'Z') || (b >= 'a' && b <= 'z')) ? "Latin" : "none")
                                     : DominantScript(s.substr(i, len));
    ++counts[one];
    i += len;
  }
  // The same choice as the stage: the most code points among the scripts
  // other than "none", ties to the earlier script in the stage's list.
  const char* const kOrder[] = {"Latin", "Greek", "Cyrillic", "Armenian", "Hebrew", "Arabic", "Devanagari",
                                "Bengali", "Tamil", "Thai", "Georgian", "Hangul", "Kana", "Han", "other"};
  uint32_t most = 0;
  for (const char* k : kOrder) {
    if (counts[k] > most) {
      most = counts[k];
      best = k;
    }
  }
  return best;
}

// Mixed texts: ASCII runs between letters of other scripts, digits, symbols,
// stray and cut-short UTF-8 bytes. Differential against the code point by
// code point count above.
TEST(Splits, DominantScriptCountsAsciiRunsLikeCodePoints) {
  const char* const kPieces[] = {"a", "Z", "7", " ", "?", "_", "@", "[", "`", "{", "é", "Ж", "ж", "α", "ש", "ب", "क", "ক", "த", "ก",
                                 "ა", "한", "カ", "の", "中", "\xF0\x9F\x98\x80", "\xFF", "\xC3", "—", "€"};
  std::mt19937 rng(20261203);
  for (int t = 0; t < 3000; ++t) {
    std::string text;
    const int n = static_cast<int>(rng() % 40);
    for (int k = 0; k < n; ++k) text += kPieces[rng() % (sizeof kPieces / sizeof kPieces[0])];
    ASSERT_EQ(DominantScript(text), DominantScriptByCodePoint(text)) << text;
  }
}

// ----- the gate -----

// The run's typed figures (core/gate_figures.h): 100 records in, 80 kept,
// 5 in label conflicts; with_bias adds two position tests and the audit.
GateFigures FiguresWith(bool with_bias) {
  GateFigures f;
  f.records_in = 100;
  f.kept = 80;
  f.parsed = 100;
  f.stages_ran = {"exact"};
  f.label_conflict_records = 5;
  if (with_bias) {
    f.stages_ran.insert("bias");
    f.position_ran = true;
    f.position_scope = "chosen-slot tests by number of candidates";
    f.min_position_p = 0.004;  // the smaller of 0.2 and 0.004
    f.shortcut_accuracy = 0.55;
  }
  return f;
}

TEST(Gate, Verdicts) {
  bool failed = false;
  // All pass.
  Json g = EvaluateGate(Json{{"min_kept_share", 0.8}, {"max_label_conflict_rate", 0.05}}, FiguresWith(false), &failed);
  EXPECT_FALSE(failed);
  EXPECT_EQ(g["verdict"], "pass");  // 0.8 >= 0.8 and 0.05 <= 0.05: thresholds are inclusive
  // Position: the smallest adjusted p (0.004) against 0.01 fails.
  g = EvaluateGate(Json{{"min_position_p_adjusted", 0.01}, {"max_shortcut_accuracy", 0.6}}, FiguresWith(true), &failed);
  EXPECT_TRUE(failed);
  EXPECT_EQ(g["checks"][0]["value"], 0.004);
  EXPECT_EQ(g["checks"][0]["verdict"], "fail");
  EXPECT_EQ(g["checks"][1]["verdict"], "pass");
  // Stages that did not run: not evaluated, not a pass; an incomplete gate
  // fails the run unless the plan says on_incomplete: pass.
  Json four{{"max_shortcut_accuracy", 0.6}, {"max_leakage_rate", 0.01}, {"max_personal_data_findings", 0},
            {"require_split_checks", true}};
  g = EvaluateGate(four, FiguresWith(false), &failed);
  EXPECT_TRUE(failed);
  EXPECT_EQ(g["verdict"], "incomplete");
  EXPECT_EQ(g["fails_the_run"], true);
  EXPECT_EQ(g["not_evaluated"], 4);
  for (const auto& c : g["checks"]) EXPECT_EQ(c["verdict"], "not evaluated") << c.dump();
  four["on_incomplete"] = "pass";
  ASSERT_TRUE(ValidateGate(four).ok());
  g = EvaluateGate(four, FiguresWith(false), &failed);
  EXPECT_FALSE(failed);
  EXPECT_EQ(g["verdict"], "incomplete");
  EXPECT_FALSE(ValidateGate(Json{{"on_incomplete", "maybe"}}).ok());
  // The default gate skips what did not run instead of failing on it.
  g = EvaluateGate(DefaultGate(), FiguresWith(false), &failed, /*defaulted=*/true);
  EXPECT_FALSE(failed) << g.dump();
  EXPECT_EQ(g["default_gate"], true);
  EXPECT_EQ(g["skipped"].size(), 3u) << g.dump();
  // Personal-data findings left in kept records (the screen stage's figure).
  GateFigures s = FiguresWith(false);
  s.stages_ran.insert("screen");
  s.personal_data_left = 2;
  g = EvaluateGate(Json{{"max_personal_data_findings", 1}}, s, &failed);
  EXPECT_TRUE(failed);
  EXPECT_EQ(g["checks"][0]["value"], 2);
  // An empty gate.
  g = EvaluateGate(Json::object(), s, &failed);
  EXPECT_FALSE(failed);
  EXPECT_EQ(g["verdict"], "no checks");
}

TEST(Gate, LeakagePerSetWithDefault) {
  GateFigures s = FiguresWith(false);
  s.stages_ran.insert("leakage");
  s.leakage_by_set = {{"a", 0.03}, {"b", 0.0}};  // a: the larger of its detectors' rates (0.01, 0.03)
  s.leakage_none_flagged = false;
  bool failed = false;
  Json g = EvaluateGate(Json{{"max_leakage_rate", {{"a", 0.02}, {"*", 0.0}}}}, s, &failed);
  EXPECT_TRUE(failed);
  ASSERT_EQ(g["checks"].size(), 2u);
  EXPECT_EQ(g["checks"][0]["scope"], "a");
  EXPECT_EQ(g["checks"][0]["value"], 0.03);
  EXPECT_EQ(g["checks"][0]["verdict"], "fail");
  EXPECT_EQ(g["checks"][1]["verdict"], "pass");
  // Everything found was dropped: nothing leaks into the output.
  s.leakage_none_flagged = true;
  g = EvaluateGate(Json{{"max_leakage_rate", 0.0}}, s, &failed);
  EXPECT_FALSE(failed);
}

TEST(Gate, ValidationNamesTheKey) {
  EXPECT_NE(ValidateGate(Json{{"max_typos", 1}}).message().find("gate.max_typos"), std::string::npos);
  EXPECT_NE(ValidateGate(Json{{"min_kept_share", 1.5}}).message().find("between 0 and 1"), std::string::npos);
  EXPECT_NE(ValidateGate(Json{{"require_split_checks", 1}}).message().find("true or false"), std::string::npos);
  EXPECT_NE(ValidateProvenance(Json{{"motivation", {{"why", "x"}}}}).message().find("provenance.motivation.why"),
            std::string::npos);
}

TEST(Gate, FailingGateSetsTheOutcome) {
  RunResult r = RunSplit("gatefail", Corpus(0, 60), Json::object(), {"split"}, Json{{"min_kept_share", 1.0}, {"require_split_checks", true}});
  EXPECT_EQ(r.rc_gate, 0);
  EXPECT_EQ(r.summary["gate"]["verdict"], "pass");
  // Reject some lines (broken JSON) so the kept share drops below 1.
  RunResult f = RunSplit("gatefail2", Corpus(0, 60) + "{broken\n", Json::object(), {"split"}, Json{{"min_kept_share", 1.0}});
  EXPECT_EQ(f.rc_gate, 1);
  EXPECT_EQ(f.summary["gate"]["verdict"], "fail");
}

// ----- documents and determinism -----

std::map<std::string, std::string> Folder(const std::string& dir) {
  std::map<std::string, std::string> files;
  for (const auto& e : std::filesystem::directory_iterator(dir)) files[e.path().filename().string()] = ReadFile(e.path().string());
  return files;
}

TEST(Documents, DatasheetHasSevenSectionsAndRerunsAreByteIdentical) {
  ::setenv("SOURCE_DATE_EPOCH", "1775000000", 1);
  std::string in = WriteFile("det.jsonl", Corpus(0, 400));
  std::map<std::string, std::string> first;
  for (unsigned threads : {1u, 2u, 4u}) {
    Plan plan = PlanFor({in}, kLayout, TempPath("det-out-" + std::to_string(threads)));
    plan.threads = threads;
    plan.gate = Json{{"min_kept_share", 0.5}};
    plan.provenance = Json{{"dataset_name", "test set"}, {"motivation", {{"purpose", "testing"}}}};
    PipelineOptions opts;
    opts.stages = {"exact", "split"};
    opts.table = false;
    auto r = RunPipeline(plan, opts, DefaultFileSystem(), stderr);
    ASSERT_TRUE(r.ok()) << r.status().message();
    auto files = Folder(plan.output);
    if (first.empty()) {
      first = files;
      for (const char* name : {"datasheet.md", "datasheet.json", "report.html", "summary.json", "train.jsonl",
                               "valid.jsonl", "test.jsonl", "assignments.jsonl"}) {
        EXPECT_TRUE(files.count(name)) << name;
      }
      Json ds = Json::parse(files["datasheet.json"]);
      ASSERT_EQ(ds["sections"].size(), 7u);
      std::vector<std::string> titles;
      for (const auto& s : ds["sections"]) titles.push_back(s["title"]);
      // Gebru et al., "Datasheets for Datasets", arXiv:1803.09010 (2018; CACM 2021): the seven sections [V].
      EXPECT_EQ(titles, (std::vector<std::string>{"Motivation", "Composition", "Collection process",
                                                  "Preprocessing, cleaning and labelling", "Uses", "Distribution",
                                                  "Maintenance"}));
      EXPECT_EQ(ds["sections"][0]["answers"][0]["answer"], "testing");
      EXPECT_EQ(ds["sections"][0]["answers"][1]["answer"], "not provided");
      EXPECT_EQ(ds["provenance"]["time"]["utc"], "2026-03-31T23:33:20Z");
      EXPECT_EQ(ds["provenance"]["inputs"][0]["sha256"].get<std::string>().size(), 64u);
      std::string md = files["datasheet.md"];
      EXPECT_NE(md.find("## 7. Maintenance"), std::string::npos);
      EXPECT_NE(md.find("not legal advice"), std::string::npos);
      EXPECT_NE(md.find("_not provided_"), std::string::npos);
      continue;
    }
    ASSERT_EQ(files.size(), first.size());
    for (const auto& [name, bytes] : first) EXPECT_TRUE(files[name] == bytes) << name << " differs with --threads " << threads;
  }
  ::unsetenv("SOURCE_DATE_EPOCH");
}

}  // namespace
}  // namespace prefsift

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

// max_shortcut_lift counts the audit's lift over chance only when its own test
// flagged it (docs/gate.md); an unflagged lift is 0.
TEST(Gate, ShortcutLiftAgainstChance) {
  bool failed = false;
  GateFigures s;
  s.records_in = s.kept = 10;
  s.stages_ran = {"bias"};
  s.shortcut_lift = 0.08;
  s.shortcut_flagged = true;
  Json g = EvaluateGate(Json{{"max_shortcut_lift", 0.05}}, s, &failed);
  EXPECT_TRUE(failed);
  EXPECT_EQ(g["checks"][0]["value"], 0.08);
  s.shortcut_flagged = false;
  g = EvaluateGate(Json{{"max_shortcut_lift", 0.05}}, s, &failed);
  EXPECT_FALSE(failed);
  EXPECT_EQ(g["checks"][0]["value"], 0.0);
}

}  // namespace
}  // namespace prefsift
