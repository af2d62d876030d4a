#include "stages/leakage/leak_index.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <memory>
#include <utility>

#include "core/beside.h"
#include "core/hash.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/set_similarity.h"
#include "sketch/shingles.h"
#include "stages/leakage/flat_rows.h"
#include "stages/leakage/hash_postings.h"
#include "stages/leakage/ngram_overlap.h"
#include "stages/leakage/sorted_keys.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

constexpr uint64_t kBandSeed = 0x6c65616b62616e64ULL;  // "leakband"
constexpr const char* kDetectorKeys[kLeakDetectors] = {"exact", "ngram", "near", "answers"};

Status ParseInt(const Json& v, const std::string& w, long lo, long hi, long* out) {
  if (!v.is_number_integer() || v.get<long>() < lo || v.get<long>() > hi) {
    return Status::Usage(w + ": must be an integer from " + std::to_string(lo) + " to " + std::to_string(hi));
  }
  *out = v.get<long>();
  return Status::Ok();
}

Status ParseUnit(const Json& v, const std::string& w, double* out) {
  if (!v.is_number() || v.get<double>() < 0 || v.get<double>() > 1) {
    return Status::Usage(w + ": must be a number from 0 to 1 (0 turns this test off)");
  }
  *out = v.get<double>();
  return Status::Ok();
}

Status ParseBool(const Json& v, const std::string& w, bool* out) {
  if (!v.is_boolean()) return Status::Usage(w + ": must be true or false");
  *out = v.get<bool>();
  return Status::Ok();
}

Status ParsePolicy(const Json& v, const std::string& w, LeakPolicy* out) {
  std::string p = v.is_string() ? v.get<std::string>() : "";
  if (p == "drop") *out = LeakPolicy::kDrop;
  else if (p == "flag") *out = LeakPolicy::kFlag;
  else return Status::Usage(w + ": must be \"drop\" or \"flag\"");
  return Status::Ok();
}

std::string JoinWords(const std::vector<std::string_view>& words, size_t from, size_t count, size_t max_words) {
  std::string out;
  size_t end = std::min(words.size(), from + std::min(count, max_words));
  for (size_t i = from; i < end; ++i) {
    if (i > from) out.push_back(' ');
    out.append(words[i]);
  }
  return out;
}

// Documents a gram must be in to be template text; UINT64_MAX when off.
uint64_t TemplateCut(const LeakSettings& s, uint64_t docs) {
  if (s.template_min_docs == 0) return UINT64_MAX;
  return std::max<uint64_t>(s.template_min_docs,
                            static_cast<uint64_t>(std::ceil(s.template_share * static_cast<double>(docs) - 1e-9)));
}

// Marks the grams of `idx` frequent among its own items, or (when given)
// among `train_docs` training documents.
void MarkTemplate(const LeakSettings& s, NgramIndex* idx, uint64_t items, const std::vector<uint32_t>* train_df,
                  uint64_t train_docs) {
  std::vector<uint8_t> flags(idx->grams(), 0);
  const uint64_t eval_cut = TemplateCut(s, items), train_cut = TemplateCut(s, train_docs);
  for (uint32_t id = 0; id < idx->grams(); ++id) {
    flags[id] = idx->EvalFrequency(id) >= eval_cut || (train_df && (*train_df)[id] >= train_cut);
  }
  idx->SetTemplate(std::move(flags));
}

// The passing coverage hits of `ids` under the rule, best first (all of them
// when `all`, else only the best).
std::vector<CoverageHit> Passing(const LeakSettings& s, const NgramIndex& idx, std::span<const uint32_t> ids, bool all) {
  auto hits = idx.Coverage(ids);
  std::vector<CoverageHit> out;
  for (const auto& h : hits) {
    const bool pass = s.rule == NgramRule::kCoverage ? h.covered > 0 && h.coverage() >= s.min_coverage - 1e-12
                                                     : h.shared >= s.min_shared;
    if (pass) out.push_back(h);
  }
  auto better = [&](const CoverageHit& a, const CoverageHit& b) {
    if (s.rule == NgramRule::kCoverage && a.coverage() != b.coverage()) return a.coverage() > b.coverage();
    if (a.shared != b.shared) return a.shared > b.shared;
    return a.item < b.item;
  };
  std::sort(out.begin(), out.end(), better);
  if (!all && out.size() > 1) out.resize(1);
  return out;
}

LeakFinding GramFinding(const LeakSettings& s, const CoverageHit& h, std::string_view item_text) {
  LeakFinding f;
  f.detector = LeakDetector::kNgram;
  f.item = h.item;
  f.shared = h.shared;
  f.score = s.rule == NgramRule::kCoverage ? static_cast<float>(h.coverage()) : static_cast<float>(h.shared);
  f.measure = s.rule == NgramRule::kCoverage ? "coverage" : "ngram";
  auto words = sketch::Words(item_text);
  f.span = JoinWords(words, h.first_word, h.end_word - h.first_word, s.max_span_words);
  return f;
}

}  // namespace

const char* LeakDetectorName(LeakDetector d) {
  switch (d) {
    case LeakDetector::kExact: return "exact";
    case LeakDetector::kNgram: return "ngram";
    case LeakDetector::kNear: return "near";
    case LeakDetector::kAnswer: return "answer";
  }
  return "?";
}

