// Tests of the near-duplicate stage ("near") through the pipeline.
//
// Outside sources:
//  - Jaccard similarity J = |A∩B|/|A∪B| of shingle sets (Broder 1997, doi:10.1109/SEQUEN.1997.666900
//    [V, abstract]). The test texts use distinct words (or distinct code points), so every n-gram is
//    distinct and the Jaccard of a planted edit is worked out by hand in the comment beside it.
//  - LSH S-curve P = 1 - (1 - s^r)^b and Fig. 3.8 (b = 20, r = 5) of Leskovec, Rajaraman & Ullman,
//    Mining of Massive Datasets, sec. 3.4.2 [V].
#include <gtest/gtest.h>

#include <cmath>
#include <map>
#include <random>
#include <set>
#include <string>

#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

// n distinct words "<stem>0 <stem>1 ...".
std::vector<std::string> WordList(const std::string& stem, int n) {
  std::vector<std::string> w;
  for (int i = 0; i < n; ++i) w.push_back(stem + std::to_string(i));
  return w;
}

std::string Join(const std::vector<std::string>& w) {
  std::string s;
  for (size_t i = 0; i < w.size(); ++i) s += (i ? " " : "") + w[i];
  return s;
}

std::string Line(const std::string& id, const std::string& prompt, const std::string& c0 = "Sow in May.",
                 const std::string& c1 = "Sow in June.", int choice = 0) {
  return Json{{"id", id}, {"prompt", prompt}, {"candidates", {c0, c1}}, {"choice", choice}}.dump() + "\n";
}

std::string Utf8(char32_t cp) {
  std::string s;
  if (cp < 0x800) {
    s += static_cast<char>(0xC0 | (cp >> 6));
  } else {
    s += static_cast<char>(0xE0 | (cp >> 12));
    s += static_cast<char>(0x80 | ((cp >> 6) & 0x3F));
  }
  s += static_cast<char>(0x80 | (cp & 0x3F));
  return s;
}

Result<RunOutcome> RunNear(const Plan& plan, std::vector<std::string> stages) {
  PipelineOptions o;
  o.stages = std::move(stages);
  o.table = false;
  return RunPipeline(plan, o, &MemoryFiles(), stderr);
}

std::map<std::string, Json> RejectsById(const std::string& out) {
  std::map<std::string, Json> m;
  for (const auto& j : ReadJsonl(&MemoryFiles(), out + "/rejects.jsonl")) m[j["id"].get<std::string>()] = j;
  return m;
}

Json NearSummary(const std::string& out) {
  return Json::parse(ReadFile(&MemoryFiles(), out + "/summary.json"))["stages"]["near"];
}

// A: 24 distinct words, 20 word 5-grams.
// B: A with the last word replaced: 19 shared 5-grams, union 21, J = 19/21 = 0.904762.
// C: A with word 12 replaced: 5 of 20 shingles change, J = 15/25 = 0.6.
// B2: A with the first word replaced: J(A,B2) = 19/21, J(B,B2) = 18/22 = 0.818.
struct Texts {
  std::vector<std::string> a = WordList("seed", 24);
  std::string A = Join(a), B, C, B2;
  Texts() {
    auto b = a;
    b[23] = "pumpkin";
    B = Join(b);
    auto c = a;
    c[12] = "pumpkin";
    C = Join(c);
    auto b2 = a;
    b2[0] = "marrow";
    B2 = Join(b2);
  }
};

