// Tests of the leakage stage and its parts: eval-set loading, the n-gram
// detector (worked examples, the short-example rule, a differential test
// against a brute-force reference), the near-duplicate detector (Jaccard and
// the embedded/containment case), the stage in the pipeline and the split audit.
//
// Sources: Brown et al. 2020, "Language Models are Few-Shot Learners",
// arXiv:2005.14165, appendix C: 13-gram overlap filter [S]; the overlap study's
// N = 5th-percentile length clamped to [8, 13] and "an example shorter than N
// must match whole" are (from memory, unverified) -- see docs/leakage.md.
#include <gtest/gtest.h>

#include <cmath>
#include <map>
#include <random>
#include <set>
#include <unordered_set>

#include "io/file_system.h"
#include "run_helpers.h"
#include "stages/leakage/eval_index.h"
#include "stages/leakage/leak_index.h"
#include "stages/leakage/ngram_overlap.h"
#include "sketch/set_similarity.h"
#include "sketch/shingles.h"
#include "audit/split_audit.h"

namespace prefsift {
namespace {

using namespace prefsift::testing;  // NOLINT
using Json = nlohmann::ordered_json;

std::vector<std::string> Split(const std::string& s) {
  std::vector<std::string> w;
  std::string cur;
  for (char c : s) {
    if (c == ' ') {
      if (!cur.empty()) w.push_back(cur);
      cur.clear();
    } else {
      cur.push_back(c);
    }
  }
  if (!cur.empty()) w.push_back(cur);
  return w;
}

std::string Join(const std::vector<std::string>& w, size_t from, size_t n) {
  std::string s;
  for (size_t i = from; i < from + n && i < w.size(); ++i) s += (i > from ? " " : "") + w[i];
  return s;
}

// A 20-word evaluation prompt (already normalised).
const std::string kEval20 =
    "what is the best way to store saved bean seed over winter so that it still germinates well next spring";

TEST(NgramOverlap, ThirteenGramWorkedExample) {
  // Brown et al. 2020 App. C [S]: dirty when a 13-gram of words is shared.
  std::vector<std::string> eval{kEval20};
  NgramOptions o;  // n = 13
  NgramIndex idx(eval, o);
  auto w = Split(kEval20);
  ASSERT_EQ(w.size(), 20u);
  // Words 3..15 (13 words) inside other text: dirty, and the span is exactly those words.
  std::string t13 = "my aunt asked me " + Join(w, 3, 13) + " and i had no idea";
  NgramHit hit;
  ASSERT_TRUE(idx.MatchBest(t13, &hit));
  EXPECT_EQ(hit.item, 0u);
  EXPECT_EQ(hit.shared, 1u);
  EXPECT_EQ(hit.words, 13u);
  EXPECT_EQ(hit.start_word, 4u);
  EXPECT_FALSE(hit.short_item);
  // Only 12 consecutive words: clean.
  std::string t12 = "my aunt asked me " + Join(w, 3, 12) + " and i had no idea";
  EXPECT_FALSE(idx.MatchBest(t12, &hit));
  // Two 12-word pieces of the item separated by another word: still clean.
  EXPECT_FALSE(idx.MatchBest(Join(w, 0, 12) + " banana " + Join(w, 8, 12), &hit));
  // The whole item: 20 - 13 + 1 = 8 distinct shared 13-grams.
  ASSERT_TRUE(idx.MatchBest(kEval20, &hit));
  EXPECT_EQ(hit.shared, 8u);
}

TEST(NgramOverlap, MinSharedThreshold) {
  std::vector<std::string> eval{kEval20};
  NgramOptions o;
  o.min_shared = 2;
  NgramIndex idx(eval, o);
  auto w = Split(kEval20);
  NgramHit hit;
  EXPECT_FALSE(idx.MatchBest("x " + Join(w, 0, 13) + " y", &hit));  // one 13-gram
  EXPECT_TRUE(idx.MatchBest("x " + Join(w, 0, 14) + " y", &hit));   // two 13-grams
  EXPECT_EQ(hit.shared, 2u);
}

TEST(NgramOverlap, ShortExampleRule) {
  // (from memory, unverified) An evaluation item shorter than N words is dirty
  // only when the whole item appears, contiguously and in order.
  std::vector<std::string> eval{"how do i save tomato seed", "hello there", kEval20};
  NgramOptions o;  // n = 13, min_eval_words = 3 (our choice)
  NgramIndex idx(eval, o);
  EXPECT_EQ(idx.short_items(), 1u);
  EXPECT_EQ(idx.skipped_items(), 1u);  // "hello there": 2 words < min_eval_words
  NgramHit hit;
  ASSERT_TRUE(idx.MatchBest("please tell me how do i save tomato seed at home", &hit));
  EXPECT_EQ(hit.item, 0u);
  EXPECT_TRUE(hit.short_item);
  EXPECT_EQ(hit.start_word, 3u);
  EXPECT_EQ(hit.words, 6u);
  EXPECT_FALSE(idx.MatchBest("how do i save seed from a tomato", &hit));   // all words, not contiguous
  EXPECT_FALSE(idx.MatchBest("how do i save tomato", &hit));               // part of the item
  EXPECT_TRUE(idx.MatchBest("how do i save tomato seed", &hit));           // the item itself
  EXPECT_FALSE(idx.MatchBest("hello there friend", &hit));                 // skipped item
  NgramOptions all = o;
  all.min_eval_words = 1;  // the rule as written, without our lower bound
  NgramIndex idx1(eval, all);
  EXPECT_TRUE(idx1.MatchBest("hello there friend", &hit));
}

TEST(NgramOverlap, AutoLength) {
  // Brown et al. 2020, "Language Models are Few-Shot Learners", arXiv:2005.14165, appendix C: N = the 5th
  // percentile of the example lengths in words, at least 8 and at most 13 (from memory, unverified). So a 5th
  // percentile of 6 words gives N = 8 (the lower clamp) and one of 20 gives N = 13 (the upper clamp).
  std::vector<uint32_t> a(100, 30);
  for (int i = 0; i < 5; ++i) a[i] = 6;
  EXPECT_EQ(AutoNgramLength(a), 8);
  std::vector<uint32_t> b(100, 40);
  for (int i = 0; i < 5; ++i) b[i] = 20;
  EXPECT_EQ(AutoNgramLength(b), 13);
  std::vector<uint32_t> c(100, 10);
  EXPECT_EQ(AutoNgramLength(c), 10);
  EXPECT_EQ(AutoNgramLength({}), 13);
}

// Differential test: NgramIndex against a brute-force reference that compares
// every training prompt with every evaluation prompt by exact intersection of
// their n-gram sets (as word strings, no hashing), with the short-example rule.
TEST(NgramOverlap, MatchesBruteForceReference) {
  std::mt19937_64 rng(20260401);
  std::vector<std::string> vocab;
  for (int i = 0; i < 40; ++i) vocab.push_back("w" + std::to_string(i));
  auto word = [&] { return vocab[rng() % vocab.size()]; };
  std::vector<std::vector<std::string>> eval(300);
  for (auto& e : eval) {
    size_t len = 1 + rng() % 14;  // 1..14 words: long and short items
    for (size_t i = 0; i < len; ++i) e.push_back(word());
  }
  std::vector<std::vector<std::string>> train(3000);
  for (auto& t : train) {
    size_t pieces = 1 + rng() % 4;
    for (size_t p = 0; p < pieces; ++p) {
      for (size_t i = rng() % 4; i > 0; --i) t.push_back(word());
      const auto& e = eval[rng() % eval.size()];  // a fragment of an evaluation item, 1..8 words
      size_t len = std::min<size_t>(e.size(), 1 + rng() % 8);
      size_t from = rng() % (e.size() - len + 1);
      t.insert(t.end(), e.begin() + from, e.begin() + from + len);
    }
  }
  for (int n : {5, 8}) {
    for (uint32_t min_shared : {1u, 2u}) {
      NgramOptions o;
      o.n = n;
      o.min_eval_words = 2;
      o.min_shared = min_shared;
      std::vector<std::string> eval_text;
      for (auto& e : eval) eval_text.push_back(Join(e, 0, e.size()));
      NgramIndex idx(eval_text, o);
      auto grams = [](const std::vector<std::string>& w, size_t k) {
        std::set<std::string> g;
        for (size_t i = 0; i + k <= w.size(); ++i) g.insert(Join(w, i, k));
        return g;
      };
      std::vector<std::set<std::string>> eval_grams;
      for (auto& e : eval) eval_grams.push_back(e.size() >= size_t(n) ? grams(e, n) : std::set<std::string>{});
      uint64_t dirty_pairs = 0, short_pairs = 0;
      for (const auto& t : train) {
        std::set<std::string> tg = grams(t, n);
        std::unordered_set<std::string> tt(tg.begin(), tg.end());
        std::string tjoined = " " + Join(t, 0, t.size()) + " ";
        std::vector<uint32_t> want;
        for (uint32_t i = 0; i < eval.size(); ++i) {
          const auto& e = eval[i];
          if (e.size() < size_t(o.min_eval_words)) continue;
          if (e.size() < size_t(n)) {
            if (tjoined.find(" " + Join(e, 0, e.size()) + " ") != std::string::npos) {
              want.push_back(i);
              ++short_pairs;
            }
            continue;
          }
          uint32_t shared = 0;
          for (const auto& g : eval_grams[i]) shared += tt.count(g);
          if (shared >= min_shared) want.push_back(i);
        }
        std::vector<uint32_t> got;
        for (const auto& h : idx.MatchAll(Join(t, 0, t.size()))) got.push_back(h.item);
        ASSERT_EQ(got, want) << "n=" << n << " training prompt: " << Join(t, 0, t.size());
        dirty_pairs += want.size();
      }
      // The generator must produce both kinds of verdict in quantity.
      EXPECT_GT(dirty_pairs, 1000u) << "n=" << n;
      EXPECT_GT(short_pairs, 500u) << "n=" << n;
    }
  }
}

struct Fixture {
  EvalCorpus corpus;
  std::unique_ptr<LeakIndex> index;
};

Fixture MakeIndex(const std::vector<std::string>& prompts, LeakSettings s, std::vector<std::string> refs = {},
                  unsigned threads = 1) {
  Fixture f;
  f.corpus.sets.push_back(EvalSetInfo{});
  f.corpus.sets[0].spec.name = "t";
  for (size_t i = 0; i < prompts.size(); ++i) {
    EvalItem it;
    it.id = std::to_string(i + 1);
    it.text = prompts[i];
    if (i < refs.size()) it.reference = refs[i];
    f.corpus.items.push_back(it);
  }
  auto idx = LeakIndex::Build(f.corpus, s, NormalizeOptions{}, threads);
  EXPECT_TRUE(idx.ok()) << idx.status().message();
  f.index = std::move(idx).value();
  return f;
}

std::string Words(int n, int offset) {
  // n distinct made-up words (no repeats, so every shingle is distinct).
  std::string s;
  for (int i = 0; i < n; ++i) s += (i ? " " : "") + std::string("word") + std::to_string(offset + i);
  return s;
}

TEST(LeakIndex, ExactAfterNormalisation) {
  LeakSettings s;
  s.enabled[1] = s.enabled[2] = false;
  auto f = MakeIndex({"What is the best compost for seedlings?"}, s);
  std::vector<LeakFinding> out;
  f.index->CheckPrompt("  WHAT is the   best compost for seedlings?\n", false, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].detector, LeakDetector::kExact);
  out.clear();
  f.index->CheckPrompt("What is the best compost for seedlings", false, &out);  // punctuation differs
  EXPECT_TRUE(out.empty());
}

TEST(LeakIndex, NgramIgnoresPunctuationAndCase) {
  LeakSettings s;
  s.enabled[0] = s.enabled[2] = false;
  auto f = MakeIndex({kEval20}, s);
  std::vector<LeakFinding> out;
  // Punctuation removal deletes the hyphen (Unicode category Pd, docs/normalisation.md), so "bean-seed" becomes
  // the one word "beanseed": the prompt's words are "q what is the best way to store saved beanseed over winter so
  // that it still", whose longest run shared with the item is 8 words ("what ... saved"), under 13. A known miss
  // of word n-grams on joined words: nothing is found.
  f.index->CheckPrompt("Q: What is the BEST way to store saved bean-seed, over winter... so that it still?", false, &out);
  EXPECT_TRUE(out.empty()) << out.size() << " finding(s), first span: " << (out.empty() ? "" : std::string(out[0].span));
  // The same words with a space instead of the hyphen share the 13-gram "what ... so".
  out.clear();
  f.index->CheckPrompt("Q: What is the BEST way to store saved bean seed, over winter... so that it still?", false, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].detector, LeakDetector::kNgram);
  // The span is the covered part of the evaluation item (normalised words).
  EXPECT_EQ(std::string(out[0].span), "what is the best way to store saved bean seed over winter so that it still");
}