Result<LeakSettings> ParseLeakSettings(const Json& j, const std::string& base_dir, const std::string& where,
                                       bool require_eval_sets) {
  LeakSettings s;
  if (!j.is_object()) return Status::Usage(where + ": must be an object");
  bool have_sets = false;
  for (auto it = j.begin(); it != j.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    std::string w = where + "." + k;
    Status st;
    long num = 0;
    if (k == "enabled") {
      continue;
    } else if (k == "eval_sets") {
      auto sets = ParseEvalSetSpecs(v, base_dir, w);
      if (!sets.ok()) return sets.status();
      s.eval_sets = std::move(sets).value();
      have_sets = true;
    } else if (k == "examples") {
      st = ParseInt(v, w, 0, 1000, &num);
      s.examples = static_cast<uint32_t>(num);
    } else if (k == "max_span_words") {
      st = ParseInt(v, w, 1, 200, &num);
      s.max_span_words = static_cast<uint32_t>(num);
    } else if (k == "template_share") {
      st = ParseUnit(v, w, &s.template_share);
    } else if (k == "template_min_docs") {
      st = ParseInt(v, w, 0, 1000000000, &num);
      if (st.ok() && num == 1) st = Status::Usage(w + ": must be 0 (off) or at least 2");
      s.template_min_docs = static_cast<uint32_t>(num);
    } else {
      int d = -1;
      for (int i = 0; i < kLeakDetectors; ++i) {
        if (k == kDetectorKeys[i]) d = i;
      }
      if (d < 0) {
        return Status::Usage(where + ": unknown setting \"" + k +
                             "\" (known: eval_sets, exact, ngram, near, answers, examples, max_span_words, template_share, "
                             "template_min_docs)");
      }
      if (v.is_string()) {  // shorthand: "drop", "flag" or "off"
        if (v.get<std::string>() == "off") {
          s.enabled[d] = false;
        } else {
          s.enabled[d] = true;
          st = ParsePolicy(v, w, &s.policy[d]);
          if (!st.ok()) return Status::Usage(w + ": must be \"drop\", \"flag\", \"off\" or an object");
        }
        continue;
      }
      if (!v.is_object()) return Status::Usage(w + ": must be \"drop\", \"flag\", \"off\" or an object");
      if (d == static_cast<int>(LeakDetector::kAnswer)) s.enabled[d] = true;  // naming it turns it on
      for (auto jt = v.begin(); jt != v.end() && st.ok(); ++jt) {
        const std::string& key = jt.key();
        const Json& x = jt.value();
        std::string wk = w + "." + key;
        if (key == "enabled") st = ParseBool(x, wk, &s.enabled[d]);
        else if (key == "policy") st = ParsePolicy(x, wk, &s.policy[d]);
        else if (d == 1 && key == "n") {
          if (x.is_string() && x.get<std::string>() == "auto") s.ngram_n = 0;
          else if (!(st = ParseInt(x, wk, 1, 64, &num)).ok()) st = Status::Usage(wk + ": must be 1 to 64 or \"auto\"");
          else s.ngram_n = static_cast<int>(num);
        } else if (d == 1 && key == "min_eval_words") {
          st = ParseInt(x, wk, 1, 64, &num);
          s.min_eval_words = static_cast<int>(num);
        } else if (d == 1 && key == "min_shared") {
          st = ParseInt(x, wk, 1, 1000, &num);
          s.min_shared = static_cast<uint32_t>(num);
        } else if (d == 1 && key == "strip_punctuation") {
          st = ParseBool(x, wk, &s.strip_punctuation);
        } else if (d == 1 && key == "rule") {
          const std::string r = x.is_string() ? x.get<std::string>() : "";
          if (r == "coverage") s.rule = NgramRule::kCoverage;
          else if (r == "any") s.rule = NgramRule::kAny;
          else st = Status::Usage(wk + ": must be \"coverage\" or \"any\"");
        } else if (d == 1 && key == "min_coverage") {
          st = ParseUnit(x, wk, &s.min_coverage);
          if (st.ok() && s.min_coverage == 0) st = Status::Usage(wk + ": must be above 0 (use \"rule\": \"any\")");
        } else if (d == 2 && key == "jaccard") {
          st = ParseUnit(x, wk, &s.jaccard);
        } else if (d == 2 && key == "containment") {
          st = ParseUnit(x, wk, &s.containment);
        } else if (d == 2 && key == "shingle_words") {
          st = ParseInt(x, wk, 1, 32, &num);
          s.shingle_words = static_cast<int>(num);
        } else if (d == 2 && key == "slots") {
          st = ParseInt(x, wk, 16, 1024, &num);
          s.num_slots = static_cast<uint32_t>(num);
        } else if (d == 2 && key == "min_eval_shingles") {
          st = ParseInt(x, wk, 1, 1000, &num);
          s.min_eval_shingles = static_cast<uint32_t>(num);
        } else {
          const char* known = d == 1   ? "enabled, policy, n, min_eval_words, min_shared, strip_punctuation, rule, "
                                         "min_coverage"
                              : d == 2 ? "enabled, policy, jaccard, containment, shingle_words, slots, min_eval_shingles"
                                       : "enabled, policy";
          st = Status::Usage(w + ": unknown setting \"" + key + "\" (known: " + known + ")");
        }
      }
    }
    if (!st.ok()) return st;
  }
  if ((require_eval_sets && !have_sets) || (have_sets && s.eval_sets.empty())) {
    return Status::Usage(where + ".eval_sets: name at least one evaluation set, e.g. "
                         "[{\"name\": \"heldout\", \"path\": \"eval/heldout.txt\"}]");
  }
  if (s.enabled[2] && s.jaccard == 0 && s.containment == 0) {
    return Status::Usage(where + ".near: \"jaccard\" and \"containment\" are both 0; use \"near\": \"off\" instead");
  }
  return s;
}