TEST(NearDups, ClustersPlantedEditsAndNotDistinctOnes) {
  Texts t;
  for (const char* verify : {"estimate", "exact"}) {
    std::string data = Line("a", t.A) + Line("d", Join(WordList("other", 30))) + Line("b", t.B) + Line("c", t.C);
    std::string in = WriteFile(&MemoryFiles(), std::string("near_basic_") + verify + ".jsonl", data);
    std::string out = TempPath(std::string("near_basic_out_") + verify);
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
    plan.stages["near"] = Json{{"verify", verify}};
    auto r = RunNear(plan, {"near"});
    ASSERT_TRUE(r.ok()) << r.status().message();
    EXPECT_EQ(r.value().rejected, 0u);
    auto clusters = ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl");
    ASSERT_EQ(clusters.size(), 1u) << verify;
    EXPECT_EQ(clusters[0]["cluster"], 0);  // smallest member record index: "a" is record 0
    EXPECT_EQ(clusters[0]["first"], "a");
    EXPECT_EQ(clusters[0]["members"], Json::array({"a", "b"}));
    if (std::string(verify) == "exact") {
      // Worked example above: 19/21.
      EXPECT_NEAR(clusters[0]["min_similarity"].get<double>(), 19.0 / 21.0, 1e-6);
      EXPECT_NEAR(clusters[0]["max_similarity"].get<double>(), 19.0 / 21.0, 1e-6);
    } else {
      // Compact estimate: SE about sqrt(J(1-J)/256) = 0.018 (Broder 1997; Ertl 2017 sec. 1.1).
      EXPECT_NEAR(clusters[0]["min_similarity"].get<double>(), 19.0 / 21.0, 4 * 0.0184);
    }
    Json s = NearSummary(out);
    EXPECT_EQ(s["settings"]["verify"], verify);
    EXPECT_EQ(s["records_signed"], 4);
    EXPECT_EQ(s["records_compared"], 4);
    EXPECT_EQ(s["clusters"], 1);
    EXPECT_EQ(s["records_in_clusters"], 2);
    EXPECT_EQ(s["largest_cluster"], 2);
    EXPECT_EQ(s["cluster_sizes"], Json({{"2", 1}}));
    EXPECT_GE(s["candidate_pairs"].get<uint64_t>(), 1u);
    EXPECT_EQ(s["verified_pairs"], 1);
  }
}

