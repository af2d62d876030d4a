// RecordFacts kept compact (docs/performance.md): per-candidate facts for any
// number of candidates (inline up to 4, on the heap beyond), and annotator,
// thread, source and group as ids of texts interned in RunState. Expected
// values are worked out by hand from the inputs written here.
#include <gtest/gtest.h>

#include <random>
#include <string>
#include <vector>

#include "adversarial_text.h"
#include "core/hash.h"
#include "core/normalize.h"
#include "run_helpers.h"
#include "stages/facts.h"
#include "core/run_state.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

TEST(RecordFactsSize, CandidateFactsInlineAndTextsAsIds) {
  // 296 bytes before this layout (four std::vector and four std::string); the
  // bound keeps it from creeping back.
  EXPECT_LE(sizeof(RecordFacts), 232u);
}

TEST(RunStateText, InternGivesOneIdPerDistinctText) {
  Plan plan;
  RunState st(plan);
  EXPECT_EQ(st.InternText(""), 0u);
  EXPECT_EQ(st.Text(0), "");
  const uint32_t a = st.InternText("annotator-7");
  const uint32_t b = st.InternText("web");
  EXPECT_NE(a, 0u);
  EXPECT_NE(b, 0u);
  EXPECT_NE(a, b);
  EXPECT_EQ(st.InternText(std::string("annotator-") + "7"), a);
  EXPECT_EQ(st.Text(a), "annotator-7");
  EXPECT_EQ(st.Text(b), "web");
  // Many texts, short (stored inside std::string) and long: every earlier text
  // and id stays valid while the table grows.
  std::vector<uint32_t> ids;
  for (int i = 0; i < 5000; ++i) {
    ids.push_back(st.InternText((i % 2 ? "t" : "a much longer thread name, past any short-string buffer #") +
                                std::to_string(i)));
  }
  for (int i = 0; i < 5000; ++i) {
    const std::string want =
        (i % 2 ? "t" : "a much longer thread name, past any short-string buffer #") + std::to_string(i);
    ASSERT_EQ(st.Text(ids[static_cast<size_t>(i)]), want);
    ASSERT_EQ(st.InternText(want), ids[static_cast<size_t>(i)]);
  }
  EXPECT_EQ(st.text_count(), 5003u);  // "", "annotator-7", "web", 5000 more
}

TEST(ComputeFacts, SixCandidatesGoToTheHeapWithEveryValue) {
  Record rec;
  rec.id = "six";
  rec.prompt = "Which tool?";
  rec.candidates = {"Spade", "Fork", "Hoe", "Rake", "Trowel", "Garden shears"};
  rec.shape = JudgmentShape::kRanks;
  rec.ranks = {3, 1, 2, 6, 5, 4};
  rec.chosen = 1;
  rec.annotator = "ann-a";
  rec.source = "web";
  MatchText text;
  std::vector<CandidateFacts> cands;
  RecordFacts f = ComputeFacts(rec, NormalizeOptions{}, &text, &cands);
  ASSERT_EQ(f.cands.size(), 6u);
  EXPECT_EQ(f.cands.data(), cands.data());  // ComputeFacts' buffer, until the run keeps them
  for (size_t i = 0; i < 6; ++i) EXPECT_EQ(f.cands[i].hash, HashBytes(NormalizeForMatch(rec.candidates[i]))) << i;
  EXPECT_EQ(RanksOf(f), rec.ranks);
  std::vector<uint32_t> chars, words;
  for (const CandidateFacts& c : f.cands) {
    chars.push_back(c.chars);
    words.push_back(c.words);
  }
  EXPECT_EQ(chars, (std::vector<uint32_t>{5, 4, 3, 4, 6, 13}));
  EXPECT_EQ(words, (std::vector<uint32_t>{1, 1, 1, 1, 1, 2}));
  // Ids are set in input order by the pipeline, not by ComputeFacts (worker threads).
  EXPECT_EQ(f.annotator_id, 0u);
  Plan plan;
  RunState st(plan);
  KeepRecordFacts(rec, st, &f);
  EXPECT_NE(f.cands.data(), cands.data());  // the run's copy
  cands.assign(cands.size(), CandidateFacts{});
  EXPECT_EQ(RanksOf(f), rec.ranks);
  EXPECT_EQ(st.Text(f.annotator_id), "ann-a");
  EXPECT_EQ(st.Text(f.source_id), "web");
  EXPECT_EQ(f.thread_id, 0u);  // absent
  EXPECT_EQ(f.group_id, 0u);

  // Copies and moves of the whole struct view the same kept values.
  RecordFacts copy = f;
  RecordFacts moved = std::move(f);
  ASSERT_EQ(copy.cands.size(), moved.cands.size());
  for (size_t i = 0; i < copy.cands.size(); ++i) {
    EXPECT_EQ(copy.cands[i].hash, moved.cands[i].hash) << i;
    EXPECT_EQ(copy.cands[i].chars, moved.cands[i].chars) << i;
    EXPECT_EQ(copy.cands[i].words, moved.cands[i].words) << i;
  }
  EXPECT_EQ(RanksOf(copy), rec.ranks);
}

