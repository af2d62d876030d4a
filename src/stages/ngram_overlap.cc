#include "stages/ngram_overlap.h"

#include <algorithm>
#include <map>

#include "sketch/shingles.h"
#include "stages/hash_postings.h"

namespace prefsift {

struct NgramIndex::Table {
  HashPostings postings;
};

namespace {

sketch::ShingleOptions WordGrams(int n, uint64_t seed) {
  sketch::ShingleOptions o;
  o.mode = sketch::ShingleMode::kWords;
  o.word_n = n;
  o.seed = seed;
  return o;
}

}  // namespace

int AutoNgramLength(std::vector<uint32_t> word_counts) {
  if (word_counts.empty()) return 13;
  std::sort(word_counts.begin(), word_counts.end());
  // Nearest-rank 5th percentile: the ceil(0.05 * N)-th smallest value.
  size_t rank = (word_counts.size() * 5 + 99) / 100;
  if (rank == 0) rank = 1;
  long v = static_cast<long>(word_counts[rank - 1]);
  return static_cast<int>(std::clamp(v, 8L, 13L));
}

NgramIndex::NgramIndex(std::span<const std::string> texts, const NgramOptions& options) : options_(options) {
  long_ = new Table;
  short_ = new Table;
  std::vector<std::pair<uint64_t, uint32_t>> long_entries, short_entries;
  std::vector<uint64_t> grams;
  const auto long_opts = WordGrams(options_.n, options_.seed);
  for (uint32_t i = 0; i < texts.size(); ++i) {
    size_t words = sketch::CountWords(texts[i]);
    if (words < static_cast<size_t>(options_.min_eval_words)) {
      ++skipped_items_;
      continue;
    }
    grams.clear();
    if (words < static_cast<size_t>(options_.n)) {
      // Short example: the whole item is one gram of its own length.
      sketch::AppendShingles(texts[i], WordGrams(static_cast<int>(words), options_.seed), &grams);
      short_entries.emplace_back(grams[0], i);
      short_lengths_.push_back(static_cast<int>(words));
      ++short_items_;
      continue;
    }
    sketch::AppendShingles(texts[i], long_opts, &grams);
    for (uint64_t g : grams) long_entries.emplace_back(g, i);
  }
  std::sort(short_lengths_.begin(), short_lengths_.end());
  short_lengths_.erase(std::unique(short_lengths_.begin(), short_lengths_.end()), short_lengths_.end());
  long_->postings.Build(std::move(long_entries));
  short_->postings.Build(std::move(short_entries));
}

NgramIndex::~NgramIndex() {
  delete long_;
  delete short_;
}

uint64_t NgramIndex::indexed_grams() const { return long_->postings.entries() + short_->postings.entries(); }

std::vector<NgramHit> NgramIndex::MatchAll(std::string_view text) const {
  struct Raw {
    uint32_t item;
    uint64_t gram;
    uint32_t pos;
    uint32_t len;
    bool is_short;
    bool operator<(const Raw& o) const {
      return item != o.item ? item < o.item : gram != o.gram ? gram < o.gram : pos < o.pos;
    }
  };
  thread_local std::vector<uint64_t> grams;
  std::vector<Raw> raw;
  const size_t words = sketch::CountWords(text);
  const size_t n = static_cast<size_t>(options_.n);
  if (long_->postings.entries() && words >= n) {
    grams.clear();
    sketch::AppendShingles(text, WordGrams(options_.n, options_.seed), &grams);
    for (uint32_t p = 0; p < grams.size(); ++p) {
      for (uint32_t item : long_->postings.Find(grams[p])) {
        raw.push_back({item, grams[p], p, static_cast<uint32_t>(n), false});
      }
    }
  }
  for (int k : short_lengths_) {
    if (static_cast<size_t>(k) > words) break;
    grams.clear();
    sketch::AppendShingles(text, WordGrams(k, options_.seed), &grams);
    for (uint32_t p = 0; p < grams.size(); ++p) {
      for (uint32_t item : short_->postings.Find(grams[p])) raw.push_back({item, grams[p], p, static_cast<uint32_t>(k), true});
    }
  }
  std::sort(raw.begin(), raw.end());
  std::vector<NgramHit> hits;
  for (size_t i = 0; i < raw.size();) {
    size_t j = i;
    NgramHit h;
    h.item = raw[i].item;
    h.start_word = raw[i].pos;
    h.words = raw[i].len;
    h.short_item = raw[i].is_short;
    uint32_t distinct = 0;
    for (; j < raw.size() && raw[j].item == raw[i].item; ++j) {
      if (j == i || raw[j].gram != raw[j - 1].gram) ++distinct;
      if (raw[j].pos < h.start_word) h.start_word = raw[j].pos;
    }
    h.shared = distinct;
    if (h.short_item || distinct >= options_.min_shared) hits.push_back(h);
    i = j;
  }
  return hits;
}

bool NgramIndex::MatchBest(std::string_view text, NgramHit* hit) const {
  auto all = MatchAll(text);
  if (all.empty()) return false;
  const NgramHit* best = &all[0];
  for (const auto& h : all) {
    if (h.shared > best->shared) best = &h;
  }
  *hit = *best;
  return true;
}

}  // namespace prefsift
