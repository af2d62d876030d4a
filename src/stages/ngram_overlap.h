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
// Thread-safety: an NgramIndex is immutable after construction; Match* may be
// called concurrently.
#pragma once

#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

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

// N as in Brown et al.'s overlap study (from memory, unverified): the 5th
// percentile of the evaluation items' word counts (nearest rank), clamped to
// [8, 13]. Returns 13 for an empty input.
int AutoNgramLength(std::vector<uint32_t> word_counts);

class NgramIndex {
 public:
  // `texts`: normalised evaluation texts; item i is texts[i].
  // REQUIRES: options.n >= 1, options.min_eval_words >= 1, min_shared >= 1.
  NgramIndex(std::span<const std::string> texts, const NgramOptions& options);
  ~NgramIndex();
  NgramIndex(const NgramIndex&) = delete;
  NgramIndex& operator=(const NgramIndex&) = delete;

  // Every evaluation item the normalised training `text` is dirty against,
  // ascending by item.
  std::vector<NgramHit> MatchAll(std::string_view text) const;
  // The dirty item with the most shared grams (ties: the lowest item index);
  // false when there is none.
  bool MatchBest(std::string_view text, NgramHit* hit) const;

  const NgramOptions& options() const { return options_; }
  uint64_t indexed_grams() const;   // distinct (gram, item) entries
  uint32_t short_items() const { return short_items_; }
  uint32_t skipped_items() const { return skipped_items_; }

 private:
  struct Table;
  NgramOptions options_;
  std::vector<int> short_lengths_;  // distinct k < n of indexed short items, ascending
  uint32_t short_items_ = 0, skipped_items_ = 0;
  Table* long_ = nullptr;
  Table* short_ = nullptr;
};

}  // namespace prefsift