void LeakSettingsToJson(const LeakSettings& s, int resolved_n, Json* out) {
  auto base = [&](int d) {
    Json j;
    j["enabled"] = s.enabled[d];
    j["policy"] = s.policy[d] == LeakPolicy::kDrop ? "drop" : "flag";
    return j;
  };
  Json exact = base(0), ngram = base(1), near = base(2), answers = base(3);
  ngram["n"] = resolved_n;
  ngram["n_setting"] = s.ngram_n == 0 ? Json("auto") : Json(s.ngram_n);
  ngram["min_eval_words"] = s.min_eval_words;
  ngram["min_shared"] = s.min_shared;
  ngram["strip_punctuation"] = s.strip_punctuation;
  ngram["rule"] = s.rule == NgramRule::kCoverage ? "coverage" : "any";
  ngram["min_coverage"] = s.min_coverage;
  near["jaccard"] = s.jaccard;
  near["containment"] = s.containment;
  near["shingle_words"] = s.shingle_words;
  near["slots"] = s.num_slots;
  near["min_eval_shingles"] = s.min_eval_shingles;
  (*out)["template_share"] = s.template_share;
  (*out)["template_min_docs"] = s.template_min_docs;
  (*out)["exact"] = std::move(exact);
  (*out)["ngram"] = std::move(ngram);
  (*out)["near"] = std::move(near);
  (*out)["answers"] = std::move(answers);
}

struct LeakIndex::Impl {
  NormalizeOptions gram_norm;
  bool same_norm = false;
  int n = 13;
  uint64_t ngram_entries = 0;  // kept by ReleaseTables
  // exact
  std::vector<Hash128> prompt_hash;
  HashPostings exact;
  // ngram
  std::unique_ptr<NgramIndex> ngram;
  // near
  sketch::ShingleOptions shingle;
  sketch::MinHashParams minhash;
  sketch::Banding banding;
  // Each item's shingle set in two flat rows: its informative shingles
  // (sorted; the containment test and the prefix filter), and its template
  // shingles as ranks in `template_shingles` (ascending; 4 bytes instead of
  // 8 a shingle). Together they are the whole set (spans).
  FlatRows<uint64_t> informative;
  FlatRows<uint32_t> template_ranks;
  std::span<const uint64_t> Informative(uint32_t item) const { return informative[item]; }
  // Whether `shingle` is in item's set (informative or template part).
  bool HasShingle(uint32_t item, uint64_t shingle) const {
    const auto e = informative[item];
    if (std::binary_search(e.begin(), e.end(), shingle)) return true;
    const auto t = template_ranks[item];
    if (t.empty()) return false;
    const int64_t rank = template_shingles.Rank(shingle);
    return rank >= 0 && std::binary_search(t.begin(), t.end(), static_cast<uint32_t>(rank));
  }
  std::vector<uint8_t> sigs;
  HashPostings bands, prefixes;
  FlatStrings gram_text;   // normalised evaluation prompts (spans)
  std::vector<uint32_t> prompt_train_df;  // after SetTrainingFrequencies
  uint64_t prompt_docs = 0;
  uint32_t near_template_shingles = 0;
  // Template shingles (sorted). When there are any, the bands are keyed by a
  // second signature of the informative shingles only (candidate generation);
  // the Jaccard test still compares the whole-set signatures in `sigs`.
  // With a directory: the check looks up every training shingle.
  SortedKeys template_shingles;
  uint64_t items = 0;  // evaluation items indexed
  bool match_tables_released = false;  // ReleaseMatchTables, until EndCollect
  // answers
  FlatStrings ref_text;
  std::vector<uint32_t> answer_train_df;
  uint64_t answer_docs = 0;
  std::vector<uint32_t> ref_items;
  std::vector<Hash128> ref_hash;
  HashPostings ref_exact;
  std::unique_ptr<NgramIndex> ref_ngram;
};

LeakIndex::LeakIndex(const EvalCorpus& corpus, const LeakSettings& settings, const NormalizeOptions& norm)
    : settings_(settings), norm_(norm), impl_(std::make_unique<Impl>()) {
  impl_->items = corpus.items.size();
}
LeakIndex::~LeakIndex() = default;

int LeakIndex::ngram_n() const { return impl_->n; }
uint64_t LeakIndex::ngram_entries() const { return impl_->ngram ? impl_->ngram->indexed_grams() : impl_->ngram_entries; }
uint64_t LeakIndex::references() const { return impl_->ref_items.size(); }