TEST(LeakIndex, NearJaccardAndEmbeddedContainment) {
  LeakSettings s;
  s.enabled[0] = s.enabled[1] = false;  // near only
  const std::string eval = Words(80, 0);
  auto f = MakeIndex({eval, Words(30, 1000)}, s);
  // One word replaced in an 80-word item: 5-gram Jaccard (76-5)/(76+5) = 0.877 >= 0.8.
  std::string edited = eval;
  edited.replace(edited.find("word40 "), 7, "other ");
  std::vector<LeakFinding> out;
  f.index->CheckPrompt(edited, false, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].item, 0u);
  EXPECT_STREQ(out[0].measure, "jaccard");
  EXPECT_NEAR(out[0].score, 0.877, 0.12);  // MinHash estimate, K = 128
  EXPECT_EQ(out[0].span, Join(Split(eval), 0, 20));  // the longest shared run, capped at 20 words
  // Embedded: the 30-word item inside 200 words of other text. Jaccard 26/(26+196+...) is small,
  // containment of the item's shingles is 1.
  std::string embedded = Words(100, 5000) + " " + Words(30, 1000) + " " + Words(100, 7000);
  out.clear();
  f.index->CheckPrompt(embedded, false, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].item, 1u);
  EXPECT_STREQ(out[0].measure, "containment");
  EXPECT_FLOAT_EQ(out[0].score, 1.0f);
  // Half of the item embedded: containment 11/26 < 0.8, clean.
  out.clear();
  f.index->CheckPrompt(Words(100, 5000) + " " + Words(15, 1000), false, &out);
  EXPECT_TRUE(out.empty());
}

