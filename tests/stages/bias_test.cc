// Tests of the bias stage: position/length statistics against published
// reference values, position rebalancing (judgment follows the candidate
// text, balance within one per slot, unknown fields untouched, determinism),
// length rebalancing, and the shortcut audit on generated data.
#include <gtest/gtest.h>

#include <algorithm>
#include <map>
#include <set>

#include "run_helpers.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

Result<RunOutcome> RunBias(Plan plan) {
  PipelineOptions o;
  o.stages = {"bias"};
  o.table = false;
  return RunPipeline(plan, o, &MemoryFiles(), stderr);
}

Json BiasSummary(const std::string& out) {
  return Json::parse(ReadFile(&MemoryFiles(), out + "/summary.json"))["stages"]["bias"];
}

std::string Words(int n, const std::string& w) {
  std::string s;
  for (int i = 0; i < n; ++i) s += (i ? " " : "") + w + std::to_string(i);
  return s;
}

// Deterministic pseudo-random numbers for the generated data (LCG; the
// values only need to be fixed, not good).
struct Lcg {
  uint64_t s;
  uint32_t Next() {
    s = s * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<uint32_t>(s >> 33);
  }
};

// --- position statistics against values computed with scipy.stats (python3-scipy 1.10.1) ---

TEST(BiasPosition, BinomialAndChiSquareMatchReferenceValues) {
  std::string data;
  // B = 2: 60 of 100 pick slot 0 -> exact two-sided binomial p = 0.05689
  // (scipy.stats.binomtest(60, 100).pvalue = 0.05688793364098088, python3-scipy 1.10.1).
  for (int i = 0; i < 100; ++i) {
    data += Json{{"id", "b2-" + std::to_string(i)}, {"prompt", "q" + std::to_string(i)},
                 {"candidates", {"alpha one", "beta two"}}, {"choice", i < 60 ? 0 : 1}, {"annotator", "a"}}
                .dump() + "\n";
  }
  // B = 4: counts [300, 250, 230, 220] -> chi-square 15.2, df 3, p 0.001653
  // (scipy.stats.chisquare([300, 250, 230, 220]): 15.2, p 0.0016534710516881654, python3-scipy 1.10.1).
  const int counts[4] = {300, 250, 230, 220};
  int id = 0;
  for (int slot = 0; slot < 4; ++slot) {
    for (int k = 0; k < counts[slot]; ++k, ++id) {
      data += Json{{"id", "b4-" + std::to_string(id)}, {"prompt", "p" + std::to_string(id)},
                   {"candidates", {"a a", "b b", "c c", "d d"}}, {"choice", slot}}
                  .dump() + "\n";
    }
  }
  std::string in = WriteFile(&MemoryFiles(), "bias_pos.jsonl", data);
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("bias_pos_out"));
  auto r = RunBias(plan);
  ASSERT_TRUE(r.ok()) << r.status().message();
  Json s = BiasSummary(plan.output);
  EXPECT_EQ(s["correction"], "holm");
  const Json& by_b = s["position"]["by_candidates"];
  ASSERT_EQ(by_b.size(), 2u);
  EXPECT_EQ(by_b[0]["candidates"], 2);
  EXPECT_EQ(by_b[0]["chosen_slot_counts"], Json({60, 40}));
  EXPECT_NEAR(by_b[0]["p"].get<double>(), 0.05689, 5e-6);
  EXPECT_EQ(by_b[1]["test"], "chi-square-uniform");
  EXPECT_NEAR(by_b[1]["chi_square"].get<double>(), 15.2, 1e-9);
  EXPECT_NEAR(by_b[1]["p"].get<double>(), 0.001653, 5e-7);
  // Holm over the two per-B tests: smallest p times 2, then max(running, p).
  EXPECT_NEAR(by_b[1]["p_adjusted"].get<double>(), 2 * by_b[1]["p"].get<double>(), 1e-12);
  EXPECT_NEAR(by_b[0]["p_adjusted"].get<double>(), by_b[0]["p"].get<double>(), 1e-12);
}

