#include "stages/leakage/ngram_overlap.h"

#include <algorithm>

#include "sketch/shingles.h"
#include "stages/leakage/hash_postings.h"

namespace prefsift {

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
  FlatStrings flat;
  for (const auto& t : texts) flat.Add(t);
  Index(flat);
}

NgramIndex::NgramIndex(const FlatStrings& texts, const NgramOptions& options) : options_(options) { Index(texts); }

void NgramIndex::Index(const FlatStrings& texts) {
  // Every item's gram hashes in text order, one flat row per item.
  FlatRows<uint64_t> item_hashes;
  item_len_.assign(texts.size(), 0);
  std::vector<uint64_t> grams;
  const auto long_opts = WordGrams(options_.n, options_.seed);
  for (uint32_t i = 0; i < texts.size(); ++i) {
    grams.clear();
    size_t words = sketch::CountWords(texts[i]);
    if (words < static_cast<size_t>(options_.min_eval_words)) {
      ++skipped_items_;
    } else if (words < static_cast<size_t>(options_.n)) {
      // Short example: the whole item is one gram of its own length.
      sketch::AppendShingles(texts[i], WordGrams(static_cast<int>(words), options_.seed), &grams);
      short_lengths_.push_back(static_cast<int>(words));
      ++short_items_;
      item_len_[i] = static_cast<uint32_t>(words);
    } else {
      sketch::AppendShingles(texts[i], long_opts, &grams);
      long_entries_ += grams.size();
      item_len_[i] = static_cast<uint32_t>(options_.n);
    }
    item_hashes.Add(grams);
  }
  std::sort(short_lengths_.begin(), short_lengths_.end());
  short_lengths_.erase(std::unique(short_lengths_.begin(), short_lengths_.end()), short_lengths_.end());
  {
    std::vector<std::pair<uint64_t, uint32_t>> entries;
    entries.reserve(item_hashes.values());
    for (uint32_t i = 0; i < texts.size(); ++i) {
      for (uint64_t h : item_hashes[i]) entries.emplace_back(h, i);
    }
    grams_.Build(std::move(entries));
  }
  // Gram ids: ordinals of the hashes in the table (ascending, deterministic).
  item_grams_.Reserve(texts.size(), item_hashes.values());
  std::vector<uint32_t> ids;
  for (uint32_t i = 0; i < texts.size(); ++i) {
    ids.clear();
    for (uint64_t h : item_hashes[i]) ids.push_back(static_cast<uint32_t>(grams_.Ordinal(h)));
    item_grams_.Add(ids);
  }
  SetTemplate(std::vector<uint8_t>(this->grams(), 0));
}

uint32_t NgramIndex::ExampleWord(uint32_t id) const {
  const auto g = item_grams_[ExampleItem(id)];
  return static_cast<uint32_t>(std::find(g.begin(), g.end(), id) - g.begin());
}

