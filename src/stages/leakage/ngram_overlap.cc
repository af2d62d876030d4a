#include "stages/leakage/ngram_overlap.h"

#include <algorithm>
#include <map>

#include "sketch/shingles.h"
#include "stages/leakage/hash_postings.h"

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
  ids_ = new Table;
  std::vector<std::pair<uint64_t, uint32_t>> long_entries, short_entries;
  std::vector<uint64_t> grams;
  std::vector<std::vector<uint64_t>> item_hashes(texts.size());
  std::vector<uint32_t> item_len(texts.size(), 0);
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
      item_hashes[i] = grams;
      item_len[i] = static_cast<uint32_t>(words);
      continue;
    }
    sketch::AppendShingles(texts[i], long_opts, &grams);
    for (uint64_t g : grams) long_entries.emplace_back(g, i);
    item_hashes[i] = grams;
    item_len[i] = static_cast<uint32_t>(options_.n);
  }
  std::sort(short_lengths_.begin(), short_lengths_.end());
  short_lengths_.erase(std::unique(short_lengths_.begin(), short_lengths_.end()), short_lengths_.end());
  long_->postings.Build(std::move(long_entries));
  short_->postings.Build(std::move(short_entries));
  // Gram ids: distinct hashes in ascending order (deterministic).
  std::vector<uint64_t> all;
  for (const auto& h : item_hashes) all.insert(all.end(), h.begin(), h.end());
  std::sort(all.begin(), all.end());
  all.erase(std::unique(all.begin(), all.end()), all.end());
  std::vector<std::pair<uint64_t, uint32_t>> id_entries;
  id_entries.reserve(all.size());
  for (uint32_t id = 0; id < all.size(); ++id) id_entries.emplace_back(all[id], id);
  ids_->postings.Build(std::move(id_entries));
  const size_t g = all.size();
  eval_df_.assign(g, 0);
  example_item_.assign(g, UINT32_MAX);
  example_word_.assign(g, 0);
  gram_words_.assign(g, 0);
  item_grams_.resize(texts.size());
  std::vector<std::pair<uint32_t, uint32_t>> id_item;
  for (uint32_t i = 0; i < texts.size(); ++i) {
    auto& ids = item_grams_[i];
    ids.reserve(item_hashes[i].size());
    for (uint32_t p = 0; p < item_hashes[i].size(); ++p) {
      const uint32_t id = static_cast<uint32_t>(std::lower_bound(all.begin(), all.end(), item_hashes[i][p]) - all.begin());
      ids.push_back(id);
      id_item.emplace_back(id, i);
      if (example_item_[id] == UINT32_MAX) {
        example_item_[id] = i;
        example_word_[id] = p;
        gram_words_[id] = item_len[i];
      }
    }
  }
  std::sort(id_item.begin(), id_item.end());
  id_item.erase(std::unique(id_item.begin(), id_item.end()), id_item.end());
  gram_item_start_.assign(g + 1, 0);
  gram_items_.reserve(id_item.size());
  for (const auto& [id, item] : id_item) {
    ++eval_df_[id];
    gram_items_.push_back(item);
  }
  for (size_t id = 0; id < g; ++id) gram_item_start_[id + 1] = gram_item_start_[id] + eval_df_[id];
  SetTemplate(std::vector<uint8_t>(g, 0));
}

void NgramIndex::SetTemplate(std::vector<uint8_t> flags) {
  template_ = std::move(flags);
  item_informative_.assign(item_grams_.size(), 0);
  for (size_t i = 0; i < item_grams_.size(); ++i) {
    const auto& ids = item_grams_[i];
    if (ids.empty()) continue;
    const uint32_t len = gram_words_[ids[0]];
    // Union of [p, p + len) over informative grams, counted in one sweep.
    uint32_t covered = 0, reach = 0;
    for (uint32_t p = 0; p < ids.size(); ++p) {
      if (template_[ids[p]]) continue;
      const uint32_t end = p + len;
      covered += end - std::max(reach, p);
      reach = end;
    }
    item_informative_[i] = covered;
  }
}