TEST(BiasPosition, PairwiseExcludedFromPositionButInLength) {
  std::string data;
  for (int i = 0; i < 30; ++i) {
    data += Json{{"id", "pw" + std::to_string(i)}, {"prompt", "q" + std::to_string(i)},
                 {"chosen", Words(i % 3 == 0 ? 3 : 8, "c")}, {"rejected", Words(5, "r")}}
                .dump() + "\n";
  }
  std::string in = WriteFile(&MemoryFiles(), "bias_pw.jsonl", data);
  Plan plan = PlanFor({in}, Json{{"preset", "pairwise"}}, TempPath("bias_pw_out"));
  ASSERT_TRUE(RunBias(plan).ok());
  Json s = BiasSummary(plan.output);
  EXPECT_EQ(s["position"]["pairwise_layout_excluded"], 30);
  EXPECT_EQ(s["position"]["records_with_a_chosen_slot"], 0);
  EXPECT_EQ(s["length"]["records_compared"], 30);
  EXPECT_EQ(s["length"]["words"]["chosen_longer"], 20);
  EXPECT_EQ(s["length"]["words"]["chosen_shorter"], 10);
  // Sign test 20 vs 10: scipy.stats.binomtest(20, 30, 0.5).pvalue = 0.09873714670538905
  // (python3-scipy 1.10.1, /usr/bin/python3, run once while writing this test).
  EXPECT_NEAR(s["length"]["words"]["p"].get<double>(), 0.09873714670538905, 1e-12);
}

// --- position rebalancing ---

// Three layouts: choice (B = 2 and 3, 1-based), ranks (B = 4, competition
// ranks, ties below the top), order (B = 3). Every record carries unknown
// fields at the top and inside candidate objects.
struct LayoutCase {
  std::string name;
  Json layout;
  std::string data;
};

std::vector<LayoutCase> RebalanceCases() {
  std::vector<LayoutCase> cases;
  Lcg g{7};
  {
    LayoutCase c{"choice", Json{{"prompt", "/q"}, {"candidates", "/c"}, {"candidate_text", "/t"}, {"choice", "/pick"},
                                {"choice_base", 1}, {"id", "/id"}},
                 ""};
    for (int i = 0; i < 101; ++i) {
      const int b = i % 3 == 0 ? 3 : 2;
      Json cands = Json::array();
      for (int k = 0; k < b; ++k) {
        cands.push_back(Json{{"t", "answer " + std::to_string(i) + "-" + std::to_string(k)},
                             {"meta", {{"k", k}, {"note", "x" + std::to_string(g.Next() % 100)}}}});
      }
      // Mostly slot 0 (a strong position bias to undo).
      const int pick = g.Next() % 10 < 8 ? 0 : static_cast<int>(g.Next() % b);
      c.data += Json{{"id", "c" + std::to_string(i)}, {"extra", {{"z", i}, {"list", {1, 2, 3}}}}, {"q", "question " + std::to_string(i)},
                     {"c", cands}, {"pick", pick + 1}, {"tail", "end"}}
                    .dump() + "\n";
    }
    cases.push_back(c);
  }
  {
    LayoutCase c{"ranks", Json{{"prompt", "/q"}, {"candidates", "/c"}, {"ranks", "/r"}, {"id", "/id"}}, ""};
    for (int i = 0; i < 50; ++i) {
      Json cands = Json::array();
      for (int k = 0; k < 4; ++k) cands.push_back("ranked " + std::to_string(i) + "-" + std::to_string(k));
      // Competition ranks with a tie below the top: 1, 2, 2, 4 in a rotating order.
      std::vector<int> r = {1, 2, 2, 4};
      std::rotate(r.begin(), r.begin() + (g.Next() % 10 < 7 ? 0 : g.Next() % 4), r.end());
      c.data += Json{{"id", "r" + std::to_string(i)}, {"q", "ranked question " + std::to_string(i)}, {"c", cands},
                     {"r", r}, {"who", "x"}}
                    .dump() + "\n";
    }
    // A tied top: no chosen slot, left alone.
    c.data += Json{{"id", "rtie"}, {"q", "tied"}, {"c", {"t1", "t2", "t3", "t4"}}, {"r", {2, 1, 1, 3}}}.dump() + "\n";
    cases.push_back(c);
  }
  {
    LayoutCase c{"order", Json{{"prompt", "/q"}, {"candidates", "/c"}, {"order", "/o"}, {"id", "/id"}}, ""};
    for (int i = 0; i < 40; ++i) {
      Json cands = Json::array();
      for (int k = 0; k < 3; ++k) cands.push_back("ordered " + std::to_string(i) + "-" + std::to_string(k));
      std::vector<int> o = {0, 1, 2};
      if (g.Next() % 4 == 0) std::swap(o[0], o[2]);
      c.data += Json{{"id", "o" + std::to_string(i)}, {"q", "ordered question " + std::to_string(i)}, {"c", cands},
                     {"o", o}}
                    .dump() + "\n";
    }
    cases.push_back(c);
  }
  return cases;
}