TEST(LeakIndex, ContainmentPrefixFilterIsExact) {
  // Every eval item whose shingles are >= 80% contained must be found (the
  // prefix filter may not lose any): sweep the contained share.
  LeakSettings s;
  s.enabled[0] = s.enabled[1] = false;
  s.jaccard = 0;  // containment only
  auto f = MakeIndex({Words(44, 0)}, s);  // 40 shingles
  for (int keep = 20; keep <= 44; ++keep) {
    std::string t = Words(50, 9000) + " " + Words(keep, 0);
    std::vector<LeakFinding> out;
    f.index->CheckPrompt(t, false, &out);
    int shingles = keep - 4;  // shared 5-grams
    bool want = shingles >= 32;   // ceil(0.8 * 40)
    EXPECT_EQ(!out.empty(), want) << "keep " << keep;
  }
}

TEST(LeakIndex, NearWithTemplateItemsBandsInformativeShingles) {
  // 40 items that all open with the same 40 stock words (36 shingles in every
  // item: template text, set aside) and go on with 40 words of their own. The
  // bands are keyed by the informative shingles; copies are still found by
  // the whole-set Jaccard test, stock text alone is not a match.
  LeakSettings s;
  s.enabled[0] = s.enabled[1] = false;  // near only
  const std::string stock = Words(40, 0);
  std::vector<std::string> items;
  for (int i = 0; i < 40; ++i) items.push_back(stock + " " + Words(40, 1000 + 100 * i));
  auto f = MakeIndex(items, s);
  Json tmpl;
  f.index->TemplateJson(5, &tmpl);
  EXPECT_EQ(tmpl["near"]["shingles_set_aside"], 36);
  std::vector<LeakFinding> out;
  f.index->CheckPrompt(items[7], false, &out);  // verbatim: Jaccard 1
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].item, 7u);
  EXPECT_STREQ(out[0].measure, "jaccard");
  // One word of the item's own text changed: 5 of its 40 informative shingles
  // lost (containment 35/40 = 0.875), whole-set Jaccard 71/81 = 0.877.
  std::string edited = items[7];
  edited.replace(edited.find("word1720 "), 9, "other ");
  out.clear();
  f.index->CheckPrompt(edited, false, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].item, 7u);
  // The stock text with 40 words of other text: whole-set Jaccard 36/120 = 0.3, nothing.
  out.clear();
  f.index->CheckPrompt(stock + " " + Words(40, 90000), false, &out);
  EXPECT_TRUE(out.empty());
  // The stock text alone: every shingle is template text, no band candidate and containment 0.
  out.clear();
  f.index->CheckPrompt(stock, false, &out);
  EXPECT_TRUE(out.empty());
}