// Records with 5 and 6 candidates through exact dedup and the split composition.
TEST(RecordFactsPipeline, MoreThanFourCandidates) {
  const Json layout{{"preset", "ranked"}, {"source", "/src"}, {"annotator", "/who"}, {"thread", "/th"}};
  auto line = [](const std::string& id, const std::vector<std::string>& c, const std::vector<int>& r,
                 const std::string& src, const std::string& who) {
    return Json{{"id", id}, {"prompt", "Which tool for clay soil?"}, {"candidates", c}, {"ranks", r},
                {"src", src}, {"who", who}, {"th", "t-" + id}}
               .dump() +
           "\n";
  };
  const std::vector<std::string> tools = {"Spade", "Fork", "Hoe", "Rake", "Trowel", "Shears"};
  const std::vector<std::string> reversed(tools.rbegin(), tools.rend());
  std::string data;
  data += line("r1", tools, {1, 2, 3, 4, 5, 6}, "web", "ann-a");
  // r1 with the candidates reversed and the same judgment: a duplicate comparison.
  data += line("r2", reversed, {6, 5, 4, 3, 2, 1}, "web", "ann-b");
  data += line("r3", reversed, {6, 5, 4, 3, 2, 1}, "forum", "ann-b");
  // Same comparison, another judgment: the minority of three.
  data += line("r4", tools, {2, 1, 3, 4, 5, 6}, "forum", "ann-a");
  // The 5th and 6th candidates are one text after case folding, ranked apart.
  data += line("r5", {"Spade", "Fork", "Hoe", "Mulch", "mulch", "MULCH"}, {1, 2, 3, 4, 5, 6}, "web", "ann-a");
  data += line("r6", {"Spade", "Fork", "Hoe", "Rake", "Trowel"}, {5, 4, 3, 2, 1}, "forum", "ann-c");
  const std::string in = WriteFile(&MemoryFiles(), "facts_b6.jsonl", data);
  const std::string out = TempPath("facts_b6_out");
  PipelineOptions o;
  o.stages = {"exact", "split"};
  o.table = false;
  auto r = RunPipeline(PlanFor({in}, layout, out), o, &MemoryFiles(), stderr);
  ASSERT_TRUE(r.ok()) << r.status().message();

  std::map<std::string, std::string> reason;
  for (const auto& j : ReadJsonl(&MemoryFiles(), out + "/rejects.jsonl")) reason[j["id"].get<std::string>()] = j["reason"];
  EXPECT_EQ(reason["r2"], "duplicate_comparison");
  EXPECT_EQ(reason["r3"], "duplicate_comparison");
  EXPECT_EQ(reason["r4"], "label_conflict_minority");
  EXPECT_EQ(reason["r5"], "degenerate_comparison");
  EXPECT_EQ(reason.count("r1"), 0u);
  EXPECT_EQ(reason.count("r6"), 0u);

  // conflicts.jsonl lists each member's ranks: all six, in file order.
  auto conflicts = ReadJsonl(&MemoryFiles(), out + "/conflicts.jsonl");
  ASSERT_EQ(conflicts.size(), 1u);
  std::map<std::string, std::vector<int>> ranks;
  for (const auto& m : conflicts[0]["members"]) ranks[m["id"].get<std::string>()] = m["ranks"].get<std::vector<int>>();
  EXPECT_EQ(ranks["r1"], (std::vector<int>{1, 2, 3, 4, 5, 6}));
  EXPECT_EQ(ranks["r2"], (std::vector<int>{6, 5, 4, 3, 2, 1}));
  EXPECT_EQ(ranks["r4"], (std::vector<int>{2, 1, 3, 4, 5, 6}));

  // Composition of the kept records r1 (6 candidates, web, ann-a) and r6 (5, forum, ann-c).
  auto summary = Json::parse(ReadFile(&MemoryFiles(), out + "/summary.json"));
  const Json& c = summary["stages"]["split"]["composition"];
  EXPECT_EQ(c["candidates_per_record"], (Json{{"5", 1}, {"6", 1}}));
  EXPECT_EQ(c["sources"], (Json{{"forum", 1}, {"web", 1}}));
  EXPECT_EQ(c["annotators"]["distinct"], 2);
  EXPECT_EQ(c["annotators"]["records_with_annotator"], 2);
  EXPECT_EQ(c["records_with_thread"], 2);
  EXPECT_TRUE(summary["ledger"]["balanced"].get<bool>());
}