Result<std::unique_ptr<LeakIndex>> LeakIndex::Build(const EvalCorpus& corpus, const LeakSettings& settings,
                                                    const NormalizeOptions& norm, unsigned threads) {
  std::unique_ptr<LeakIndex> idx(new LeakIndex(corpus, settings, norm));
  Impl& m = *idx->impl_;
  const size_t items = corpus.items.size();
  m.gram_norm = norm;
  m.gram_norm.strip_punctuation = settings.strip_punctuation || norm.strip_punctuation;
  m.same_norm = m.gram_norm.strip_punctuation == norm.strip_punctuation;
  std::vector<uint32_t> word_counts(items);
  for (size_t i = 0; i < items; ++i) {
    const std::string t = NormalizeForMatch(corpus.items[i].text, m.gram_norm);
    word_counts[i] = static_cast<uint32_t>(sketch::CountWords(t));
    m.gram_text.Add(t);
  }
  m.gram_text.ShrinkToFit();
  m.n = settings.ngram_n == 0 ? AutoNgramLength(word_counts) : settings.ngram_n;
  std::vector<uint32_t>().swap(word_counts);
  if (settings.enabled[0]) {
    std::vector<std::pair<uint64_t, uint32_t>> e;
    e.reserve(items);
    m.prompt_hash.resize(items);
    for (uint32_t i = 0; i < items; ++i) {
      // The n-gram text is the exact detector's text when the normalisations agree.
      m.prompt_hash[i] = m.same_norm ? HashBytes(m.gram_text[i]) : HashBytes(NormalizeForMatch(corpus.items[i].text, norm));
      e.emplace_back(m.prompt_hash[i].lo, i);
    }
    m.exact.Build(std::move(e));
  }
  NgramOptions no;
  no.n = m.n;
  no.min_eval_words = settings.min_eval_words;
  no.min_shared = settings.min_shared;
  // The n-gram index, the MinHash tables and the answers' index read the
  // normalised texts and write members of their own, so the first and the
  // last are built on helper threads while this one builds the second (the
  // run's set-up is on one thread otherwise; with threads 1 they are built
  // after it). Each is built the same way on any thread: the index does not
  // depend on the split.
  const bool beside = threads != 1;
  Beside ngram_built(beside, [&] {
    if (!settings.enabled[1]) return;
    m.ngram = std::make_unique<NgramIndex>(m.gram_text, no);
    MarkTemplate(settings, m.ngram.get(), items, nullptr, 0);
  });
  Beside refs_built(beside, [&] {
    if (!settings.enabled[3]) return;
    std::vector<std::pair<uint64_t, uint32_t>> e;
    for (uint32_t i = 0; i < items; ++i) {
      if (corpus.items[i].reference.empty()) continue;
      uint32_t r = static_cast<uint32_t>(m.ref_items.size());
      m.ref_items.push_back(i);
      m.ref_hash.push_back(HashBytes(NormalizeForMatch(corpus.items[i].reference, norm)));
      e.emplace_back(m.ref_hash.back().lo, r);
      m.ref_text.Add(NormalizeForMatch(corpus.items[i].reference, m.gram_norm));
    }
    m.ref_exact.Build(std::move(e));
    m.ref_ngram = std::make_unique<NgramIndex>(m.ref_text, no);
    MarkTemplate(settings, m.ref_ngram.get(), m.ref_items.size(), nullptr, 0);
  });
  if (settings.enabled[2]) {
    m.shingle.mode = sketch::ShingleMode::kAuto;
    m.shingle.word_n = settings.shingle_words;
    m.minhash.num_slots = settings.num_slots;
    if (settings.jaccard > 0) {
      auto b = sketch::ChooseBanding(settings.num_slots, settings.jaccard);
      if (!b.ok()) return Status::Usage("stages.leakage.near: " + b.status().message());
      m.banding = b.value();
    }
    const uint32_t K = settings.num_slots;
    m.sigs.resize(items * K);
    std::vector<std::pair<uint64_t, uint32_t>> band_entries, prefix_entries;
    std::vector<uint64_t> keys(m.banding.bands);
    // Template shingles (in many evaluation items) are set aside for
    // containment: signatures keep the whole set, the prefix filter and the
    // containment test use the rest. This also keeps the prefix filter's
    // candidate lists short when every item shares stock text.
    FlatRows<uint64_t> whole;  // each item's sorted, distinct shingles
    for (uint32_t i = 0; i < items; ++i) whole.Add(sketch::Shingles(m.gram_text[i], m.shingle));
    std::vector<uint64_t> template_shingles;
    {
      std::vector<uint64_t> all;
      all.reserve(whole.values());
      for (uint32_t i = 0; i < items; ++i) all.insert(all.end(), whole[i].begin(), whole[i].end());
      std::sort(all.begin(), all.end());
      const uint64_t cut = TemplateCut(settings, items);
      for (size_t a = 0; a < all.size();) {
        size_t b = a;
        while (b < all.size() && all[b] == all[a]) ++b;
        if (b - a >= cut) template_shingles.push_back(all[a]);
        a = b;
      }
      m.near_template_shingles = static_cast<uint32_t>(template_shingles.size());
    }
    m.informative.Reserve(items, template_shingles.empty() ? whole.values() : 0);
    m.template_ranks.Reserve(items, 0);
    std::vector<uint64_t> informative;
    std::vector<uint32_t> stock;
    std::vector<uint8_t> inf_sig(K);
    for (uint32_t i = 0; i < items; ++i) {
      const auto set = whole[i];
      informative.clear();
      stock.clear();
      // Both sorted: one pass splits the set, the search starting where the last ended.
      auto from = template_shingles.begin();
      for (uint64_t g : set) {
        from = std::lower_bound(from, template_shingles.end(), g);
        if (from != template_shingles.end() && *from == g) {
          stock.push_back(static_cast<uint32_t>(from - template_shingles.begin()));
        } else {
          informative.push_back(g);
        }
      }
      m.informative.Add(informative);
      m.template_ranks.Add(stock);
      std::span<uint8_t> compact(m.sigs.data() + size_t(i) * K, K);
      sketch::SignCompact(set, m.minhash, compact);
      if (settings.jaccard > 0 && template_shingles.empty()) {
        sketch::BandKeys(compact, m.banding, kBandSeed, keys);
        for (uint64_t k : keys) band_entries.emplace_back(k, i);
      } else if (settings.jaccard > 0 && !informative.empty()) {
        // Template text shared by many items would make every training
        // prompt written with the same stock sentences a candidate of every
        // item: band the informative shingles instead. An item with none
        // (all stock text) is left to the exact detector.
        sketch::SignCompact(informative, m.minhash, inf_sig);
        sketch::BandKeys(inf_sig, m.banding, kBandSeed, keys);
        for (uint64_t k : keys) band_entries.emplace_back(k, i);
      }
      const size_t s = informative.size();
      if (settings.containment > 0 && s >= settings.min_eval_shingles) {
        // Prefix filter: containment >= c needs ceil(c*s) shared shingles, so
        // one of any s - ceil(c*s) + 1 of them; index the smallest hashes.
        size_t need = static_cast<size_t>(std::ceil(settings.containment * static_cast<double>(s) - 1e-9));
        need = std::max<size_t>(need, 1);
        size_t p = s - need + 1;
        for (size_t q = 0; q < p; ++q) prefix_entries.emplace_back(informative[q], i);
      }
    }
    whole = FlatRows<uint64_t>();
    m.informative.ShrinkToFit();
    m.template_ranks.ShrinkToFit();
    m.bands.Build(std::move(band_entries));
    m.prefixes.Build(std::move(prefix_entries));
    m.template_shingles.Build(std::move(template_shingles));
  }
  ngram_built.Wait();
  refs_built.Wait();
  return idx;
}