TEST(NearDups, SummaryShowsTheBandingSCurve) {
  Texts t;
  std::string in = WriteFile(&MemoryFiles(), "near_curve.jsonl", Line("a", t.A) + Line("b", t.B));
  std::string out = TempPath("near_curve_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  Json s = NearSummary(out);
  // Default banding for threshold 0.8 and 256 slots: sketch::ChooseBanding gives b = 26, r = 8
  // (docs/near-duplicates.md sec. 3); approximate threshold (1/26)^(1/8) = 0.6651 (MMDS sec. 3.4.2 [V]).
  EXPECT_EQ(s["settings"]["bands"], 26);
  EXPECT_EQ(s["settings"]["rows"], 8);
  EXPECT_NEAR(s["approx_threshold"].get<double>(), std::pow(1.0 / 26, 1.0 / 8), 1e-6);
  // Book Fig. 3.8, b = 20, r = 5 [V]: s .3 .5 .6 .7 .8 -> .047 .470 .802 .975 .9996 (half a unit of the
  // last printed digit).
  plan.stages["near"] = Json{{"bands", 20}, {"rows", 5}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  s = NearSummary(out);
  std::map<double, std::pair<double, double>> book = {
      {0.3, {0.047, 0.0005}}, {0.5, {0.470, 0.0005}}, {0.6, {0.802, 0.0005}}, {0.7, {0.975, 0.0005}},
      {0.8, {0.9996, 0.00005}}};
  int seen = 0;
  for (const auto& row : s["s_curve"]) {
    auto it = book.find(row["similarity"].get<double>());
    if (it == book.end()) continue;
    ++seen;
    EXPECT_NEAR(row["p_candidate"].get<double>(), it->second.first, it->second.second) << it->first;
    // 8-bit rows agree a little more often (s + (1-s)/256), never less.
    EXPECT_GE(row["p_candidate_8bit"].get<double>(), row["p_candidate"].get<double>());
  }
  EXPECT_EQ(seen, 5);
}

TEST(NearDups, OnlyRecordsKeptByEarlierStagesTakePart) {
  Texts t;
  // "a2" repeats "a" exactly: the exact stage rejects it first, so it is in no cluster.
  std::string data = Line("a", t.A) + Line("a2", t.A) + Line("b", t.B);
  std::string in = WriteFile(&MemoryFiles(), "near_after_exact.jsonl", data);
  std::string out = TempPath("near_after_exact_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  ASSERT_TRUE(RunNear(plan, {"exact", "near"}).ok());
  auto rejects = RejectsById(out);
  EXPECT_EQ(rejects["a2"]["reason"], "duplicate_comparison");
  auto clusters = ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl");
  ASSERT_EQ(clusters.size(), 1u);
  EXPECT_EQ(clusters[0]["members"], Json::array({"a", "b"}));
  Json s = NearSummary(out);
  EXPECT_EQ(s["records_signed"], 3);
  EXPECT_EQ(s["records_compared"], 2);
}

TEST(NearDups, CapKeepsTheFirstInInputOrder) {
  Texts t;
  std::string data = Line("x", Join(WordList("other", 30))) + Line("a", t.A) + Line("b", t.B) + Line("b2", t.B2);
  std::string in = WriteFile(&MemoryFiles(), "near_cap.jsonl", data);
  for (int cap : {1, 2}) {
    std::string out = TempPath("near_cap_out" + std::to_string(cap));
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
    plan.stages["near"] = Json{{"verify", "exact"}, {"max_per_cluster", cap}};
    auto r = RunNear(plan, {"near"});
    ASSERT_TRUE(r.ok()) << r.status().message();
    auto rejects = RejectsById(out);
    EXPECT_EQ(rejects.count("x"), 0u);
    EXPECT_EQ(rejects.count("a"), 0u);
    EXPECT_EQ(rejects.count("b"), cap == 1 ? 1u : 0u);
    ASSERT_EQ(rejects.count("b2"), 1u);
    const Json& j = rejects["b2"];
    EXPECT_EQ(j["stage"], "near");
    EXPECT_EQ(j["reason"], "near_duplicate_over_cap");
    EXPECT_EQ(j["detail"]["cluster"], 1);  // record index of "a", the smallest member
    EXPECT_EQ(j["detail"]["cluster_first"], "a");
    EXPECT_EQ(j["detail"]["kept"], "a");
    EXPECT_EQ(j["detail"]["max_per_cluster"], cap);
    auto clusters = ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl");
    ASSERT_EQ(clusters.size(), 1u);
    EXPECT_EQ(clusters[0]["size"], 3);
    EXPECT_EQ(clusters[0]["over_cap"].size(), static_cast<size_t>(3 - cap));
    EXPECT_EQ(NearSummary(out)["over_cap_rejected"], 3 - cap);
  }
}

TEST(NearDups, ChatPromptsCompareUserTurnsOnly) {
  Texts t;
  auto chat = [&](const std::string& id, const std::string& system) {
    Json turns = Json::array({Json{{"role", "system"}, {"content", system}}, Json{{"role", "user"}, {"content", t.A}}});
    return Json{{"id", id}, {"turns", turns}, {"candidates", {"Yes", "No"}}, {"choice", 0}}.dump() + "\n";
  };
  // Different system turns (30 distinct words each); the same user turn.
  std::string in = WriteFile(&MemoryFiles(), "near_chat.jsonl", chat("c1", Join(WordList("rule", 30))) +
                                                    chat("c2", Join(WordList("tone", 30))));
  std::string out = TempPath("near_chat_out");
  Plan plan = PlanFor({in}, Json{{"id", "/id"}, {"prompt", "/turns"}, {"candidates", "/candidates"}, {"choice", "/choice"}},
                      out);
  plan.stages["near"] = Json{{"verify", "exact"}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  auto clusters = ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl");
  ASSERT_EQ(clusters.size(), 1u);
  EXPECT_EQ(clusters[0]["members"], Json::array({"c1", "c2"}));
  EXPECT_DOUBLE_EQ(clusters[0]["min_similarity"].get<double>(), 1.0);
}

TEST(NearDups, TextWithoutSpacesUsesCodePointShingles) {
  // 40 distinct Han code points; the variant changes the last one. Code-point 5-grams: 36 each,
  // 35 shared, J = 35/37 = 0.9459. Forced word shingles see one "word" per text: J = 0.
  std::string a, b;
  for (int i = 0; i < 40; ++i) a += Utf8(0x4E00 + 3 * i);
  for (int i = 0; i < 39; ++i) b += Utf8(0x4E00 + 3 * i);
  b += Utf8(0x5100);
  std::string in = WriteFile(&MemoryFiles(), "near_cjk.jsonl", Line("h1", a) + Line("h2", b));
  std::string out = TempPath("near_cjk_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["near"] = Json{{"verify", "exact"}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  auto clusters = ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl");
  ASSERT_EQ(clusters.size(), 1u);
  EXPECT_NEAR(clusters[0]["min_similarity"].get<double>(), 35.0 / 37.0, 1e-6);
  EXPECT_EQ(NearSummary(out)["shingle_modes"]["chars"], 2);
  // Forced word shingles: UAX #29 leaves each ideograph a word of its own
  // (rule WB999), so word 5-grams are the same grams and the same similarity.
  plan.stages["near"] = Json{{"verify", "exact"}, {"shingle", "words"}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  ASSERT_EQ(ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl").size(), 1u);
  EXPECT_NEAR(ReadJsonl(&MemoryFiles(), out + "/clusters.jsonl")[0]["min_similarity"].get<double>(), 35.0 / 37.0, 1e-6);
  EXPECT_EQ(NearSummary(out)["shingle_modes"]["words"], 2);
}

// Differential check of the near-identical candidate similarities against a
// brute-force reference: exact Jaccard of the sets of word 3-grams, built as
// strings in the test (no hashing), for records of B = 2..5 and one of B = 9
// (the stage's one-table path covers B <= 8 with every candidate at least 3
// words long; the others take the per-pair path). Threshold 0.3 so that many
// pairs, near and far from it, are compared.
TEST(NearDups, CandidateSimilaritiesMatchBruteForceJaccard) {
  std::mt19937_64 rng(20261202);
  auto jaccard3 = [](const std::vector<std::string>& a, const std::vector<std::string>& b) {
    auto grams = [](const std::vector<std::string>& w) {
      std::set<std::string> g;
      if (w.size() < 3) {
        std::string all;
        for (const auto& x : w) all += x + " ";
        g.insert(all);
        return g;
      }
      for (size_t i = 0; i + 3 <= w.size(); ++i) g.insert(w[i] + " " + w[i + 1] + " " + w[i + 2]);
      return g;
    };
    auto ga = grams(a), gb = grams(b);
    size_t common = 0;
    for (const auto& x : ga) common += gb.count(x);
    return static_cast<double>(common) / static_cast<double>(ga.size() + gb.size() - common);
  };
  std::string data;
  std::map<std::string, std::vector<std::vector<std::string>>> cands_of;
  for (int r = 0; r < 120; ++r) {
    const size_t b = r == 119 ? 9 : 2 + static_cast<size_t>(rng() % 4);
    std::vector<std::string> base;
    const size_t len = 3 + rng() % 40;
    for (size_t i = 0; i < len; ++i) base.push_back("w" + std::to_string(rng() % 30));  // repeats on purpose
    std::vector<std::vector<std::string>> cands;
    Json arr = Json::array();
    for (size_t c = 0; c < b; ++c) {
      auto w = base;
      const size_t edits = rng() % 4;
      for (size_t e = 0; e < edits; ++e) w[rng() % w.size()] = "x" + std::to_string(rng() % 5);
      cands.push_back(w);
      arr.push_back(Join(w));
    }
    std::string id = "c" + std::to_string(r);
    cands_of[id] = cands;
    data += Json{{"id", id}, {"prompt", Join(WordList("q" + std::to_string(r) + "w", 12))}, {"candidates", arr},
                 {"choice", 0}}.dump() + "\n";
  }
  std::string in = WriteFile(&MemoryFiles(), "near_cands_diff.jsonl", data);
  std::string out = TempPath("near_cands_diff_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["near"] = Json{{"candidate_threshold", 0.3}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  std::map<std::string, std::map<std::pair<int, int>, double>> got;
  for (const auto& j : ReadJsonl(&MemoryFiles(), out + "/near_identical.jsonl")) {
    for (const auto& p : j["pairs"]) {
      got[j["id"].get<std::string>()][{p["candidates"][0].get<int>(), p["candidates"][1].get<int>()}] =
          p["similarity"].get<double>();
    }
  }
  size_t checked = 0;
  for (const auto& [id, cands] : cands_of) {
    for (size_t a = 0; a < cands.size(); ++a) {
      for (size_t b = a + 1; b < cands.size(); ++b) {
        const double want = jaccard3(cands[a], cands[b]);
        auto it = got[id].find({static_cast<int>(a), static_cast<int>(b)});
        if (want >= 0.3 + 1e-9) {
          ASSERT_NE(it, got[id].end()) << id << " " << a << "," << b << " J=" << want;
          EXPECT_NEAR(it->second, want, 1e-6) << id << " " << a << "," << b;
          ++checked;
        } else if (want < 0.3 - 1e-6) {
          EXPECT_EQ(it, got[id].end()) << id << " " << a << "," << b << " J=" << want;
        }
      }
    }
  }
  EXPECT_GT(checked, 200u);
}

// The shingle mode of each text follows its scripts, per candidate. Worked by
// hand: code-point 3-grams of two 13-character Chinese answers that
// differ in the last character share 10 of 12 (J = 0.833); word 3-grams of two
// 12-word answers that differ in the last word share 9 of 11 (J = 0.818),
// ASCII or accented Latin alike; a Chinese prompt is shingled by code points.
TEST(NearDups, ShingleModeOfEachCandidateFollowsItsScripts) {
  const std::string words = "the quick brown fox jumps over the lazy dog near the ";
  const std::string accented = "le café très chaud sur la table près de la fenêtre ";
  std::string data = Line("zh", "我们今天去公园散步然后回家吗", "我们今天去公园散步然后回家", "我们今天去公园散步然后回去") +
                     Line("en", "an ascii prompt of a few words", words + "river", words + "rives") +
                     Line("fr", "une question en français", accented + "ouverte", accented + "fermée") +
                     Line("mixed", "an ascii prompt of other words", words + "river", "我们今天去公园散步然后回家");
  std::string in = WriteFile(&MemoryFiles(), "near_modes.jsonl", data);
  std::string out = TempPath("near_modes_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["near"] = Json{{"candidate_threshold", 0.8}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  auto flagged = ReadJsonl(&MemoryFiles(), out + "/near_identical.jsonl");
  ASSERT_EQ(flagged.size(), 3u);
  EXPECT_EQ(flagged[0]["id"], "zh");
  EXPECT_NEAR(flagged[0]["pairs"][0]["similarity"].get<double>(), 10.0 / 12.0, 1e-6);
  EXPECT_EQ(flagged[1]["id"], "en");
  EXPECT_NEAR(flagged[1]["pairs"][0]["similarity"].get<double>(), 9.0 / 11.0, 1e-6);
  EXPECT_EQ(flagged[2]["id"], "fr");
  EXPECT_NEAR(flagged[2]["pairs"][0]["similarity"].get<double>(), 9.0 / 11.0, 1e-6);
  EXPECT_EQ(NearSummary(out)["shingle_modes"]["chars"], 1);  // the Chinese prompt
}

TEST(NearDups, NearIdenticalCandidatesFlagOrReject) {
  auto long0 = WordList("ans", 30);
  auto long1 = long0;
  long1[29] = "differs";  // word 3-grams: 28 each, 27 shared, J = 27/29 = 0.931 >= 0.9
  auto mid0 = WordList("mid", 12);
  auto mid1 = mid0;
  mid1[11] = "differs";  // 10 each, 9 shared, J = 9/11 = 0.818 < 0.9
  std::string data = Line("n1", Join(WordList("pa", 20)), Join(long0), Join(long1)) +
                     Line("n2", Join(WordList("pb", 20)), Join(mid0), Join(mid1)) +
                     // one word each: punctuation is not a word (UAX #29), so "yes." and "yes!"
                     // are the same 1-gram: similarity 1
                     Line("n3", Join(WordList("pc", 20)), "Yes.", "Yes!") +
                     // the same text after normalisation: similarity 1
                     Line("n4", Join(WordList("pd", 20)), "In May", "in  MAY", 1);
  std::string in = WriteFile(&MemoryFiles(), "near_cands.jsonl", data);
  std::string out = TempPath("near_cands_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());  // default: flag, 0.9, 3-grams
  auto flagged = ReadJsonl(&MemoryFiles(), out + "/near_identical.jsonl");
  ASSERT_EQ(flagged.size(), 3u);
  EXPECT_EQ(flagged[0]["id"], "n1");
  EXPECT_EQ(flagged[0]["action"], "flagged");
  EXPECT_NEAR(flagged[0]["pairs"][0]["similarity"].get<double>(), 27.0 / 29.0, 1e-6);
  EXPECT_EQ(flagged[1]["id"], "n3");
  EXPECT_EQ(flagged[2]["id"], "n4");
  EXPECT_DOUBLE_EQ(flagged[1]["pairs"][0]["similarity"].get<double>(), 1.0);
  EXPECT_DOUBLE_EQ(flagged[2]["pairs"][0]["similarity"].get<double>(), 1.0);
  EXPECT_TRUE(RejectsById(out).empty());
  Json s = NearSummary(out);
  EXPECT_EQ(s["near_identical_candidates"]["records"], 3);
  EXPECT_EQ(s["near_identical_candidates"]["rejected"], 0);

  plan.stages["near"] = Json{{"candidates", "reject"}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  auto rejects = RejectsById(out);
  ASSERT_EQ(rejects.size(), 3u);
  EXPECT_EQ(rejects["n1"]["reason"], "near_identical_candidates");
  EXPECT_EQ(rejects["n1"]["detail"]["candidates"], Json::array({0, 1}));
  EXPECT_EQ(rejects["n3"]["reason"], "near_identical_candidates");
  EXPECT_EQ(rejects["n4"]["reason"], "near_identical_candidates");
  EXPECT_EQ(NearSummary(out)["near_identical_candidates"]["rejected"], 3);

  // A lower threshold also catches n2 (0.818); "off" checks nothing.
  plan.stages["near"] = Json{{"candidate_threshold", 0.8}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  EXPECT_EQ(ReadJsonl(&MemoryFiles(), out + "/near_identical.jsonl").size(), 4u);
  plan.stages["near"] = Json{{"candidates", "off"}};
  ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  EXPECT_EQ(ReadJsonl(&MemoryFiles(), out + "/near_identical.jsonl").size(), 0u);
}

TEST(NearDups, BadSettingsAreUsageErrorsNamingTheKey) {
  std::string in = WriteFile(&MemoryFiles(), "near_bad.jsonl", Line("a", "hello there"));
  std::string out = TempPath("near_bad_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  std::vector<std::pair<Json, std::string>> cases = {
      {Json{{"frobnicate", 1}}, "frobnicate"},
      {Json{{"threshold", 1.5}}, "threshold"},
      {Json{{"verify", "maybe"}}, "verify"},
      {Json{{"bands", 10}}, "bands/rows"},
      {Json{{"bands", 100}, {"rows", 5}}, "exceeds slots"},
      {Json{{"candidates", "drop"}}, "candidates"},
      {Json{{"max_per_cluster", -1}}, "max_per_cluster"},
  };
  for (const auto& [settings, needle] : cases) {
    plan.stages["near"] = settings;
    auto r = RunNear(plan, {"near"});
    ASSERT_FALSE(r.ok()) << settings.dump();
    EXPECT_EQ(r.status().code(), StatusCode::kUsage);
    EXPECT_NE(r.status().message().find(needle), std::string::npos) << r.status().message();
  }
}

TEST(NearDups, ThreadCountDoesNotChangeOutputs) {
  // 1,500 prompts of 30 words from a 400-word vocabulary; every fifth is an earlier one with its first or last word changed.
  std::string data;
  uint64_t x = 12345;
  auto next = [&] {
    x = x * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<uint32_t>(x >> 33);
  };
  std::vector<std::vector<std::string>> prompts;
  for (int i = 0; i < 1500; ++i) {
    std::vector<std::string> w;
    if (i % 5 == 4) {
      w = prompts[next() % prompts.size()];
      w[next() % 2 ? 0 : 29] = "edit" + std::to_string(next() % 400);  // J = 25/27 to its source
    } else {
      for (int k = 0; k < 30; ++k) w.push_back("v" + std::to_string(next() % 400));
    }
    prompts.push_back(w);
    data += Line("r" + std::to_string(i), Join(w), "c" + std::to_string(i), "d" + std::to_string(i));
  }
  std::string in = WriteFile(&MemoryFiles(), "near_threads.jsonl", data);
  std::string outs[2];
  for (int t = 0; t < 2; ++t) {
    outs[t] = TempPath("near_threads_out" + std::to_string(t));
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, outs[t]);
    plan.threads = t == 0 ? 1 : 3;
    plan.stages["near"] = Json{{"max_per_cluster", 1}};
    ASSERT_TRUE(RunNear(plan, {"near"}).ok());
  }
  for (const char* f : {"/kept.jsonl", "/rejects.jsonl", "/clusters.jsonl", "/near_identical.jsonl"}) {
    EXPECT_EQ(ReadFile(&MemoryFiles(), outs[0] + f), ReadFile(&MemoryFiles(), outs[1] + f)) << f;
  }
  EXPECT_EQ(NearSummary(outs[0]).dump(), NearSummary(outs[1]).dump());
  EXPECT_GE(NearSummary(outs[0])["clusters"].get<int>(), 150);  // 300 edits, some of them edits of edits (measured 191)
}

}  // namespace
}  // namespace prefsift