// One RecordFacts per record, one Entry and one Decision per input line: their
// sizes set the run's memory per record (docs/performance.md, "Memory"). 96,
// 16 and 16 bytes with libstdc++ on x86-64 (a std::string is 32 bytes there),
// plus 32 bytes a candidate in the run's CandidateStore.
TEST(RecordFacts, StayWithinTheirMemoryBudget) {
  EXPECT_EQ(sizeof(CandidateFacts), 32u);
  EXPECT_LE(sizeof(RecordFacts), 64 + sizeof(std::string));
  EXPECT_LE(sizeof(Decision), 16u);
  EXPECT_LE(sizeof(Entry), 16u);
}

// The store keeps every record's candidates where they were put, across
// blocks, and records larger than a block.
TEST(CandidateStore, KeptFactsNeverMove) {
  CandidateStore store;
  std::vector<std::span<const CandidateFacts>> kept;
  std::vector<CandidateFacts> facts;
  for (int r = 0; r < 30000; ++r) {
    const size_t b = r == 777 ? 40000 : 2 + static_cast<size_t>(r % 3);  // one record larger than a block
    facts.assign(b, CandidateFacts{});
    for (size_t i = 0; i < b; ++i) facts[i].rank = static_cast<int32_t>(r * 10 + static_cast<int>(i % 10));
    kept.push_back(store.Keep(facts));
  }
  for (int r = 0; r < 30000; ++r) {
    const auto& k = kept[static_cast<size_t>(r)];
    ASSERT_EQ(k.size(), r == 777 ? 40000u : 2 + static_cast<size_t>(r % 3)) << r;
    for (size_t i = 0; i < k.size(); ++i) ASSERT_EQ(k[i].rank, r * 10 + static_cast<int>(i % 10)) << r;
  }
  EXPECT_TRUE(store.Keep({}).empty());
}

// Differential tests: the block counts (CountCodePoints, CountWords) equal the
// plain byte loops kept as their references, on random and adversarial texts
// (every byte value, U+3000 whole, cut short and across a block's end, views
// whose next bytes would change the count if read). Worked examples by hand
// beside them.
TEST(FactCounts, WorkedExamples) {
  EXPECT_EQ(CountWords("  two\twords\n"), 2u);
  EXPECT_EQ(CountWords("a\xE3\x80\x80" "b"), 2u);  // U+3000 separates
  EXPECT_EQ(CountWords("a\xE3\x80" "b"), 1u);       // cut short: not a separator
  EXPECT_EQ(CountCodePoints("na\xC3\xAFve \xE6\x97\xA5"), 7u);  // "naïve 日": Python len() gives 7
}

TEST(FactCounts, BlockCountsEqualTheByteLoops) {
  for (uint64_t seed = 1; seed <= 6; ++seed) {
    std::mt19937_64 rng(seed);
    for (size_t n : testing::AdversarialLengths()) {
      const std::string s = testing::AdversarialText(rng, n + 24);
      const std::string_view v = std::string_view(s).substr(0, n);
      ASSERT_EQ(CountCodePoints(v), CountCodePointsReference(v)) << ::testing::PrintToString(std::string(v));
      ASSERT_EQ(CountWords(v), CountWordsReference(v)) << ::testing::PrintToString(std::string(v));
    }
  }
}

TEST(FactCounts, IdeographicSpaceAtEveryPlaceOfABlockAndCutShort) {
  for (size_t at = 0; at < 140; ++at) {
    for (const char* tail : {"\xE3\x80\x80", "\xE3\x80\x80" "b", "\xE3\x80", "\xE3", "\xE3\xE3\x80\x80" "c"}) {
      const std::string s = std::string(at, 'a') + tail + "\xE3\x80\x80";
      for (size_t k = 0; k <= s.size(); ++k) {
        const std::string_view v = std::string_view(s).substr(0, k);
        ASSERT_EQ(CountWords(v), CountWordsReference(v)) << at << " " << k;
        ASSERT_EQ(CountCodePoints(v), CountCodePointsReference(v)) << at << " " << k;
      }
    }
  }
  std::string all;
  for (int c = 0; c < 256; ++c) all.push_back(static_cast<char>(c));
  for (size_t k = 0; k <= all.size(); ++k) {
    const std::string_view v = std::string_view(all).substr(k);
    ASSERT_EQ(CountWords(v), CountWordsReference(v));
    ASSERT_EQ(CountCodePoints(v), CountCodePointsReference(v));
  }
}

}  // namespace
}  // namespace prefsift