TEST(LeakIndex, ContainmentWithTemplateTextAgainstBruteForce) {
  // The per-prompt check skips the template shingles before the prefix
  // lookups and intersects an item's informative shingles with the prompt's
  // informative ones only (docs/leakage.md, "Per-prompt check"). Against a
  // brute-force containment over the whole shingle sets (template shingles:
  // those in 10 or more items, the default cut): 40 items with 40 stock words
  // and 40 words of their own; prompts with the stock text twice (repeated
  // shingles), a varying part of item 7's own words, and other text. Every
  // item at or above the threshold is found, with its containment as the
  // score; with Jaccard on too, an item is found by one test or the other.
  const std::string stock = Words(40, 0);
  std::vector<std::string> items;
  for (int i = 0; i < 40; ++i) items.push_back(stock + " " + Words(40, 1000 + 100 * i));
  sketch::ShingleOptions so;  // the index's shingles: words, n = 5
  so.word_n = 5;
  std::map<uint64_t, int> item_count;
  std::vector<std::vector<uint64_t>> sets;
  for (const auto& t : items) {
    sets.push_back(sketch::Shingles(t, so));
    for (uint64_t g : sets.back()) ++item_count[g];
  }
  for (double jaccard : {0.0, 0.8}) {
    LeakSettings s;
    s.enabled[0] = s.enabled[1] = false;  // near only
    s.jaccard = jaccard;
    auto f = MakeIndex(items, s);
    for (int keep = 0; keep <= 40; keep += 2) {
      const std::string t = stock + " " + Words(30, 90000) + " " + stock + " " + Words(keep, 1700) + " " + Words(20, 95000);
      const auto prompt = sketch::Shingles(t, so);
      std::vector<LeakFinding> out;
      f.index->CheckPrompt(t, true, &out);
      std::set<uint32_t> found;
      for (const auto& x : out) {
        found.insert(x.item);
        std::vector<uint64_t> e;
        for (uint64_t g : sets[x.item]) {
          if (item_count[g] < 10) e.push_back(g);
        }
        const double c = static_cast<double>(sketch::IntersectionSize(e, prompt)) / static_cast<double>(e.size());
        if (std::string(x.measure) == "containment") {
          EXPECT_FLOAT_EQ(x.score, static_cast<float>(c)) << "keep " << keep << " item " << x.item;
        }
      }
      for (uint32_t i = 0; i < items.size(); ++i) {
        std::vector<uint64_t> e;
        for (uint64_t g : sets[i]) {
          if (item_count[g] < 10) e.push_back(g);
        }
        const uint64_t inter = sketch::IntersectionSize(e, prompt);
        const bool want = inter >= static_cast<uint64_t>(std::ceil(0.8 * static_cast<double>(e.size()) - 1e-9));
        if (want) EXPECT_TRUE(found.count(i)) << "keep " << keep << " item " << i << " jaccard " << jaccard;
        if (jaccard == 0) EXPECT_EQ(found.count(i) == 1, want) << "keep " << keep << " item " << i;
      }
      if (HasFailure()) return;
    }
  }
}