// candidate text -> its judgment (rank, or 1 for the chosen and 2 otherwise)
std::map<std::string, int> JudgmentByText(const LayoutCase& c, const Json& rec) {
  std::map<std::string, int> m;
  const Json& cands = rec["c"];
  for (size_t k = 0; k < cands.size(); ++k) {
    std::string text = c.name == "choice" ? cands[k]["t"].get<std::string>() : cands[k].get<std::string>();
    int judgment = 0;
    if (c.name == "choice") judgment = static_cast<int>(k) + 1 == rec["pick"].get<int>() ? 1 : 2;
    if (c.name == "ranks") judgment = rec["r"][k].get<int>();
    if (c.name == "order") {
      for (size_t p = 0; p < rec["o"].size(); ++p) {
        if (rec["o"][p].get<size_t>() == k) judgment = static_cast<int>(p) + 1;
      }
    }
    m[text] = judgment;
  }
  return m;
}

int ChosenSlot(const LayoutCase& c, const Json& rec) {
  if (c.name == "choice") return rec["pick"].get<int>() - 1;
  if (c.name == "order") return rec["o"][0].get<int>();
  int top = -1, n_top = 0;
  for (size_t k = 0; k < rec["r"].size(); ++k) {
    if (rec["r"][k] == 1) { top = static_cast<int>(k); ++n_top; }
  }
  return n_top == 1 ? top : -1;
}

std::string RunRebalance(const LayoutCase& c, uint64_t seed, unsigned threads, const std::string& tag) {
  std::string in = WriteFile(&MemoryFiles(), "bias_rb_" + c.name + ".jsonl", c.data);
  Plan plan = PlanFor({in}, c.layout, TempPath("bias_rb_" + c.name + "_" + tag));
  plan.seed = seed;
  plan.threads = threads;
  plan.stages = Json{{"bias", {{"position", {{"rebalance", true}}}}}};
  auto r = RunBias(plan);
  EXPECT_TRUE(r.ok()) << r.status().message();
  return plan.output;
}

