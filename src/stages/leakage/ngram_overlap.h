// Word n-gram overlap between training prompts and evaluation prompts, in the
// manner of Brown et al. 2020 (GPT-3, arXiv:2005.14165, appendix C): a training
// text is dirty against an evaluation item when they share a word n-gram
// (docs/leakage.md, with the source tags of every part).
//
// Texts are normalised by the caller (core/normalize.h); words and n-gram
// hashes come from sketch/shingles.h (word mode, XXH3 over the word hashes),
// so a k-gram hash depends only on its k words.
//
// Short-example rule: an evaluation item with k < n words (and k >=
// min_eval_words) is one k-gram, and a training text is dirty against it when
// it contains all k words contiguously, in order (the whole item). Items with
// fewer than min_eval_words words are not indexed (counted in skipped()).
//
// Template text and coverage (docs/leakage.md, "Template text"): every
// distinct indexed gram has an id. CollectIds lists the ids a training text
// contains, so a caller can count each gram's document frequency among
// training texts; EvalFrequency is its frequency among evaluation items.
// After SetTemplate marks the frequent grams, Coverage measures, per item,
// the share of the item's tokens that its informative (not template) grams
// cover and that the training text's informative grams also cover.
//
// Thread-safety: an NgramIndex is immutable after construction except for
// SetTemplate, which must not run concurrently with anything else; Match*,
// CollectIds and Coverage may be called concurrently.
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stages/leakage/flat_rows.h"
#include "stages/leakage/hash_postings.h"
#include "stages/leakage/memory_use.h"

namespace prefsift {

struct NgramOptions {
  int n = 13;                  // Brown et al. 2020 use 13 for the training filter (docs/leakage.md)
  int min_eval_words = 3;      // our choice: shorter evaluation items are not indexed
  uint32_t min_shared = 1;     // distinct shared n-grams needed (1 in Brown et al.)
  uint64_t seed = 0x6e6772616d73ULL;  // "ngrams"
};

struct NgramHit {
  uint32_t item = 0;        // index of the evaluation text
  uint32_t shared = 0;      // distinct shared n-grams (1 for a short item matched whole)
  uint32_t start_word = 0;  // first word of the first shared gram in the training text
  uint32_t words = 0;       // length of that gram in words (n, or k for a short item)
  bool short_item = false;  // matched by the short-example rule
};

struct CoverageHit {
  uint32_t item = 0;
  uint32_t covered = 0;        // item tokens covered by informative grams the text shares
  uint32_t informative = 0;    // item tokens covered by any informative gram of the item
  uint32_t shared = 0;         // distinct informative grams shared
  uint32_t first_word = 0;     // first covered token of the item
  uint32_t end_word = 0;       // one past the last covered token
  double coverage() const { return informative ? double(covered) / double(informative) : 0.0; }
};

// N as in Brown et al.'s overlap study (from memory, unverified): the 5th
// percentile of the evaluation items' word counts (nearest rank), clamped to
// [8, 13]. Returns 13 for an empty input.
int AutoNgramLength(std::vector<uint32_t> word_counts);

class NgramIndex {
 public:
  // `texts`: normalised evaluation texts; item i is texts[i].
  // REQUIRES: options.n >= 1, options.min_eval_words >= 1, min_shared >= 1.
  NgramIndex(std::span<const std::string> texts, const NgramOptions& options);
  NgramIndex(const FlatStrings& texts, const NgramOptions& options);
  ~NgramIndex();
  NgramIndex(const NgramIndex&) = delete;
  NgramIndex& operator=(const NgramIndex&) = delete;

  // Every evaluation item the normalised training `text` is dirty against,
  // ascending by item.
  std::vector<NgramHit> MatchAll(std::string_view text) const;
  // The dirty item with the most shared grams (ties: the lowest item index);
  // false when there is none.
  bool MatchBest(std::string_view text, NgramHit* hit) const;

  // Distinct indexed grams (ids 0 .. grams()-1, in ascending order of their
  // hashes) and, for each, the number of evaluation items holding it, the
  // first item holding it and where (for a readable form), and its length in
  // words.
  uint32_t grams() const { return static_cast<uint32_t>(grams_.keys()); }
  uint32_t EvalFrequency(uint32_t id) const { return static_cast<uint32_t>(grams_.Values(id).size()); }
  uint32_t ExampleItem(uint32_t id) const { return grams_.Values(id)[0]; }
  uint32_t ExampleWord(uint32_t id) const;
  uint32_t GramWords(uint32_t id) const { return item_len_[ExampleItem(id)]; }
  // Sorted, distinct ids of the indexed grams that `text` contains.
  void CollectIds(std::string_view text, std::vector<uint32_t>* ids) const;
  // Marks grams as template text (flags[id] != 0); recomputes each item's
  // informative tokens. REQUIRES: flags.size() == grams().
  void SetTemplate(std::vector<uint8_t> flags);
  bool IsTemplate(uint32_t id) const { return !template_.empty() && template_[id]; }
  // Items whose informative grams are all set aside: never matched by Coverage.
  uint32_t TemplateOnlyItems() const;
  // Per item sharing at least one informative gram with `ids` (sorted,
  // distinct): the coverage figures, ascending by item.
  std::vector<CoverageHit> Coverage(std::span<const uint32_t> ids) const;

  // Memory while only CollectIds and IsTemplate are needed (the pipeline
  // stage's pass 1; docs/leakage.md "Memory"). DropPostings frees each gram's
  // item list, which only EvalFrequency, ExampleItem, ExampleWord, GramWords,
  // Coverage, SetTemplate and MatchAll/MatchBest read, and keeps the items'
  // gram ids compressed; RestorePostings makes both again (each gram's items
  // ascending and distinct, as built). False when the ids cannot be
  // decompressed (not expected; the index is then unusable). DropLookup frees
  // the hash -> id table once CollectIds is no longer called (MatchAll and
  // MatchBest need it too). Not thread-safe.
  void DropPostings();
  bool RestorePostings();
  void DropLookup() { grams_.DropKeys(); }

  const NgramOptions& options() const { return options_; }
  uint64_t indexed_grams() const;   // distinct (gram, item) entries
  uint32_t short_items() const { return short_items_; }
  uint32_t skipped_items() const { return skipped_items_; }
  // Bytes held, per structure, named `prefix` + the structure.
  void Memory(const std::string& prefix, std::vector<MemoryPart>* out) const;

 private:
  void Index(const FlatStrings& texts);
  NgramOptions options_;
  std::vector<int> short_lengths_;  // distinct k < n of indexed short items, ascending
  uint32_t short_items_ = 0, skipped_items_ = 0;
  uint64_t long_entries_ = 0;       // gram positions in items with >= n words
  // Every indexed gram (n-grams of long items, the whole k-gram of short
  // ones): hash -> the items holding it, ascending. A gram's id is its
  // ordinal in this table.
  HashPostings grams_;
  std::vector<uint32_t> item_len_;  // per item: its grams' length in words (0: not indexed)
  FlatRows<uint32_t> item_grams_;   // per item: gram id at each start word
  std::vector<uint32_t> item_informative_;
  std::vector<uint8_t> template_;
};

}  // namespace prefsift