TEST(LeakIndex, ReferenceAnswers) {
  LeakSettings s;
  s.enabled[3] = true;
  auto f = MakeIndex({"how deep should i sow broad beans"}, s, {kEval20});
  std::vector<LeakFinding> out;
  f.index->CheckAnswer(kEval20 + " thanks", 1, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_EQ(out[0].detector, LeakDetector::kAnswer);
  EXPECT_EQ(out[0].candidate, 1);
  EXPECT_STREQ(out[0].measure, "coverage");
  out.clear();
  f.index->CheckAnswer(kEval20, 0, &out);
  ASSERT_EQ(out.size(), 1u);
  EXPECT_STREQ(out[0].measure, "exact");
}

TEST(LeakIndex, TablesBuiltSideBySideGiveTheSameFindings) {
  // With threads other than 1 the n-gram and answers' indexes are built on
  // helper threads beside the MinHash tables; every detector's findings must
  // be those of the one-thread build (the project's own build as reference).
  const std::string stock = Words(30, 0);
  std::vector<std::string> items, refs;
  for (int i = 0; i < 60; ++i) {
    items.push_back((i % 3 ? stock + " " : "") + Words(25, 1000 + 100 * i));
    refs.push_back(i % 4 ? Words(20, 50000 + 100 * i) : "");
  }
  LeakSettings s;
  s.enabled[0] = s.enabled[1] = s.enabled[2] = s.enabled[3] = true;
  s.jaccard = 0.6;
  auto one = MakeIndex(items, s, refs, 1);
  for (unsigned threads : {0u, 2u, 4u}) {
    auto many = MakeIndex(items, s, refs, threads);
    int found = 0;
    for (int i = 0; i < 60; ++i) {
      for (const std::string& t : {items[i], stock + " " + Words(14, 1000 + 100 * i), Words(18, 1003 + 100 * i),
                                   refs[i] + " thanks"}) {
        std::vector<LeakFinding> a, b;
        one.index->CheckPrompt(t, true, &a);
        many.index->CheckPrompt(t, true, &b);
        one.index->CheckAnswer(t, 1, &a);
        many.index->CheckAnswer(t, 1, &b);
        ASSERT_EQ(a.size(), b.size()) << "threads " << threads << " item " << i;
        for (size_t k = 0; k < a.size(); ++k) {
          EXPECT_EQ(a[k].detector, b[k].detector);
          EXPECT_EQ(a[k].item, b[k].item);
          EXPECT_STREQ(a[k].measure, b[k].measure);
          EXPECT_EQ(a[k].score, b[k].score);
        }
        found += static_cast<int>(a.size());
      }
    }
    EXPECT_GT(found, 200) << "the prompts must find items by every detector";
  }
}

TEST(EvalSets, FormatsAndErrors) {
  std::string txt = WriteFile("leak_eval.txt", "first prompt here\n\nthird line prompt\n");
  std::string jl = WriteFile("leak_eval.jsonl",
                             R"({"q":{"text":"a question"},"ans":"an answer","qid":"e-1"})" "\n"
                             R"({"q":{"text":"another question"},"qid":7})" "\n");
  auto specs = ParseEvalSetSpecs(
      Json::parse(R"([{"name":"a","path":")" + txt + R"("},
                      {"name":"b","path":")" + jl + R"(","text":"/q/text","reference":"/ans","id":"/qid"}])"),
      "", "stages.leakage.eval_sets");
  ASSERT_TRUE(specs.ok()) << specs.status().message();
  auto c = LoadEvalSets(specs.value(), DefaultFileSystem(), InputLimits{});
  ASSERT_TRUE(c.ok()) << c.status().message();
  ASSERT_EQ(c.value().items.size(), 4u);
  EXPECT_EQ(c.value().items[1].id, "3");  // text: the line number, blank lines counted
  EXPECT_EQ(c.value().items[2].id, "e-1");
  EXPECT_EQ(c.value().items[2].reference, "an answer");
  EXPECT_EQ(c.value().items[3].id, "7");
  EXPECT_EQ(c.value().sets[1].with_reference, 1u);
  // Errors.
  auto bad = ParseEvalSetSpecs(Json::parse(R"([{"name":"a","path":"x.jsonl"}])"), "", "w");
  EXPECT_FALSE(bad.ok());
  EXPECT_NE(bad.status().message().find("w[0].format"), std::string::npos);
  auto unknown = ParseEvalSetSpecs(Json::parse(R"([{"name":"a","path":"x.txt","colour":"red"}])"), "", "w");
  EXPECT_NE(unknown.status().message().find("colour"), std::string::npos);
  auto missing = ParseEvalSetSpecs(Json::parse(R"([{"name":"gone","path":"/nonexistent/eval.txt"}])"), "", "w");
  ASSERT_TRUE(missing.ok());
  auto load = LoadEvalSets(missing.value(), DefaultFileSystem(), InputLimits{});
  ASSERT_FALSE(load.ok());
  EXPECT_EQ(load.status().code(), StatusCode::kInput);
  EXPECT_NE(load.status().message().find("/nonexistent/eval.txt"), std::string::npos);
}