void LeakIndex::CheckPrompt(std::string_view prompt, bool all_items, std::vector<LeakFinding>* out) const {
  CheckPrompt(prompt, NormalizeForMatch(prompt, norm_), all_items, out);
}

void LeakIndex::CheckAnswer(std::string_view answer, int candidate, std::vector<LeakFinding>* out) const {
  if (!settings_.enabled[3] || impl_->ref_items.empty()) return;
  CheckAnswer(answer, NormalizeForMatch(answer, norm_), candidate, out);
}

LeakIndex::PromptTexts LeakIndex::Texts(std::string_view prompt, std::string_view normalized,
                                        std::string* store) const {
  const Impl& m = *impl_;
  if (m.same_norm) return {normalized, normalized};
  NormalizeForMatchInto(prompt, m.gram_norm, store);
  return {normalized, *store};
}

void LeakIndex::CheckPrompt(std::string_view prompt, std::string_view exact_text, bool all_items,
                            std::vector<LeakFinding>* out, bool with_ngram) const {
  std::string gram_store;
  CheckPrompt(Texts(prompt, exact_text, &gram_store), all_items, out, with_ngram);
}

void LeakIndex::CheckPrompt(const PromptTexts& texts, bool all_items, std::vector<LeakFinding>* out,
                            bool with_ngram) const {
  const Impl& m = *impl_;
  const LeakSettings& s = settings_;
  const std::string_view exact_text = texts.exact, gram_text = texts.gram;
  if (s.enabled[0]) {
    Hash128 h = HashBytes(exact_text);
    for (uint32_t item : m.exact.Find(h.lo)) {
      if (m.prompt_hash[item] != h) continue;
      LeakFinding f;
      f.detector = LeakDetector::kExact;
      f.item = item;
      f.measure = "normalised_text";
      auto words = sketch::Words(exact_text);
      f.span = JoinWords(words, 0, words.size(), s.max_span_words);
      out->push_back(std::move(f));
      if (!all_items) break;
    }
  }
  if (s.enabled[1] && with_ngram) {
    std::vector<uint32_t> ids;
    m.ngram->CollectIds(gram_text, &ids);
    for (const auto& h : Passing(s, *m.ngram, ids, all_items)) out->push_back(GramFinding(s, h, m.gram_text[h.item]));
  }
  if (s.enabled[2]) {
    // Per-thread buffers: this runs once per training prompt.
    thread_local std::vector<uint64_t> ordered, informative, lookup, sorted;
    thread_local std::vector<uint64_t> keys;
    thread_local std::vector<uint8_t> sig, inf_sig;
    thread_local std::vector<int64_t> band_found, prefix_found;
    thread_local std::vector<uint32_t> band_cand, prefix_cand;
    ordered.clear();
    sketch::AppendShingles(gram_text, m.shingle, &ordered);  // text order, repeats kept
    const uint32_t K = s.num_slots;
    // The shingles that are not template text, in text order with repeats
    // (every one of them when none is set aside). No sorted set is made
    // unless a containment test needs it: the signatures and the lookups
    // below do not depend on order or repeats (sketch::Sign takes a
    // multiset; candidates are made distinct), so they are the same as over
    // the sorted, distinct set.
    std::span<const uint64_t> inf = ordered;
    // Keys for the prefix filter. It indexes informative shingles only, so a
    // template shingle cannot be found there, except that HashPostings
    // stores key 0 as 1: a template shingle 0 or 1 is looked up anyway.
    std::span<const uint64_t> prefix_keys = ordered;
    if (!m.template_shingles.empty()) {
      informative.clear();
      bool template_low = false;  // a template shingle 0 or 1 (chance about 2^-63 a shingle)
      for (uint64_t g : ordered) {
        if (!m.template_shingles.Contains(g)) {
          informative.push_back(g);
        } else {
          template_low |= g <= 1;
        }
      }
      inf = informative;
      prefix_keys = informative;
      if (template_low) {  // the lookups also take it (candidates are made distinct below, so order is free)
        lookup.assign(informative.begin(), informative.end());
        for (uint64_t g : ordered) {
          if (g <= 1 && m.template_shingles.Contains(g)) lookup.push_back(g);
        }
        prefix_keys = lookup;
      }
    }
    // Candidates from the bands and from the prefix filter, each sorted and
    // distinct. Only a prefix candidate can pass the containment test (the
    // filter is exact: an item with containment >= c shares one of its
    // indexed prefix shingles), so the set intersection, the costly part of
    // verification, is made only for those, and only when the Jaccard test
    // has not already matched. Most band candidates share only template text
    // and are turned down by the signature comparison alone.
    band_cand.clear();
    prefix_cand.clear();
    sig.resize(K);
    bool have_sig = false;  // the whole set's signature, made when first needed
    auto whole_sig = [&]() {
      if (!have_sig) sketch::SignCompact(ordered, m.minhash, sig);
      have_sig = true;
    };
    if (s.jaccard > 0) {
      keys.resize(m.banding.bands);
      if (m.template_shingles.empty()) {
        whole_sig();
        sketch::BandKeys(sig, m.banding, kBandSeed, keys);
      } else if (inf.empty()) {
        keys.clear();  // stock text only: no band candidates
      } else {
        inf_sig.resize(K);
        sketch::SignCompact(inf, m.minhash, inf_sig);
        sketch::BandKeys(inf_sig, m.banding, kBandSeed, keys);
      }
      band_found.resize(keys.size());
      m.bands.Ordinals(keys, band_found);  // (batched: the reads overlap)
      for (int64_t d : band_found) {
        if (d < 0) continue;
        for (uint32_t item : m.bands.Values(static_cast<uint32_t>(d))) band_cand.push_back(item);
      }
    }
    if (s.containment > 0) {
      prefix_found.resize(prefix_keys.size());
      m.prefixes.Ordinals(prefix_keys, prefix_found);
      for (int64_t d : prefix_found) {
        if (d < 0) continue;
        for (uint32_t item : m.prefixes.Values(static_cast<uint32_t>(d))) prefix_cand.push_back(item);
      }
    }
    for (auto* v : {&band_cand, &prefix_cand}) {
      std::sort(v->begin(), v->end());
      v->erase(std::unique(v->begin(), v->end()), v->end());
    }
    if (s.jaccard > 0 && (!band_cand.empty() || !prefix_cand.empty())) whole_sig();
    // The informative shingles sorted and distinct, made for the first
    // containment test. An item's informative shingles hold no template
    // shingle, so their intersection with these is their intersection with
    // the whole set.
    bool have_sorted = false;
    std::vector<LeakFinding> found;
    size_t bi = 0, pi = 0;
    while (bi < band_cand.size() || pi < prefix_cand.size()) {
      uint32_t item;
      bool in_prefix;
      if (pi == prefix_cand.size() || (bi < band_cand.size() && band_cand[bi] < prefix_cand[pi])) {
        item = band_cand[bi++];
        in_prefix = false;
      } else {
        item = prefix_cand[pi++];
        in_prefix = true;
        if (bi < band_cand.size() && band_cand[bi] == item) ++bi;
      }
      double j = 0, c = 0;
      bool jok = false, cok = false;
      if (s.jaccard > 0) {
        j = sketch::EstimateJaccardCompact(sig, std::span<const uint8_t>(m.sigs.data() + size_t(item) * K, K));
        jok = j >= s.jaccard;
      }
      if (!jok && in_prefix && s.containment > 0 && m.Informative(item).size() >= s.min_eval_shingles) {
        const auto e = m.Informative(item);
        size_t need = static_cast<size_t>(std::ceil(s.containment * static_cast<double>(e.size()) - 1e-9));
        need = std::max<size_t>(need, 1);
        if (!have_sorted) {
          sorted.assign(inf.begin(), inf.end());
          std::sort(sorted.begin(), sorted.end());
          sorted.erase(std::unique(sorted.begin(), sorted.end()), sorted.end());
          have_sorted = true;
        }
        // The exact count when the test passes (the score); a smaller one when it fails.
        const uint64_t inter = sketch::IntersectionIfAtLeast(e, sorted, need);
        c = static_cast<double>(inter) / static_cast<double>(e.size());
        cok = inter >= need;
      }
      if (!jok && !cok) continue;
      LeakFinding f;
      f.detector = LeakDetector::kNear;
      f.item = item;
      f.measure = jok ? "jaccard" : "containment";
      f.score = static_cast<float>(jok ? j : c);
      found.push_back(std::move(f));
    }
    if (!all_items && found.size() > 1) {
      size_t best = 0;
      for (size_t i = 1; i < found.size(); ++i) {
        if (found[i].score > found[best].score) best = i;
      }
      found = {found[best]};
    }
    if (!found.empty()) {
      // Span: the longest run of consecutive training shingles that are in the item's set.
      auto words = sketch::Words(gram_text);
      bool chars = sketch::ResolveMode(gram_text, m.shingle) == sketch::ShingleMode::kChars;
      for (auto& f : found) {
        size_t best_start = 0, best_len = 0, run = 0;
        for (size_t p = 0; p < ordered.size(); ++p) {
          const bool in = m.HasShingle(f.item, ordered[p]);
          run = in ? run + 1 : 0;
          if (run > best_len) {
            best_len = run;
            best_start = p + 1 - run;
          }
        }
        if (best_len == 0) continue;
        if (chars) {
          auto cps = sketch::DecodeUtf8(gram_text);
          size_t len = std::min<size_t>(best_len + static_cast<size_t>(m.shingle.char_n) - 1, 2 * s.max_span_words);
          std::string span;
          for (size_t q = best_start; q < std::min(cps.size(), best_start + len); ++q) {
            char32_t cp = cps[q];
            if (cp < 0x80) span.push_back(static_cast<char>(cp));
            else if (cp < 0x800) { span.push_back(char(0xC0 | (cp >> 6))); span.push_back(char(0x80 | (cp & 0x3F))); }
            else if (cp < 0x10000) {
              span.push_back(char(0xE0 | (cp >> 12)));
              span.push_back(char(0x80 | ((cp >> 6) & 0x3F)));
              span.push_back(char(0x80 | (cp & 0x3F)));
            } else {
              span.push_back(char(0xF0 | (cp >> 18)));
              span.push_back(char(0x80 | ((cp >> 12) & 0x3F)));
              span.push_back(char(0x80 | ((cp >> 6) & 0x3F)));
              span.push_back(char(0x80 | (cp & 0x3F)));
            }
          }
          f.span = std::move(span);
        } else {
          f.span = JoinWords(words, best_start, best_len + static_cast<size_t>(m.shingle.word_n) - 1, s.max_span_words);
        }
      }
      for (auto& f : found) out->push_back(std::move(f));
    }
  }
}