TEST(BiasRebalance, JudgmentFollowsTextBalancedUnknownFieldsKept) {
  for (const LayoutCase& c : RebalanceCases()) {
    SCOPED_TRACE(c.name);
    std::string out = RunRebalance(c, 11, 2, "a");
    std::map<std::string, Json> before;
    std::istringstream lines(c.data);
    for (std::string line; std::getline(lines, line);) {
      Json j = Json::parse(line);
      before[j["id"].get<std::string>()] = j;
    }
    auto after = ReadJsonl(&MemoryFiles(), out + "/kept.jsonl");
    ASSERT_EQ(after.size(), before.size());
    std::map<size_t, std::vector<int>> slot_counts;  // B -> counts
    int moved = 0;
    for (const Json& a : after) {
      const Json& b = before.at(a["id"].get<std::string>());
      // 1. Every candidate keeps its judgment (so the chosen text is the same).
      EXPECT_EQ(JudgmentByText(c, a), JudgmentByText(c, b)) << a.dump();
      // 2. Candidate objects move whole: the same multiset of objects.
      std::vector<std::string> ca, cb;
      for (const auto& x : a["c"]) ca.push_back(x.dump());
      for (const auto& x : b["c"]) cb.push_back(x.dump());
      if (ca != cb) ++moved;
      std::sort(ca.begin(), ca.end());
      std::sort(cb.begin(), cb.end());
      EXPECT_EQ(ca, cb);
      // 3. Everything outside the candidates and the judgment is untouched,
      // key order included.
      Json ra = a, rb = b;
      for (const char* k : {"c", "pick", "r", "o"}) {
        ra.erase(k);
        rb.erase(k);
      }
      EXPECT_EQ(ra.dump(), rb.dump());
      const int slot = ChosenSlot(c, a);
      if (slot >= 0) {
        auto& v = slot_counts[a["c"].size()];
        v.resize(a["c"].size());
        ++v[static_cast<size_t>(slot)];
      } else {
        EXPECT_EQ(a.dump(), b.dump()) << "a tied top is left alone";
      }
    }
    EXPECT_GT(moved, 0);
    // 4. Within each B, chosen-slot counts differ by at most one.
    for (const auto& [b, v] : slot_counts) {
      auto [lo, hi] = std::minmax_element(v.begin(), v.end());
      EXPECT_LE(*hi - *lo, 1) << "B = " << b;
    }
    // The summary reports the same balance.
    Json s = BiasSummary(out);
    for (const auto& t : s["position"]["rebalance"]["after"]) {
      auto v = t["chosen_slot_counts"].get<std::vector<int>>();
      EXPECT_LE(*std::max_element(v.begin(), v.end()) - *std::min_element(v.begin(), v.end()), 1);
    }
  }
}

TEST(BiasRebalance, DeterministicUnderSeedAndThreads) {
  const LayoutCase c = RebalanceCases()[0];
  std::string a = ReadFile(&MemoryFiles(), RunRebalance(c, 11, 1, "d1") + "/kept.jsonl");
  std::string b = ReadFile(&MemoryFiles(), RunRebalance(c, 11, 2, "d2") + "/kept.jsonl");
  std::string other = ReadFile(&MemoryFiles(), RunRebalance(c, 12, 2, "d3") + "/kept.jsonl");
  EXPECT_EQ(a, b);
  EXPECT_NE(a, other);
  // The bias section of summary.json (tests and rebalancing counts) does not depend on the thread count either.
  Json s1 = BiasSummary(TempPath("bias_rb_choice_d1"));
  ASSERT_TRUE(s1.contains("position")) << s1.dump();
  EXPECT_EQ(s1.dump(), BiasSummary(TempPath("bias_rb_choice_d2")).dump());
}

TEST(BiasRebalance, OffByDefaultKeepsBytes) {
  const LayoutCase c = RebalanceCases()[0];
  std::string in = WriteFile(&MemoryFiles(), "bias_off.jsonl", c.data);
  Plan plan = PlanFor({in}, c.layout, TempPath("bias_off_out"));
  ASSERT_TRUE(RunBias(plan).ok());
  EXPECT_EQ(ReadFile(&MemoryFiles(), plan.output + "/kept.jsonl"), c.data);
}

// --- length statistics and rebalancing on generated data ---

// B = 2 records; the chosen answer is longer with probability `longer_rate`.
std::string LengthData(int n, double longer_rate, uint64_t seed, const std::string& source) {
  Lcg g{seed};
  std::string data;
  for (int i = 0; i < n; ++i) {
    const int la = 5 + static_cast<int>(g.Next() % 60);
    int lb = 5 + static_cast<int>(g.Next() % 60);
    if (lb == la) ++lb;
    const bool chosen_longer = (g.Next() % 1000) < longer_rate * 1000;
    const int pick = (la > lb) == chosen_longer ? 0 : 1;
    data += Json{{"id", source + std::to_string(i)}, {"prompt", "prompt " + source + std::to_string(i)},
                 {"candidates", {Words(la, "a"), Words(lb, "b")}}, {"choice", pick}, {"source", source}}
                .dump() + "\n";
  }
  return data;
}