Result<RunOutcome> RunLeakage(Plan plan) {
  PipelineOptions o;
  o.stages = {"leakage"};
  o.table = false;
  return RunPipeline(plan, o, DefaultFileSystem(), stderr);
}

std::string Rec(const std::string& id, const std::string& prompt, const std::string& a = "yes", const std::string& b = "no") {
  return Json{{"id", id}, {"prompt", prompt}, {"candidates", {a, b}}, {"choice", 0}}.dump() + "\n";
}

TEST(LeakageStage, DropFlagAndReport) {
  std::string eval = WriteFile("leak_stage_eval.txt", kEval20 + "\n" + Words(30, 1000) + "\n");
  std::string in = WriteFile("leak_stage_in.jsonl",
                             Rec("verbatim", "What is the best way to store saved bean seed over winter so that it "
                                             "still germinates well next spring") +
                                 Rec("embedded", Words(100, 5000) + " " + Words(30, 1000)) +
                                 Rec("clean", "How deep should I sow broad beans in a cold clay soil?"));
  std::string out = TempPath("leak_stage_out");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["leakage"] =
      Json{{"eval_sets", {{{"name", "held"}, {"path", eval}}}}, {"ngram", "flag"}, {"near", "flag"}};
  auto r = RunLeakage(plan);
  ASSERT_TRUE(r.ok()) << r.status().message();
  std::map<std::string, Json> rejects;
  for (const auto& j : ReadJsonl(out + "/rejects.jsonl")) rejects[j["id"].get<std::string>()] = j;
  ASSERT_EQ(rejects.size(), 1u);
  EXPECT_EQ(rejects["verbatim"]["reason"], "eval_leak_exact");
  EXPECT_EQ(rejects["verbatim"]["detail"]["eval_set"], "held");
  EXPECT_EQ(rejects["verbatim"]["detail"]["eval_item"], "1");
  auto report = ReadJsonl(out + "/leakage.jsonl");
  ASSERT_EQ(report.size(), 2u);
  EXPECT_EQ(report[0]["id"], "verbatim");
  EXPECT_EQ(report[0]["action"], "dropped");
  EXPECT_EQ(report[1]["id"], "embedded");
  EXPECT_EQ(report[1]["action"], "flagged");   // n-gram and near fire, both with policy "flag"
  bool has_near = false;
  for (const auto& m : report[1]["matches"]) has_near = has_near || m["detector"] == "near";
  EXPECT_TRUE(has_near);
  auto summary = Json::parse(ReadFile(out + "/summary.json"));
  const Json& sec = summary["stages"]["leakage"];
  EXPECT_EQ(sec["contaminated_records"], 2);
  EXPECT_EQ(sec["by_set"]["held"]["exact"]["records"], 1);
  EXPECT_EQ(sec["by_set"]["held"]["exact"]["examples"][0]["id"], "verbatim");
}

TEST(LeakageStage, NgramDropWhenNearFlags) {
  // The embedded record also shares 13-grams: with ngram "drop" it is rejected as eval_leak_ngram.
  std::string eval = WriteFile("leak_stage_eval2.txt", Words(30, 1000) + "\n");
  std::string in = WriteFile("leak_stage_in2.jsonl", Rec("embedded", Words(100, 5000) + " " + Words(30, 1000)));
  std::string out = TempPath("leak_stage_out2");
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, out);
  plan.stages["leakage"] = Json{{"eval_sets", {{{"name", "held"}, {"path", eval}}}}, {"near", "flag"}};
  ASSERT_TRUE(RunLeakage(plan).ok());
  auto rejects = ReadJsonl(out + "/rejects.jsonl");
  ASSERT_EQ(rejects.size(), 1u);
  EXPECT_EQ(rejects[0]["reason"], "eval_leak_ngram");
}