void LeakIndex::CheckAnswer(std::string_view answer, std::string_view exact_text, int candidate,
                            std::vector<LeakFinding>* out, bool with_ngram) const {
  const Impl& m = *impl_;
  if (!settings_.enabled[3] || m.ref_items.empty()) return;
  Hash128 h = HashBytes(exact_text);
  for (uint32_t r : m.ref_exact.Find(h.lo)) {
    if (m.ref_hash[r] != h) continue;
    LeakFinding f;
    f.detector = LeakDetector::kAnswer;
    f.item = m.ref_items[r];
    f.measure = "exact";
    f.candidate = candidate;
    auto words = sketch::Words(exact_text);
    f.span = JoinWords(words, 0, words.size(), settings_.max_span_words);
    out->push_back(std::move(f));
    return;
  }
  if (!with_ngram) return;
  std::string gram_store;
  if (!m.same_norm) gram_store = NormalizeForMatch(answer, m.gram_norm);
  const std::string_view gram_text = m.same_norm ? exact_text : std::string_view(gram_store);
  std::vector<uint32_t> ids;
  m.ref_ngram->CollectIds(gram_text, &ids);
  LeakFinding f;
  if (MatchAnswerGrams(ids, candidate, &f)) out->push_back(std::move(f));
}

uint32_t LeakIndex::PromptGrams() const { return impl_->ngram ? impl_->ngram->grams() : 0; }
uint32_t LeakIndex::AnswerGrams() const { return impl_->ref_ngram ? impl_->ref_ngram->grams() : 0; }