TEST(BiasLength, RebalanceReachesTargetAndRejectsWithReason) {
  std::string data = LengthData(600, 0.8, 3, "biased") + LengthData(400, 0.5, 4, "fair");
  std::string in = WriteFile(&MemoryFiles(), "bias_len.jsonl", data);
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}, {"source", "/source"}}, TempPath("bias_len_out"));
  plan.seed = 5;
  plan.stages = Json{{"bias", {{"length", {{"rebalance", true}}}}}};
  ASSERT_TRUE(RunBias(plan).ok());
  Json s = BiasSummary(plan.output);
  const Json& lr = s["length"]["rebalance"];
  EXPECT_TRUE(lr["applied"].get<bool>());
  EXPECT_GT(lr["chosen_longer_share_before"].get<double>(), 0.6);
  EXPECT_NEAR(lr["chosen_longer_share_after"].get<double>(), 0.5, 0.02);
  EXPECT_NEAR(lr["after"]["words"]["chosen_longer_share"].get<double>(), 0.5, 0.02);
  // The planted source is significant before, nothing after.
  EXPECT_EQ(s["length"]["by_source"]["significant"], Json({"biased"}));
  EXPECT_TRUE(lr["after"]["by_source"]["significant"].empty());
  auto rejects = ReadJsonl(&MemoryFiles(), plan.output + "/rejects.jsonl");
  EXPECT_EQ(rejects.size(), lr["discarded"].get<size_t>());
  ASSERT_FALSE(rejects.empty());
  for (const auto& r : rejects) {
    EXPECT_EQ(r["stage"], "bias");
    EXPECT_EQ(r["reason"], "length_rebalance");
    EXPECT_TRUE(r["detail"].contains("abs_log2_ratio_bin"));
  }
  // Deterministic: a second run gives the same bytes.
  std::string first = ReadFile(&MemoryFiles(), plan.output + "/rejects.jsonl");
  plan.threads = 1;
  ASSERT_TRUE(RunBias(plan).ok());
  EXPECT_EQ(ReadFile(&MemoryFiles(), plan.output + "/rejects.jsonl"), first);
}

// --- shortcut audit ---

TEST(BiasAudit, RecoversPlantedLengthShortcut) {
  std::string in = WriteFile(&MemoryFiles(), "bias_audit.jsonl", LengthData(800, 0.9, 21, "s"));
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("bias_audit_out"));
  ASSERT_TRUE(RunBias(plan).ok());
  Json a = BiasSummary(plan.output)["shortcut_audit"];
  ASSERT_TRUE(a["ran"].get<bool>()) << a.dump();
  EXPECT_GT(a["heldout_accuracy"].get<double>(), 0.8);
  EXPECT_TRUE(a["flagged"].get<bool>());
  EXPECT_TRUE(a["fit"]["converged"].get<bool>());
  const Json& w = a["fit"]["weights"][0];
  EXPECT_EQ(w["feature"], "log1p_words");
  EXPECT_GT(w["weight"].get<double>(), 3 * w["std_error"].get<double>());
}

TEST(BiasAudit, NoShortcutNotFlagged) {
  std::string in = WriteFile(&MemoryFiles(), "bias_audit0.jsonl", LengthData(800, 0.5, 22, "s"));
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("bias_audit0_out"));
  ASSERT_TRUE(RunBias(plan).ok());
  Json a = BiasSummary(plan.output)["shortcut_audit"];
  ASSERT_TRUE(a["ran"].get<bool>());
  EXPECT_LT(a["heldout_accuracy"].get<double>(), 0.6);
  EXPECT_FALSE(a["flagged"].get<bool>());
}

TEST(BiasSettings, UnknownKeysAreUsageErrorsNamingTheKey) {
  std::string in = WriteFile(&MemoryFiles(), "bias_set.jsonl", LengthData(5, 0.5, 1, "s"));
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("bias_set_out"));
  plan.stages = Json{{"bias", {{"length", {{"rebalanse", true}}}}}};
  auto r = RunBias(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("stages.bias.length.rebalanse"), std::string::npos);
  plan.stages = Json{{"bias", {{"correction", "bonferroni"}}}};
  r = RunBias(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("stages.bias.correction"), std::string::npos);
}

}  // namespace
}  // namespace prefsift