// The n-gram and answer findings are decided record by record on the pool's
// threads once pass 1 is over (DecideGrams): any thread count gives the same
// files. 200 evaluation items with reference answers; 1,200 records (6 an
// item, under the 10 documents that make a gram template text) holding a
// stretch of an item in the prompt, an item's answer in a candidate, both, an
// exact copy, or nothing.
TEST(LeakageStage, SameFindingsOnAnyThreadCount) {
  ::setenv("SOURCE_DATE_EPOCH", "1775000000", 1);
  std::string eval;
  for (int i = 0; i < 200; ++i) {
    eval += Json{{"question", Words(30, 100000 + 100 * i)}, {"answer", Words(25, 400000 + 100 * i)}}.dump() + "\n";
  }
  const std::string eval_path = WriteFile("leak_threads_eval.jsonl", eval);
  std::string data;
  for (int r = 0; r < 1200; ++r) {
    const int item = r % 200, shift = r / 200;
    const std::string id = "r" + std::to_string(r);
    switch (item % 5) {
      case 0: data += Rec(id, Words(20, 50000 + r) + " " + Words(24, 100000 + 100 * item + shift)); break;
      case 1: data += Rec(id, Words(25, 60000 + r), "so " + Words(22, 400000 + 100 * item + shift % 3), "no"); break;
      case 2: data += Rec(id, Words(26, 100000 + 100 * item + shift % 4), Words(23, 400000 + 100 * item + 1)); break;
      case 3: data += Rec(id, Words(30, 100000 + 100 * item)); break;
      default: data += Rec(id, Words(25, 70000 + r)); break;
    }
  }
  const std::string in = WriteFile("leak_threads_in.jsonl", data);
  std::vector<std::string> outs;
  for (unsigned threads : {1u, 2u, 5u}) {
    outs.push_back(TempPath("leak_threads_out" + std::to_string(threads)));
    Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, outs.back());
    plan.threads = threads;
    plan.stages["leakage"] = Json{{"eval_sets", {{{"name", "held"}, {"path", eval_path}, {"text", "/question"},
                                                  {"reference", "/answer"}}}},
                                  {"ngram", "flag"}, {"near", "flag"}, {"answers", "flag"}};
    auto r = RunLeakage(plan);
    ASSERT_TRUE(r.ok()) << r.status().message();
  }
  ::unsetenv("SOURCE_DATE_EPOCH");
  const auto report = ReadJsonl(outs[0] + "/leakage.jsonl");
  size_t ngram = 0, answer = 0;
  for (const auto& j : report) {
    for (const auto& m : j["matches"]) {
      ngram += m["detector"] == "ngram";
      answer += m["detector"] == "answer";
    }
  }
  EXPECT_GT(ngram, 300u);
  EXPECT_GT(answer, 300u);
  for (size_t k = 1; k < outs.size(); ++k) {
    for (const char* f : {"/leakage.jsonl", "/rejects.jsonl", "/summary.json"}) {
      EXPECT_TRUE(ReadFile(outs[0] + f) == ReadFile(outs[k] + f)) << outs[k] << f;
    }
  }
}

