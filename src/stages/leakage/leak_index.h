// LeakIndex: the evaluation sets indexed for the three leakage detectors, and
// the settings that configure them (plan "stages": {"leakage": {...}}).
//
//   exact  the normalised prompt (core/normalize.h, the plan's options) hashes
//          (XXH3-128) to the same value as an evaluation prompt;
//   ngram  word n-grams (stages/ngram_overlap.h) on text normalised with
//          punctuation removed by default; grams frequent among evaluation
//          items or training prompts are template text and set aside; the
//          default rule "coverage" needs the training prompt to cover at
//          least min_coverage of the item's informative tokens, the rule
//          "any" one shared informative gram (Brown et al. 2020);
//   near   MinHash Jaccard estimate >= "jaccard", found by LSH banding over
//          the evaluation signatures (sketch/; when shingles in many items are
//          set aside as template text, the bands are keyed by a signature of
//          the remaining, informative shingles), or containment of the
//          evaluation item's shingle set in the training prompt's >=
//          "containment", found exactly by a prefix filter over the
//          evaluation shingle sets and verified with sketch::Containment.
//   answers (optional) a candidate answer equal to, or sharing an n-gram
//          with, an evaluation set's reference answer.
// docs/leakage.md gives the method, sources and defaults.
//
// Thread-safety: immutable after Build; Check* may run concurrently.
#pragma once

#include <nlohmann/json_fwd.hpp>

#include <cstdint>
#include <memory>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "core/normalize.h"
#include "core/status.h"
#include "stages/leakage/eval_index.h"
#include "stages/leakage/memory_use.h"

namespace prefsift {

enum class LeakDetector : uint8_t { kExact = 0, kNgram = 1, kNear = 2, kAnswer = 3 };
inline constexpr int kLeakDetectors = 4;
const char* LeakDetectorName(LeakDetector d);  // "exact", "ngram", "near", "answer"

enum class LeakPolicy { kDrop, kFlag };
enum class NgramRule { kCoverage, kAny };

struct LeakSettings {
  std::vector<EvalSetSpec> eval_sets;
  bool enabled[kLeakDetectors] = {true, true, true, false};
  LeakPolicy policy[kLeakDetectors] = {LeakPolicy::kDrop, LeakPolicy::kDrop, LeakPolicy::kDrop, LeakPolicy::kDrop};
  // ngram (also used for answers)
  int ngram_n = 10;            // 0 = "auto" (AutoNgramLength over the evaluation prompts)
  int min_eval_words = 3;
  uint32_t min_shared = 1;
  bool strip_punctuation = true;
  NgramRule rule = NgramRule::kCoverage;
  double min_coverage = 0.7;     // coverage rule: share of the item's informative tokens
  // Template text: a gram (or near shingle) found in at least
  // max(template_min_docs, template_share * documents) training prompts
  // (candidate answers, for the answer detector) or evaluation items is set
  // aside. template_min_docs 0 turns this off; template_share 0 leaves
  // only the count.
  double template_share = 0.0;
  uint32_t template_min_docs = 10;
  // near
  double jaccard = 0.8;        // 0 disables the Jaccard test
  double containment = 0.8;    // 0 disables the containment test
  int shingle_words = 5;
  uint32_t num_slots = 128;
  uint32_t min_eval_shingles = 4;
  // report
  uint32_t examples = 3;       // examples per set and detector in summary.json
  uint32_t max_span_words = 20;
};

// Parses a "leakage" settings object. `require_eval_sets`: the stage needs at
// least one set; the split audit ignores "eval_sets". Usage errors name
// `where` and the key.
Result<LeakSettings> ParseLeakSettings(const nlohmann::ordered_json& j, const std::string& base_dir,
                                       const std::string& where, bool require_eval_sets);

// The settings as JSON, for summary.json.
void LeakSettingsToJson(const LeakSettings& s, int resolved_n, nlohmann::ordered_json* out);

struct LeakFinding {
  LeakDetector detector = LeakDetector::kExact;
  uint32_t item = 0;          // index into EvalCorpus::items
  float score = 1;            // exact 1; ngram: coverage (rule "any": shared grams); near: the similarity
  uint32_t shared = 0;        // ngram: distinct shared grams
  const char* measure = "";   // near: "jaccard" or "containment"; ngram: "ngram" or "whole_item"
  int candidate = -1;         // answers: candidate index
  std::string span;           // a few matching words (normalised), at most max_span_words
};

class LeakIndex {
 public:
  // Indexes `corpus`, which is read only here: the caller may free its texts
  // (or all of it) afterwards; findings name items by their index in
  // corpus.items. `norm` is the plan's normalisation, used by the exact detector.
  // `threads` other than 1 (0: the machine's) lets the detectors' tables be
  // built side by side, on up to three threads; the index is the same.
  static Result<std::unique_ptr<LeakIndex>> Build(const EvalCorpus& corpus, const LeakSettings& settings,
                                                  const NormalizeOptions& norm, unsigned threads = 1);
  ~LeakIndex();

  // A training prompt's texts: `exact` as the plan normalises it (the exact
  // detector; the pipeline's MatchText), `gram` as the n-gram and near
  // detectors do (punctuation removed by default). Texts() gives `exact`
  // itself as `gram` when the two normalisations agree, else normalises
  // `prompt` their way into *store, which must outlive the result. A caller
  // that runs CheckPrompt and CollectPromptGrams on one prompt normalises it
  // once this way instead of once in each.
  struct PromptTexts {
    std::string_view exact, gram;
  };
  PromptTexts Texts(std::string_view prompt, std::string_view normalized, std::string* store) const;