uint32_t NgramIndex::TemplateOnlyItems() const {
  uint32_t n = 0;
  for (size_t i = 0; i < item_grams_.size(); ++i) n += !item_grams_[i].empty() && item_informative_[i] == 0;
  return n;
}

void NgramIndex::CollectIds(std::string_view text, std::vector<uint32_t>* ids) const {
  ids->clear();
  thread_local std::vector<uint64_t> grams;
  const size_t words = sketch::CountWords(text);
  const size_t n = static_cast<size_t>(options_.n);
  auto add = [&]() {
    for (uint64_t h : grams) {
      auto f = ids_->postings.Find(h);
      if (!f.empty()) ids->push_back(f[0]);
    }
  };
  if (long_->postings.entries() && words >= n) {
    grams.clear();
    sketch::AppendShingles(text, WordGrams(options_.n, options_.seed), &grams);
    add();
  }
  for (int k : short_lengths_) {
    if (static_cast<size_t>(k) > words) break;
    grams.clear();
    sketch::AppendShingles(text, WordGrams(k, options_.seed), &grams);
    add();
  }
  std::sort(ids->begin(), ids->end());
  ids->erase(std::unique(ids->begin(), ids->end()), ids->end());
}

std::vector<CoverageHit> NgramIndex::Coverage(std::span<const uint32_t> ids) const {
  std::vector<uint32_t> items;
  for (uint32_t id : ids) {
    if (template_[id]) continue;
    for (uint32_t k = gram_item_start_[id]; k < gram_item_start_[id + 1]; ++k) items.push_back(gram_items_[k]);
  }
  std::sort(items.begin(), items.end());
  items.erase(std::unique(items.begin(), items.end()), items.end());
  std::vector<CoverageHit> hits;
  for (uint32_t item : items) {
    const auto& g = item_grams_[item];
    const uint32_t len = gram_words_[g[0]];
    CoverageHit h;
    h.item = item;
    h.informative = item_informative_[item];
    uint32_t reach = 0;
    bool first = true;
    std::vector<uint32_t> seen;
    for (uint32_t p = 0; p < g.size(); ++p) {
      if (template_[g[p]] || !std::binary_search(ids.begin(), ids.end(), g[p])) continue;
      seen.push_back(g[p]);
      if (first) h.first_word = p;
      first = false;
      const uint32_t end = p + len;
      h.covered += end - std::max(reach, p);
      reach = end;
    }
    h.end_word = reach;
    std::sort(seen.begin(), seen.end());
    h.shared = static_cast<uint32_t>(std::unique(seen.begin(), seen.end()) - seen.begin());
    hits.push_back(h);
  }
  return hits;
}

NgramIndex::~NgramIndex() {
  delete long_;
  delete short_;
  delete ids_;
}

void NgramIndex::Memory(const std::string& prefix, std::vector<MemoryPart>* out) const {
  out->push_back({prefix + "long gram postings (hash -> items)", long_->postings.bytes()});
  out->push_back({prefix + "short gram postings (hash -> items)", short_->postings.bytes()});
  out->push_back({prefix + "gram ids (hash -> id)", ids_->postings.bytes()});
  out->push_back({prefix + "per-gram tables (df, example item/word, length)",
                  VectorBytes(eval_df_) + VectorBytes(example_item_) + VectorBytes(example_word_) + VectorBytes(gram_words_)});
  out->push_back({prefix + "gram -> items (CSR)", VectorBytes(gram_item_start_) + VectorBytes(gram_items_)});
  out->push_back({prefix + "item -> gram ids (vector per item)", NestedBytes(item_grams_)});
  out->push_back({prefix + "per-item informative words, template flags", VectorBytes(item_informative_) + VectorBytes(template_)});
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