void NgramIndex::SetTemplate(std::vector<uint8_t> flags) {
  template_ = std::move(flags);
  item_informative_.assign(item_grams_.size(), 0);
  for (size_t i = 0; i < item_grams_.size(); ++i) {
    const auto ids = item_grams_[i];
    if (ids.empty()) continue;
    const uint32_t len = item_len_[i];
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

void NgramIndex::DropPostings() {
  grams_.DropValues();
  item_grams_.Pack();  // on failure the rows simply stay as they are
}

bool NgramIndex::RestorePostings() {
  if (!item_grams_.Unpack()) return false;
  // A counting sort of (id, item) over the items in ascending order: each
  // id's items come out ascending; `last` skips an item's repeats of a gram.
  const uint32_t k = grams();
  std::vector<uint32_t> starts(size_t{k} + 1, 0), last(k, UINT32_MAX);
  for (uint32_t i = 0; i < item_grams_.size(); ++i) {
    for (uint32_t id : item_grams_[i]) {
      if (last[id] == i) continue;
      last[id] = i;
      ++starts[id + 1];
    }
  }
  for (uint32_t id = 0; id < k; ++id) starts[id + 1] += starts[id];
  // The fill: `last` becomes each id's next free place (one buffer fewer);
  // an item's repeat of a gram is the value just written for that id.
  std::vector<uint32_t> values(starts[k]);
  std::vector<uint32_t>& next = last;
  std::copy(starts.begin(), starts.end() - 1, next.begin());
  for (uint32_t i = 0; i < item_grams_.size(); ++i) {
    for (uint32_t id : item_grams_[i]) {
      if (next[id] > starts[id] && values[next[id] - 1] == i) continue;
      values[next[id]++] = i;
    }
  }
  grams_.SetValues(std::move(starts), std::move(values));
  return true;
}

uint32_t NgramIndex::TemplateOnlyItems() const {
  uint32_t n = 0;
  for (size_t i = 0; i < item_grams_.size(); ++i) n += !item_grams_[i].empty() && item_informative_[i] == 0;
  return n;
}

void NgramIndex::CollectIds(std::string_view text, std::vector<uint32_t>* ids) const {
  ids->clear();
  thread_local std::vector<uint64_t> grams;
  thread_local std::vector<int64_t> found;
  const size_t n = static_cast<size_t>(options_.n);
  auto add = [&]() {
    found.resize(grams.size());
    grams_.Ordinals(grams, found);
    for (int64_t id : found) {
      if (id >= 0) ids->push_back(static_cast<uint32_t>(id));
    }
  };
  // The text's words, counted only when the long grams do not tell: n or
  // more words give words - n + 1 grams, fewer one (the whole text).
  size_t words = 0;
  bool counted = false;
  if (long_entries_) {
    grams.clear();
    sketch::AppendShingles(text, WordGrams(options_.n, options_.seed), &grams);
    words = grams.size() > 1 ? grams.size() + n - 1 : sketch::CountWords(text);
    counted = true;
    if (words >= n) add();
  }
  if (!short_lengths_.empty() && !counted) words = sketch::CountWords(text);
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
    for (uint32_t item : grams_.Values(id)) items.push_back(item);
  }
  std::sort(items.begin(), items.end());
  items.erase(std::unique(items.begin(), items.end()), items.end());
  std::vector<CoverageHit> hits;
  for (uint32_t item : items) {
    const auto g = item_grams_[item];
    const uint32_t len = item_len_[item];
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

NgramIndex::~NgramIndex() = default;

void NgramIndex::Memory(const std::string& prefix, std::vector<MemoryPart>* out) const {
  out->push_back({prefix + "gram lookup (sorted hashes, directory; id = rank)", grams_.key_bytes()});
  out->push_back({prefix + "gram -> items (flat rows)", grams_.value_bytes()});
  out->push_back({prefix + (item_grams_.packed() ? "item -> gram ids (compressed)" : "item -> gram ids (flat rows)"),
                  item_grams_.bytes()});
  out->push_back({prefix + "per-item length, informative words; template flags",
                  VectorBytes(item_len_) + VectorBytes(item_informative_) + VectorBytes(template_)});
}

uint64_t NgramIndex::indexed_grams() const { return grams_.entries(); }

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
  if (long_entries_ && words >= n) {
    grams.clear();
    sketch::AppendShingles(text, WordGrams(options_.n, options_.seed), &grams);
    for (uint32_t p = 0; p < grams.size(); ++p) {
      for (uint32_t item : grams_.Find(grams[p])) {
        if (item_len_[item] != n) continue;  // a short item's gram (only on a hash collision)
        raw.push_back({item, grams[p], p, static_cast<uint32_t>(n), false});
      }
    }
  }
  for (int k : short_lengths_) {
    if (static_cast<size_t>(k) > words) break;
    grams.clear();
    sketch::AppendShingles(text, WordGrams(k, options_.seed), &grams);
    for (uint32_t p = 0; p < grams.size(); ++p) {
      for (uint32_t item : grams_.Find(grams[p])) {
        if (item_len_[item] != static_cast<uint32_t>(k)) continue;  // another length's gram (only on a collision)
        raw.push_back({item, grams[p], p, static_cast<uint32_t>(k), true});
      }
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