TEST(LeakageStage, SettingsErrors) {
  std::string in = WriteFile("leak_stage_in3.jsonl", Rec("a", "hello"));
  Plan plan = PlanFor({in}, Json{{"preset", "choice"}}, TempPath("leak_stage_out3"));
  plan.stages["leakage"] = Json{{"eval_sets", {{{"name", "x"}, {"path", "/nonexistent/e.txt"}}}}};
  auto r = RunLeakage(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kInput);
  EXPECT_NE(r.status().message().find("/nonexistent/e.txt"), std::string::npos);
  plan.stages["leakage"] = Json{{"eval_sets", Json::array()}, {"ngram", {{"size", 3}}}};
  r = RunLeakage(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_EQ(r.status().code(), StatusCode::kUsage);
  plan.stages["leakage"] = Json{{"eval_sets", {{{"name", "x"}, {"path", "/e.txt"}}}}, {"ngram", {{"size", 3}}}};
  r = RunLeakage(plan);
  ASSERT_FALSE(r.ok());
  EXPECT_NE(r.status().message().find("\"size\""), std::string::npos);
  // Without eval sets the stage does nothing and says so.
  plan.stages = Json::object();
  r = RunLeakage(plan);
  ASSERT_TRUE(r.ok()) << r.status().message();
}

TEST(SplitAudit, TwoHandMadeFiles) {
  auto pw = [](const std::string& id, const std::string& prompt, const std::string& thread, const std::string& who) {
    return Json{{"id", id}, {"prompt", prompt}, {"chosen", "good answer"}, {"rejected", "bad answer"},
                {"thread", thread}, {"annotator", who}}.dump() + "\n";
  };
  std::string train = WriteFile("audit_train.jsonl",
                                pw("t1", kEval20, "th-1", "ann-a") + pw("t2", Words(80, 0), "th-2", "ann-b") +
                                    pw("t3", "how deep should i sow broad beans in cold clay", "th-3", "ann-c"));
  std::string edited = Words(80, 0);
  edited.replace(edited.find("word40 "), 7, "other ");
  std::string held = WriteFile("audit_held.jsonl",
                               pw("h1", "  What is the best way to store saved bean seed over winter so that it still "
                                        "germinates well next spring", "th-9", "ann-a") +
                                   pw("h2", edited, "th-8", "ann-z") + pw("h3", "where is the library", "th-3", "ann-y"));
  AuditOptions o;
  auto layout = LayoutFromJson(Json{{"preset", "pairwise"}, {"thread", "/thread"}, {"annotator", "/annotator"}}, "t");
  ASSERT_TRUE(layout.ok()) << layout.status().message();
  o.train_path = train;
  o.heldout_paths = {held};
  o.train_layout = layout.value();
  o.heldout_layouts = {layout.value()};
  o.by_annotator = true;
  o.out = TempPath("audit_out");
  o.overwrite = true;
  auto r = RunSplitAudit(o, DefaultFileSystem());
  ASSERT_TRUE(r.ok()) << r.status().message();
  EXPECT_EQ(r.value().train_records, 3u);
  EXPECT_EQ(r.value().heldout_with_twin, 2u);
  EXPECT_EQ(r.value().by_detector[0], 1u);  // h1 is t1 after normalisation
  EXPECT_EQ(r.value().shared_groups, 2u);   // thread th-3, annotator ann-a
  EXPECT_TRUE(r.value().leak_found);
  std::map<std::string, Json> twins;
  std::set<std::string> groups;
  for (const auto& j : ReadJsonl(o.out + "/audit.jsonl")) {
    if (j["kind"] == "twin") twins[j["heldout_id"].get<std::string>()] = j;
    else groups.insert(j["group_kind"].get<std::string>() + ":" + j["value"].get<std::string>());
  }
  ASSERT_EQ(twins.size(), 2u);
  EXPECT_EQ(twins["h1"]["listed"][0]["train_id"], "t1");
  EXPECT_EQ(twins["h2"]["listed"][0]["train_id"], "t2");
  EXPECT_EQ(twins["h2"]["listed"][0]["detector"], "ngram");
  EXPECT_EQ(groups, (std::set<std::string>{"annotator:ann-a", "thread:th-3"}));
  auto summary = Json::parse(ReadFile(o.out + "/audit.json"));
  EXPECT_EQ(summary["heldout_with_train_twin"], 2);
  EXPECT_NE(r.value().table.find("LEAKAGE FOUND"), std::string::npos);
}

}  // namespace
}  // namespace prefsift

namespace prefsift {
namespace {

// Worked example of the coverage rule (ours, counted by hand): a 20-word item,
// n = 5, so 16 grams starting at words 0..15. The grams starting at 0..3 are
// set aside as template text (they cover words 0..7); the informative grams
// start at 4..15 and cover words 4..19: 16 informative words. A training text
// holding words 8..19 shares the grams starting at 8..15, which cover words
// 8..19: coverage 12/16 = 0.75, with 8 distinct shared informative grams.
TEST(NgramCoverage, WorkedExampleWithTemplateGrams) {
  std::vector<std::string> w;
  for (int i = 0; i < 20; ++i) w.push_back("w" + std::to_string(i));
  auto join = [&](int from, int to) {
    std::string s;
    for (int i = from; i < to; ++i) s += (i > from ? " " : "") + w[static_cast<size_t>(i)];
    return s;
  };
  NgramOptions o;
  o.n = 5;
  std::vector<std::string> items = {join(0, 20)};
  NgramIndex idx(items, o);
  ASSERT_EQ(idx.grams(), 16u);
  std::vector<uint32_t> stock;
  idx.CollectIds(join(0, 8), &stock);  // the grams starting at 0..3
  ASSERT_EQ(stock.size(), 4u);
  std::vector<uint8_t> flags(idx.grams(), 0);
  for (uint32_t id : stock) flags[id] = 1;
  idx.SetTemplate(flags);
  std::vector<uint32_t> ids;
  idx.CollectIds("a message ending with " + join(8, 20), &ids);
  auto hits = idx.Coverage(ids);
  ASSERT_EQ(hits.size(), 1u);
  EXPECT_EQ(hits[0].informative, 16u);
  EXPECT_EQ(hits[0].covered, 12u);
  EXPECT_DOUBLE_EQ(hits[0].coverage(), 0.75);
  EXPECT_EQ(hits[0].shared, 8u);
  EXPECT_EQ(hits[0].first_word, 8u);
  EXPECT_EQ(hits[0].end_word, 20u);
  // A text holding only the template words shares no informative gram.
  idx.CollectIds("hello " + join(0, 8) + " thanks", &ids);
  EXPECT_TRUE(idx.Coverage(ids).empty());
  // Everything set aside: the item is template-only.
  idx.SetTemplate(std::vector<uint8_t>(idx.grams(), 1));
  EXPECT_EQ(idx.TemplateOnlyItems(), 1u);
}

}  // namespace
}  // namespace prefsift