void LeakIndex::CollectPromptGrams(std::string_view prompt, std::string_view exact_text,
                                   std::vector<uint32_t>* ids) const {
  ids->clear();
  if (!impl_->ngram) return;
  std::string gram_store;
  CollectPromptGrams(Texts(prompt, exact_text, &gram_store), ids);
}

void LeakIndex::CollectPromptGrams(const PromptTexts& texts, std::vector<uint32_t>* ids) const {
  ids->clear();
  if (impl_->ngram) impl_->ngram->CollectIds(texts.gram, ids);
}

void LeakIndex::CollectAnswerGrams(std::string_view answer, std::string_view exact_text,
                                   std::vector<uint32_t>* ids) const {
  const Impl& m = *impl_;
  ids->clear();
  if (!m.ref_ngram) return;
  if (m.same_norm) {
    m.ref_ngram->CollectIds(exact_text, ids);
  } else {
    m.ref_ngram->CollectIds(NormalizeForMatch(answer, m.gram_norm), ids);
  }
}

namespace {
void DropTemplate(const NgramIndex* idx, std::vector<uint32_t>* ids) {
  if (!idx) return;
  ids->erase(std::remove_if(ids->begin(), ids->end(), [idx](uint32_t id) { return idx->IsTemplate(id); }),
             ids->end());
}
}  // namespace

void LeakIndex::DropEvalTemplatePromptGrams(std::vector<uint32_t>* ids) const { DropTemplate(impl_->ngram.get(), ids); }
void LeakIndex::DropEvalTemplateAnswerGrams(std::vector<uint32_t>* ids) const {
  DropTemplate(impl_->ref_ngram.get(), ids);
}

void LeakIndex::SetTrainingFrequencies(std::vector<uint32_t> prompt_df, uint64_t prompts,
                                       std::vector<uint32_t> answer_df, uint64_t answers) {
  Impl& m = *impl_;
  if (m.ngram) {
    m.prompt_train_df = std::move(prompt_df);
    m.prompt_docs = prompts;
    MarkTemplate(settings_, m.ngram.get(), m.items, &m.prompt_train_df, prompts);
  }
  if (m.ref_ngram) {
    m.answer_train_df = std::move(answer_df);
    m.answer_docs = answers;
    MarkTemplate(settings_, m.ref_ngram.get(), m.ref_items.size(), &m.answer_train_df, answers);
  }
}

bool LeakIndex::MatchPromptGrams(std::span<const uint32_t> ids, LeakFinding* f) const {
  const Impl& m = *impl_;
  if (!m.ngram) return false;
  auto hits = Passing(settings_, *m.ngram, ids, false);
  if (hits.empty()) return false;
  *f = GramFinding(settings_, hits[0], m.gram_text[hits[0].item]);
  return true;
}

bool LeakIndex::MatchAnswerGrams(std::span<const uint32_t> ids, int candidate, LeakFinding* f) const {
  const Impl& m = *impl_;
  if (!m.ref_ngram) return false;
  auto hits = Passing(settings_, *m.ref_ngram, ids, false);
  if (hits.empty()) return false;
  *f = GramFinding(settings_, hits[0], m.ref_text[hits[0].item]);
  f->detector = LeakDetector::kAnswer;
  f->item = m.ref_items[hits[0].item];
  f->candidate = candidate;
  return true;
}

void LeakIndex::ReleaseCheckTables() {
  Impl& m = *impl_;
  FreeVector(m.prompt_hash);
  m.exact = HashPostings();
  m.informative = FlatRows<uint64_t>();
  m.template_ranks = FlatRows<uint32_t>();
  FreeVector(m.sigs);
  m.bands = HashPostings();
  m.prefixes = HashPostings();
  m.template_shingles = SortedKeys();
  FreeVector(m.ref_hash);
  m.ref_exact = HashPostings();
}