  // Two-phase n-gram detection (the pipeline stage): in pass 1 collect the
  // ids of the evaluation grams each training prompt (candidate answer)
  // holds and count their document frequencies; then SetTrainingFrequencies
  // once, then Match*Grams. REQUIRES for Collect*: `normalized` as in CheckPrompt.
  uint32_t PromptGrams() const;   // 0 when the ngram detector is off
  uint32_t AnswerGrams() const;   // 0 when the answer detector is off
  void CollectPromptGrams(std::string_view prompt, std::string_view normalized, std::vector<uint32_t>* ids) const;
  // The same from the texts Texts() gives (the prompt normalised once for
  // CheckPrompt and CollectPromptGrams both).
  void CollectPromptGrams(const PromptTexts& texts, std::vector<uint32_t>* ids) const;
  void CollectAnswerGrams(std::string_view answer, std::string_view normalized, std::vector<uint32_t>* ids) const;
  // Removes from `ids` (as Collect* gives them) the grams already set aside as
  // template text by the evaluation side alone: Match*Grams never look at
  // them, whatever the training frequencies turn out to be, so a caller that
  // keeps each record's ids until then need not keep these (most of them on
  // template text). The caller still counts them in the frequencies.
  void DropEvalTemplatePromptGrams(std::vector<uint32_t>* ids) const;
  void DropEvalTemplateAnswerGrams(std::vector<uint32_t>* ids) const;
  // Not thread-safe: call once, between pass 1 and any Match*Grams.
  void SetTrainingFrequencies(std::vector<uint32_t> prompt_df, uint64_t prompts, std::vector<uint32_t> answer_df,
                              uint64_t answers);
  bool MatchPromptGrams(std::span<const uint32_t> ids, LeakFinding* f) const;
  bool MatchAnswerGrams(std::span<const uint32_t> ids, int candidate, LeakFinding* f) const;
  // summary.json: the grams set aside as template text (the most frequent
  // `limit` of each detector, with counts) and the totals.
  void TemplateJson(uint32_t limit, nlohmann::ordered_json* out) const;

  // Findings for one training prompt: per enabled detector, the best item, or
  // with `all_items` every matching item. Appends to *out in detector order.
  void CheckPrompt(std::string_view prompt, bool all_items, std::vector<LeakFinding>* out) const;
  // Findings for one candidate answer against the reference answers (exact,
  // then n-gram); at most one finding.
  void CheckAnswer(std::string_view answer, int candidate, std::vector<LeakFinding>* out) const;
  // The same, when the caller already has NormalizeForMatch(text, norm) with
  // the `norm` given to Build (the pipeline's MatchText), so it is not made again.
  // `with_ngram` false leaves the n-gram part out (the two-phase caller).
  void CheckPrompt(std::string_view prompt, std::string_view normalized, bool all_items,
                   std::vector<LeakFinding>* out, bool with_ngram = true) const;
  void CheckPrompt(const PromptTexts& texts, bool all_items, std::vector<LeakFinding>* out,
                   bool with_ngram = true) const;
  void CheckAnswer(std::string_view answer, std::string_view normalized, int candidate,
                   std::vector<LeakFinding>* out, bool with_ngram = true) const;

  const LeakSettings& settings() const { return settings_; }
  int ngram_n() const;             // the n in use (after "auto")
  uint64_t ngram_entries() const;
  uint64_t references() const;     // evaluation items with a reference answer
  // Frees the tables only Check* needs (exact, near, the reference answers'
  // exact hashes), keeping the n-gram tables that Collect* and Match* use:
  // the two-phase caller, once its pass 1 is over. Afterwards Check* must not
  // be called.
  void ReleaseCheckTables();
  // The two-phase caller, before its pass 1: frees what only Match*Grams and
  // TemplateJson read (each gram's list of items, in the prompt and answer
  // n-gram tables), and keeps compressed the items' gram ids and the
  // normalised evaluation texts (spans); EndCollect makes them again. In
  // between, Check* may be called only with `with_ngram` false.
  void ReleaseMatchTables();
  // The two-phase caller, after its last Collect* call (pass 1 and every
  // part's observed state are in): makes again what ReleaseMatchTables freed
  // and frees the gram lookup (hash -> id). Afterwards Collect* and Check*
  // must not be called. An internal error when the compressed tables cannot
  // be decompressed (not expected); the n-gram and answer detectors cannot
  // be used then.
  Status EndCollect();
  // Frees every table the detectors use, once the last Check*, Collect* and
  // Match* call is made (the pipeline stage, at the end of its decide step;
  // docs/leakage.md "Memory"). Afterwards only corpus(), settings(),
  // ngram_n(), ngram_entries() and references() may be called.
  void ReleaseTables();
  // Bytes held by the index, per structure (docs/leakage.md "Memory").
  std::vector<MemoryPart> Memory() const;

 private:
  LeakIndex(const EvalCorpus& corpus, const LeakSettings& settings, const NormalizeOptions& norm);
  struct Impl;
  LeakSettings settings_;
  NormalizeOptions norm_;
  std::unique_ptr<Impl> impl_;
};

}  // namespace prefsift