void LeakIndex::ReleaseMatchTables() {
  Impl& m = *impl_;
  if (m.ngram) m.ngram->DropPostings();
  if (m.ref_ngram) m.ref_ngram->DropPostings();
  // Texts read only for spans and the template summary; on failure they stay as they are.
  m.gram_text.Pack();
  m.ref_text.Pack();
  m.match_tables_released = true;
}

Status LeakIndex::EndCollect() {
  Impl& m = *impl_;
  bool ok = true;
  // The lookups go first: no text is looked up after pass 1, and the item
  // lists made again below then take the memory they held.
  for (NgramIndex* idx : {m.ngram.get(), m.ref_ngram.get()}) {
    if (idx) idx->DropLookup();
  }
  for (NgramIndex* idx : {m.ngram.get(), m.ref_ngram.get()}) {
    if (idx && m.match_tables_released) ok = idx->RestorePostings() && ok;
  }
  ok = m.gram_text.Unpack() && ok;
  ok = m.ref_text.Unpack() && ok;
  m.match_tables_released = false;
  if (!ok) return Status::Internal("leakage: the evaluation index could not be decompressed after pass 1");
  return Status::Ok();
}

void LeakIndex::ReleaseTables() {
  Impl& m = *impl_;
  m.ngram_entries = m.ngram ? m.ngram->indexed_grams() : 0;
  Impl kept;
  kept.n = m.n;
  kept.ngram_entries = m.ngram_entries;
  kept.items = m.items;
  kept.ref_items = std::move(m.ref_items);
  m = std::move(kept);
}

std::vector<MemoryPart> LeakIndex::Memory() const {
  const Impl& m = *impl_;
  std::vector<MemoryPart> out;
  out.push_back({"exact: prompt hashes", VectorBytes(m.prompt_hash)});
  out.push_back({"exact: postings", m.exact.bytes()});
  if (m.ngram) m.ngram->Memory("ngram: ", &out);
  out.push_back({m.gram_text.packed() ? "normalised evaluation texts (spans; compressed)"
                                      : "normalised evaluation texts (spans; flat)",
                 m.gram_text.bytes()});
  out.push_back({"near: shingle sets (flat rows: informative; template as ranks)",
                 m.informative.bytes() + m.template_ranks.bytes()});
  out.push_back({"near: signatures", VectorBytes(m.sigs)});
  out.push_back({"near: band postings", m.bands.bytes()});
  out.push_back({"near: prefix postings", m.prefixes.bytes()});
  out.push_back({"near: template shingles", m.template_shingles.bytes()});
  out.push_back({"training frequencies", VectorBytes(m.prompt_train_df) + VectorBytes(m.answer_train_df)});
  out.push_back({"answers: texts, hashes, postings",
                 m.ref_text.bytes() + VectorBytes(m.ref_items) + VectorBytes(m.ref_hash) + m.ref_exact.bytes()});
  if (m.ref_ngram) m.ref_ngram->Memory("answers ngram: ", &out);
  return out;
}

void LeakIndex::TemplateJson(uint32_t limit, Json* out) const {
  const Impl& m = *impl_;
  auto list = [&](const NgramIndex& idx, const std::vector<uint32_t>& train_df, uint64_t train_docs,
                  uint64_t eval_docs, const FlatStrings& texts, Json* sec) {
    std::vector<uint32_t> ids;
    for (uint32_t id = 0; id < idx.grams(); ++id) {
      if (idx.IsTemplate(id)) ids.push_back(id);
    }
    auto df = [&](uint32_t id) { return id < train_df.size() ? train_df[id] : 0u; };
    std::sort(ids.begin(), ids.end(), [&](uint32_t a, uint32_t b) {
      if (df(a) != df(b)) return df(a) > df(b);
      if (idx.EvalFrequency(a) != idx.EvalFrequency(b)) return idx.EvalFrequency(a) > idx.EvalFrequency(b);
      return a < b;
    });
    (*sec)["grams_set_aside"] = ids.size();
    (*sec)["grams_indexed"] = idx.grams();
    (*sec)["training_documents"] = train_docs;
    (*sec)["training_cut"] = TemplateCut(settings_, train_docs) == UINT64_MAX ? Json(nullptr)
                                                                              : Json(TemplateCut(settings_, train_docs));
    (*sec)["evaluation_documents"] = eval_docs;
    (*sec)["evaluation_cut"] = TemplateCut(settings_, eval_docs) == UINT64_MAX ? Json(nullptr)
                                                                               : Json(TemplateCut(settings_, eval_docs));
    (*sec)["template_only_items"] = idx.TemplateOnlyItems();
    Json top = Json::array();
    for (size_t k = 0; k < ids.size() && k < limit; ++k) {
      const uint32_t id = ids[k];
      auto words = sketch::Words(texts[idx.ExampleItem(id)]);
      top.push_back(Json{{"text", JoinWords(words, idx.ExampleWord(id), idx.GramWords(id), idx.GramWords(id))},
                         {"training_documents", df(id)}, {"evaluation_items", idx.EvalFrequency(id)}});
    }
    (*sec)["most_frequent"] = std::move(top);
  };
  Json j = Json::object();
  if (m.ngram) {
    Json sec;
    list(*m.ngram, m.prompt_train_df, m.prompt_docs, m.items, m.gram_text, &sec);
    j["ngram"] = std::move(sec);
  }
  if (m.ref_ngram) {
    Json sec;
    list(*m.ref_ngram, m.answer_train_df, m.answer_docs, m.ref_items.size(), m.ref_text, &sec);
    j["answers"] = std::move(sec);
  }
  if (settings_.enabled[2]) j["near"] = Json{{"shingles_set_aside", m.near_template_shingles}};
  *out = std::move(j);
}

}  // namespace prefsift
