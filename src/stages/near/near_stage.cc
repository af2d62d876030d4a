#include "stages/near/near_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <map>
#include <span>
#include <thread>

#include "core/default_init.h"
#include "core/state_file.h"
#include "io/output_dir.h"
#include "stages/facts.h"
#include "stages/prior_join.h"
#include "stages/sparse_rows.h"
#include "stages/split/split_stage.h"
#include "sketch/clusters.h"
#include "sketch/key_sketch.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/set_similarity.h"
#include "sketch/shingles.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

enum class CandidateAction { kOff, kFlag, kReject };

struct NearSettings {
  double threshold = 0.8;
  sketch::ShingleMode mode = sketch::ShingleMode::kAuto;
  int word_n = 5;
  int char_n = 5;
  uint32_t slots = 256;
  sketch::Banding banding{};  // {0, 0}: chosen for slots and threshold
  bool exact = false;
  uint32_t max_per_cluster = 0;  // 0 = no cap
  CandidateAction cand_action = CandidateAction::kFlag;
  double cand_threshold = 0.9;
  int cand_n = 3;
  // Template text (docs/near-duplicates.md, "Template text"): each prompt's
  // key sketch of `keys` keys (0 = off: whole-set bands only); a key in at
  // least `template_min_prompts` kept prompts' sketches is set aside.
  uint32_t keys = 32;
  uint32_t template_min_prompts = 10;
  uint32_t chain_keys = 3;
  double shared_key_share = 0.34;
};

// Seed of the key sketch's mix (another than the signature's).
constexpr uint64_t kKeySeed = 0x6b657973ULL;  // "keys"

// A pair of candidates of one record at or above the candidate threshold.
struct CandidatePair {
  uint16_t a = 0, b = 0;
  float similarity = 0;
};

struct ClusterOut {
  size_t id = 0;                   // smallest member record index
  std::vector<size_t> members;     // record indexes, input order
  float min_similarity = 0, max_similarity = 0;
  std::vector<size_t> over_cap;    // rejected by the cap
};

const char* ModeName(sketch::ShingleMode m) {
  switch (m) {
    case sketch::ShingleMode::kAuto: return "auto";
    case sketch::ShingleMode::kWords: return "words";
    case sketch::ShingleMode::kChars: return "chars";
  }
  return "?";
}

double Round6(double x) { return std::round(x * 1e6) / 1e6; }

// Similarity of two normalised candidate texts: exact Jaccard of their
// n-gram sets. The n-gram length is min(n, shorter text's length in units),
// at least 1, so short answers are compared word by word (or code point by
// code point) instead of as one whole-text shingle. Character n-grams when
// either text resolves to character mode.
//
// CandidateSets computes this for every pair of one record's candidates,
// shingling each candidate once per mode (not once per pair): a pair whose
// n-gram length is the full n reuses the candidates' cached sets; a pair with
// a shorter text builds its sets for that pair alone.
class CandidateSets {
 public:
  CandidateSets(const std::vector<std::string>& texts, sketch::ShingleMode forced, int n, uint64_t seed)
      : texts_(texts), n_(n), seed_(seed), per_(texts.size()) {
    sketch::ShingleOptions so;
    so.mode = forced;
    bool all_full_words = texts.size() <= kTableMaxTexts;
    for (size_t i = 0; i < texts.size(); ++i) {
      per_[i].chars_mode = sketch::ResolveMode(texts[i], so) == sketch::ShingleMode::kChars;
      all_full_words = all_full_words && !per_[i].chars_mode && Units(i, false) >= static_cast<size_t>(n_);
    }
    if (all_full_words) BuildTable();
  }

  float Similarity(size_t a, size_t b) {
    if (table_built_) return TableSimilarity(a, b);
    const bool chars = per_[a].chars_mode || per_[b].chars_mode;
    const size_t units = std::min(Units(a, chars), Units(b, chars));  // counted up to n only
    const int eff = static_cast<int>(std::max<size_t>(1, std::min<size_t>(static_cast<size_t>(n_), units)));
    if (eff != n_) {
      std::vector<uint64_t> sa = Build(a, chars, eff), sb = Build(b, chars, eff);
      return static_cast<float>(sketch::ExactJaccard(sa, sb));
    }
    return static_cast<float>(sketch::ExactJaccard(Set(a, chars), Set(b, chars)));
  }

 private:
  struct PerText {
    bool chars_mode = false;
    size_t units[2] = {SIZE_MAX, SIZE_MAX};  // words, code points (SIZE_MAX = not counted yet)
    bool built[2] = {false, false};
    std::vector<uint64_t> set[2];            // n-gram sets at the full n
  };
  // The text's length in units (words or code points), or n when it is longer:
  // only min(n, length) matters, so counting stops at n.
  size_t Units(size_t i, bool chars) {
    size_t& u = per_[i].units[chars];
    if (u == SIZE_MAX) u = CountUpTo(texts_[i], chars, static_cast<size_t>(n_));
    return u;
  }
  static size_t CountUpTo(std::string_view text, bool chars, size_t limit) {
    size_t count = 0;
    bool in_word = false;
    for (char ch : text) {
      if (count >= limit) break;
      const auto c = static_cast<unsigned char>(ch);
      if (chars) {
        count += (c & 0xC0) != 0x80;  // a code point starts (DecodeUtf8 counts each malformed byte; ingest
                                      // validated the UTF-8, so the two agree)
      } else {
        const bool space = c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f';
        count += !space && !in_word;
        in_word = !space;
      }
    }
    return count;
  }
  std::vector<uint64_t> Build(size_t i, bool chars, int n) const {
    return chars ? sketch::CharNgramHashes(texts_[i], n, seed_) : sketch::WordNgramHashes(texts_[i], n, seed_);
  }
  const std::vector<uint64_t>& Set(size_t i, bool chars) {
    PerText& p = per_[i];
    if (!p.built[chars]) {
      p.set[chars] = Build(i, chars, n_);
      p.built[chars] = true;
    }
    return p.set[chars];
  }
  // The common case (every candidate in word mode with at least n words, so
  // every pair uses the full n): one hash table over all candidates' n-gram
  // hashes, each entry marked with the candidates that contain it. Each
  // candidate's set size and each pair's intersection are counted as the
  // marks are set (a mark new to an entry: the candidate's set grows by one,
  // and it meets every candidate already on the entry): no per-candidate sort
  // and no scan of the table. The n-grams are keyed by AppendWordGramKeys (a
  // cheaper mix than the XXH3 of Build; the keys stay in this table): the same
  // set sizes and intersections but for a 2^-64 key coincidence, and the same
  // division as ExactJaccard, so the same similarities to the last bit. The table is the
  // thread's own and is never cleared: an entry counts only when its stamp is
  // this record's.
  static constexpr size_t kTableMaxTexts = 8;
  // One entry of the table: its key, the record it was filled for and the
  // candidates' bits, side by side (one cache line a probe, not three).
  struct Entry {
    uint64_t key = 0;
    uint32_t stamp = 0;  // the record the entry was filled for
    uint32_t marks = 0;  // a bit per candidate
  };
  void BuildTable() {
    thread_local std::vector<uint64_t> grams;
    thread_local std::vector<Entry> table;
    thread_local uint32_t stamp = 0;
    const size_t b = texts_.size();
    size_t ends[kTableMaxTexts];
    grams.clear();
    for (size_t i = 0; i < b; ++i) {
      sketch::AppendWordGramKeys(texts_[i], n_, &grams);
      ends[i] = grams.size();
    }
    size_t cap = 16;
    while (cap < 2 * grams.size()) cap <<= 1;
    if (table.size() < cap || ++stamp == 0) {  // a bigger table, or the stamps wrapped: start clean
      table.assign(std::max(cap, table.size()), Entry{});
      stamp = 1;
    }
    const size_t mask = cap - 1;
    Entry* const t = table.data();
    size_.assign(b, 0);
    inter_.assign(b * b, 0);
    size_t begin = 0;
    for (size_t i = 0; i < b; ++i) {
      const auto bit = 1u << i;
      uint64_t grown = 0;
      for (size_t g = begin; g < ends[i]; ++g) {
        const uint64_t h = grams[g];
        size_t slot = static_cast<size_t>(h ^ (h >> 29)) & mask;
        while (t[slot].stamp == stamp && t[slot].key != h) slot = (slot + 1) & mask;
        Entry& e = t[slot];
        if (e.stamp != stamp) {  // new to this record
          e.stamp = stamp;
          e.key = h;
          e.marks = bit;
          ++grown;
          continue;
        }
        const unsigned m = e.marks;
        if (m & bit) continue;  // a repeat within candidate i
        e.marks = m | bit;
        ++grown;
        for (unsigned rest = m; rest != 0; rest &= rest - 1) ++inter_[static_cast<size_t>(__builtin_ctz(rest)) * b + i];
      }
      size_[i] = grown;
      begin = ends[i];
    }
    table_built_ = true;
  }
  float TableSimilarity(size_t a, size_t b) const {
    const size_t n = texts_.size();
    const uint64_t common = inter_[std::min(a, b) * n + std::max(a, b)];
    return static_cast<float>(static_cast<double>(common) / static_cast<double>(size_[a] + size_[b] - common));
  }

  const std::vector<std::string>& texts_;
  int n_;
  uint64_t seed_;
  std::vector<PerText> per_;
  bool table_built_ = false;
  std::vector<uint64_t> size_, inter_;
};

class NearDupsStage : public Stage {
 public:
  NearDupsStage(const NearSettings& s, const Plan& plan) : s_(s), threads_(plan.threads) {
    shingle_.mode = s.mode;
    shingle_.word_n = s.word_n;
    shingle_.char_n = s.char_n;
    minhash_.num_slots = s.slots;
  }
  std::string name() const override { return "near"; }

  void Reserve(size_t n) override {
    signatures_.reserve(n * s_.slots);
    keys_.reserve(n * s_.keys);
    chars_mode_.reserve(n);
    if (s_.cand_action != CandidateAction::kOff) cand_pairs_.reserve(n);
  }
  void Grow(size_t n) override {
    signatures_.resize(n * s_.slots);
    keys_.resize(n * s_.keys);  // KeySketch writes all s_.keys places (kNoKey past the distinct keys)
    chars_mode_.resize(n);
    if (s_.exact) sets_.resize(n);
    if (s_.cand_action != CandidateAction::kOff) cand_pairs_.resize(n);
  }

  void Observe(size_t i, const Record& rec, const RecordFacts&, const MatchText& text) override {
    std::string_view prompt = text.user_prompt();
    sketch::ShingleOptions so = shingle_;
    so.mode = sketch::ResolveMode(prompt, shingle_);
    chars_mode_[i] = so.mode == sketch::ShingleMode::kChars;
    // One shingling serves the signature and the key sketch.
    thread_local std::vector<uint64_t> shingles;
    shingles.clear();
    sketch::AppendShingles(prompt, so, &shingles);
    sketch::SignCompact(shingles, minhash_, std::span<uint8_t>(signatures_.data() + i * s_.slots, s_.slots));
    if (s_.keys > 0) sketch::KeySketch(shingles, kKeySeed, std::span<uint32_t>(keys_.data() + i * s_.keys, s_.keys));
    if (s_.exact) sets_[i] = sketch::Shingles(prompt, so);
    if (s_.cand_action == CandidateAction::kOff || rec.candidates.size() < 2) return;
    CandidateSets sets(text.candidates, s_.mode, s_.cand_n, shingle_.seed);
    const size_t b = std::min<size_t>(text.candidates.size(), 65535);
    std::vector<CandidatePair> found;
    for (size_t a = 0; a < b; ++a) {
      for (size_t c = a + 1; c < b; ++c) {
        float sim = sets.Similarity(a, c);
        if (sim >= s_.cand_threshold) {
          found.push_back(CandidatePair{static_cast<uint16_t>(a), static_cast<uint16_t>(c), sim});
        }
      }
    }
    if (!found.empty()) cand_pairs_.Set(i, std::move(found));
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    const size_t n = st.records.size();
    records_signed_ = n;
    cluster_of_.assign(n, -1);
    if (ctx.results.want_signatures) {  // a store keeps them (src/store, docs/store.md)
      NearSignatures sig;
      sig.bytes.assign(signatures_.begin(), signatures_.end());
      sig.slots = s_.slots;
      sig.bands = banding_.bands;
      sig.rows = banding_.rows;
      sig.threshold = s_.exact ? -1.0 : s_.threshold;  // -1: "verify": "exact", which a store refuses
      ctx.results.Publish(std::move(sig));
    }
    std::vector<size_t> kept;  // records still kept after earlier stages, input order
    for (size_t i = 0; i < n; ++i) {
      if (st.IsKept(i)) kept.push_back(i);
    }
    compared_ = kept.size();
    for (size_t i : kept) chars_records_ += chars_mode_[i];
    if (Status s = ClusterKept(kept); !s.ok()) return s;
    ctx.results.Publish(NearClusters{cluster_of_});
    for (const auto& co : clusters_) {
      records_in_clusters_ += co.members.size();
      largest_ = std::max<uint64_t>(largest_, co.members.size());
      ++size_histogram_[co.members.size()];
    }
    JudgeCandidates(st, kept);
    CapClusters(st);
    if (ctx.prior) return JoinStored(ctx);
    return Status::Ok();
  }

  // 1. Clusters among the kept records (cluster_of_, clusters_).
  Status ClusterKept(const std::vector<size_t>& kept) {
    const uint32_t K = s_.slots;
    // 1. Clusters among the kept records.
    if (kept.size() >= 2) {
      // The kept records' signatures, moved to the front in place (kept[j] >= j,
      // so no row is overwritten before it is moved): no second copy of the
      // signature table (256 bytes a record by default).
      FillLaterVector<uint8_t> sub = std::move(signatures_);
      for (size_t j = 0; j < kept.size(); ++j) {
        if (kept[j] != j) std::memmove(sub.data() + j * K, sub.data() + kept[j] * K, K);
      }
      sub.resize(kept.size() * K);
      signatures_.clear();
      sketch::ClusterOptions opt;
      opt.threshold = s_.threshold;
      opt.banding = banding_;
      unsigned threads = threads_ ? threads_ : std::max(1u, std::thread::hardware_concurrency());
      opt.threads = threads;
      // Candidates from the key sketches when some keys are template text;
      // else (or with no sketches) from the whole-set bands, as before.
      std::vector<uint64_t> pairs;
      bool from_keys = false;
      if (s_.keys > 0 && kept.size() * s_.keys < 0xffffffffULL) {  // places are numbered in 32 bits
        const uint32_t M = s_.keys;
        FillLaterVector<uint32_t> keys = std::move(keys_);
        for (size_t j = 0; j < kept.size(); ++j) {
          if (kept[j] != j) std::memmove(keys.data() + j * M, keys.data() + kept[j] * M, M * sizeof(uint32_t));
        }
        keys.resize(kept.size() * M);
        keys_.clear();
        sketch::KeyPairOptions ko;
        ko.min_records = s_.template_min_prompts;
        ko.chain_keys = s_.chain_keys;
        ko.min_shared_share = s_.shared_key_share;
        ko.threads = threads;
        ko.only_with_template = true;  // without template text, the bands below give the candidates
        pairs = sketch::KeySketchPairs(keys, M, ko, &kstats_);
        from_keys = kstats_.keys_set_aside > 0;
        if (!from_keys) std::vector<uint64_t>().swap(pairs);
      }
      Result<sketch::Clustering> r = sketch::Clustering{};
      if (s_.exact) {
        std::vector<std::vector<uint64_t>> sets(kept.size());
        for (size_t j = 0; j < kept.size(); ++j) sets[j] = std::move(sets_[kept[j]]);
        std::vector<std::vector<uint64_t>>().swap(sets_);
        r = from_keys ? sketch::ClusterCandidatesWithExactSets(sub, K, pairs, sets, opt)
                      : sketch::ClusterWithExactSets(sub, K, sets, opt);
      } else {
        r = from_keys ? sketch::ClusterCandidates(sub, K, pairs, opt) : sketch::ClusterCompactSignatures(sub, K, opt);
      }
      if (!r.ok()) return Status::Internal("near: clustering failed: " + r.status().message());
      const sketch::Clustering& c = r.value();
      cstats_ = c.stats;
      template_mode_ = from_keys;
      std::vector<int64_t> pos(kept.size(), -1);
      for (const auto& cs : c.clusters) {
        pos[cs.id] = static_cast<int64_t>(clusters_.size());
        ClusterOut co;
        co.id = kept[cs.id];
        co.min_similarity = cs.min_similarity;
        co.max_similarity = cs.max_similarity;
        co.members.reserve(cs.size);
        clusters_.push_back(std::move(co));
      }
      for (size_t j = 0; j < kept.size(); ++j) {
        uint32_t root = c.cluster_of[j];
        if (pos[root] < 0) continue;
        ClusterOut& co = clusters_[static_cast<size_t>(pos[root])];
        co.members.push_back(kept[j]);
        cluster_of_[kept[j]] = static_cast<int64_t>(co.id);
      }
    }
    return Status::Ok();
  }

  // 2. Near-identical candidates within one comparison: flagged or rejected.
  void JudgeCandidates(RunState& st, const std::vector<size_t>& kept) {
    if (s_.cand_action != CandidateAction::kOff) {
      for (size_t i : kept) {
        if (cand_pairs_[i].empty()) continue;
        ++cand_records_;
        cand_pair_count_ += cand_pairs_[i].size();
        flagged_.push_back(i);
        if (s_.cand_action == CandidateAction::kReject) {
          const CandidatePair& p = cand_pairs_[i].front();
          if (st.Reject(i, name(), "near_identical_candidates",
                        "candidates " + std::to_string(p.a) + " and " + std::to_string(p.b) +
                            " are nearly the same text (similarity " + Json(Round6(p.similarity)).dump() +
                            "), so the judgment carries little signal",
                        Json{{"candidates", {p.a, p.b}}, {"similarity", Round6(p.similarity)},
                             {"threshold", s_.cand_threshold}}
                            .dump())) {
            ++cand_rejected_;
          }
        }
      }
    }
  }

  // 3. Cap per cluster: the first kept members in input order stay.
  void CapClusters(RunState& st) {
    if (s_.max_per_cluster > 0) {
      for (auto& co : clusters_) {
        uint32_t stay = 0;
        size_t rep = SIZE_MAX;
        for (size_t m : co.members) {
          if (!st.IsKept(m)) continue;
          if (stay < s_.max_per_cluster) {
            if (rep == SIZE_MAX) rep = m;
            ++stay;
            continue;
          }
          const std::string& rep_id = st.records[rep].id;
          if (st.Reject(m, name(), "near_duplicate_over_cap",
                        "the prompt is a near duplicate of " + rep_id + " and its cluster already keeps " +
                            std::to_string(s_.max_per_cluster) + " comparison(s) (max_per_cluster)",
                        Json{{"cluster", co.id}, {"cluster_first", st.records[co.id].id}, {"kept", rep_id},
                             {"max_per_cluster", s_.max_per_cluster}}
                            .dump())) {
            co.over_cap.push_back(m);
            ++over_cap_;
          }
        }
      }
    }
  }

  // A store: batch records join stored clusters (stages/prior_join.h).
  Status JoinStored(StageContext& ctx) const {
    const PriorJoin* before = ctx.results.Find<PriorJoin>();
    if (!before) return Status::Internal("near: prior data without the exact stage's comparisons");
    auto shape = SplitShapeOf(ctx.plan);
    if (!shape.ok()) return shape.status();
    PriorJoin join = *before;
    Status s = JoinClusters(*ctx.prior, ctx.run, ctx.results.Find<NearClusters>(), ctx.results.Find<NearSignatures>(),
                            shape.value(), &join);
    if (!s.ok()) return s;
    ctx.results.Publish(std::move(join));
    return Status::Ok();
  }

  void Report(const RunState&, Json* s) const override {
    Json settings;
    settings["threshold"] = s_.threshold;
    settings["shingle"] = ModeName(s_.mode);
    settings["word_ngram"] = s_.word_n;
    settings["char_ngram"] = s_.char_n;
    settings["slots"] = s_.slots;
    settings["bands"] = banding_.bands;
    settings["rows"] = banding_.rows;
    settings["verify"] = s_.exact ? "exact" : "estimate";
    settings["max_per_cluster"] = s_.max_per_cluster;
    settings["candidates"] = Json{{"action", s_.cand_action == CandidateAction::kOff    ? "off"
                                             : s_.cand_action == CandidateAction::kFlag ? "flag" : "reject"},
                                  {"threshold", s_.cand_threshold},
                                  {"ngram", s_.cand_n}};
    (*s)["settings"] = std::move(settings);
    // The banding S-curve: P(candidate) = 1 - (1 - s^r)^b (Mining of Massive
    // Datasets, sec. 3.4.2); with 8-bit slots a row agrees with probability
    // s + (1 - s)/256.
    Json curve = Json::array();
    for (double x : {0.3, 0.5, 0.6, 0.7, 0.75, 0.8, 0.85, 0.9, 0.95}) {
      double row8 = x + (1 - x) / 256.0;
      double p8 = 1 - std::pow(1 - std::pow(row8, banding_.rows), banding_.bands);
      curve.push_back(Json{{"similarity", x},
                           {"p_candidate", Round6(sketch::CandidateProbability(x, banding_))},
                           {"p_candidate_8bit", Round6(p8)}});
    }
    (*s)["s_curve"] = std::move(curve);
    (*s)["approx_threshold"] = Round6(sketch::ApproxThreshold(banding_));
    (*s)["records_signed"] = records_signed_;
    (*s)["records_compared"] = compared_;
    (*s)["shingle_modes"] = Json{{"words", compared_ - chars_records_}, {"chars", chars_records_}};
    (*s)["candidate_pairs"] = cstats_.candidates.unique_pairs;
    (*s)["verified_pairs"] = cstats_.verified_edges;
    (*s)["pairs_below_threshold"] = cstats_.rejected_pairs;
    (*s)["capped_buckets"] = cstats_.candidates.capped_runs;
    if (template_mode_) {  // only when keys were set aside, so outputs without template text stay as they were
      (*s)["template_text"] = Json{{"keys", s_.keys},
                                   {"template_min_prompts", s_.template_min_prompts},
                                   {"chain_keys", s_.chain_keys},
                                   {"shared_key_share", s_.shared_key_share},
                                   {"distinct_keys", kstats_.keys},
                                   {"keys_set_aside", kstats_.keys_set_aside},
                                   {"places_set_aside", kstats_.entries_set_aside},
                                   {"prompts_without_informative_keys", kstats_.records_without_informative},
                                   {"informative_key_pairs", kstats_.informative_pairs},
                                   {"pairs_sharing_too_few_keys", kstats_.pairs_below_share},
                                   {"neighbour_pairs", kstats_.chain_pairs},
                                   {"largest_informative_run", kstats_.largest_run}};
    }
    (*s)["clusters"] = clusters_.size();
    (*s)["records_in_clusters"] = records_in_clusters_;
    (*s)["largest_cluster"] = largest_;
    Json hist = Json::object();
    for (const auto& [size, count] : size_histogram_) hist[std::to_string(size)] = count;
    (*s)["cluster_sizes"] = std::move(hist);
    (*s)["over_cap_rejected"] = over_cap_;
    (*s)["near_identical_candidates"] =
        Json{{"records", cand_records_}, {"pairs", cand_pair_count_}, {"rejected", cand_rejected_}};
  }

  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.Create("clusters.jsonl");
    if (!f.ok()) return f.status();
    for (const auto& co : clusters_) {
      Json j;
      j["cluster"] = co.id;
      j["first"] = st.records[co.id].id;
      j["size"] = co.members.size();
      Json ids = Json::array();
      for (size_t m : co.members) ids.push_back(st.records[m].id);
      j["members"] = std::move(ids);
      j["min_similarity"] = Round6(co.min_similarity);
      j["max_similarity"] = Round6(co.max_similarity);
      Json over = Json::array();
      for (size_t m : co.over_cap) over.push_back(st.records[m].id);
      j["over_cap"] = std::move(over);
      Status s = f.value()->Append(j.dump() + "\n");
      if (!s.ok()) return s;
    }
    Status s = f.value()->Close();
    if (!s.ok()) return s;
    auto g = out.Create("near_identical.jsonl");
    if (!g.ok()) return g.status();
    for (size_t i : flagged_) {
      Json pairs = Json::array();
      for (const auto& p : cand_pairs_[i]) {
        pairs.push_back(Json{{"candidates", {p.a, p.b}}, {"similarity", Round6(p.similarity)}});
      }
      const Decision& d = st.decisions[st.records[i].entry];
      Json j;
      j["id"] = st.records[i].id;
      j["action"] = d.rejected && st.StageOf(d) == "near" && st.ReasonOf(d) == "near_identical_candidates" ? "rejected" : "flagged";
      j["cluster"] = cluster_of_[i] >= 0 ? Json(cluster_of_[i]) : Json(nullptr);
      j["pairs"] = std::move(pairs);
      s = g.value()->Append(j.dump() + "\n");
      if (!s.ok()) return s;
    }
    return g.value()->Close();
  }

  void SetBanding(sketch::Banding b) { banding_ = b; }

 private:
  NearSettings s_;
  unsigned threads_;
  sketch::ShingleOptions shingle_;
  sketch::MinHashParams minhash_;
  sketch::Banding banding_;
  // Per record (Observe).
  // Grown without zeros (core/default_init.h): Observe writes every byte of
  // its record's rows, on the worker threads.
  FillLaterVector<uint8_t> signatures_;              // K bytes a record
  FillLaterVector<uint32_t> keys_;                   // key sketch: s_.keys keys a record (4 bytes each)
  std::vector<int64_t> cluster_of_;                   // per record: its cluster id (smallest member), -1 = none
  std::vector<uint8_t> chars_mode_;                  // 1 = code-point shingles
  std::vector<std::vector<uint64_t>> sets_;          // "verify": "exact" only
  SparseRows<std::vector<CandidatePair>> cand_pairs_;  // only records with a pair
  // Decide.
  std::vector<ClusterOut> clusters_;
  std::vector<size_t> flagged_;
  sketch::ClusterStats cstats_;
  sketch::KeyPairStats kstats_;
  bool template_mode_ = false;  // candidates came from the key sketches
  std::map<size_t, uint64_t> size_histogram_;
  uint64_t records_signed_ = 0, compared_ = 0, chars_records_ = 0, records_in_clusters_ = 0, largest_ = 0,
           over_cap_ = 0, cand_records_ = 0, cand_pair_count_ = 0, cand_rejected_ = 0;
};

constexpr const char* kKnown =
    "threshold, shingle, word_ngram, char_ngram, slots, bands, rows, verify, max_per_cluster, "
    "candidates, candidate_threshold, candidate_ngram, keys, template_min_prompts, chain_keys, shared_key_share";

}  // namespace

std::unique_ptr<Stage> MakeNearStage(const Plan& plan, FileSystem* /*fs*/, Status* error) {
  const Json& s = StageSettings(plan, "near");
  NearSettings ns;
  auto fail = [&](const std::string& msg) {
    *error = Status::Usage("stages.near." + msg);
    return nullptr;
  };
  auto number = [&](const Json& v, double lo, double hi, double* out) {
    if (!v.is_number()) return false;
    double x = v.get<double>();
    if (!(x >= lo && x <= hi)) return false;
    *out = x;
    return true;
  };
  auto integer = [&](const Json& v, int64_t lo, int64_t hi, int64_t* out) {
    if (!v.is_number_integer()) return false;
    int64_t x = v.get<int64_t>();
    if (x < lo || x > hi) return false;
    *out = x;
    return true;
  };
  bool has_bands = false, has_rows = false;
  for (auto it = s.begin(); it != s.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    int64_t iv = 0;
    if (k == "enabled") {
      continue;
    } else if (k == "threshold") {
      if (!number(v, 0.0, 1.0, &ns.threshold) || ns.threshold <= 0) return fail("threshold: must be a number in (0, 1]");
    } else if (k == "shingle") {
      std::string m = v.is_string() ? v.get<std::string>() : "";
      if (m == "auto") ns.mode = sketch::ShingleMode::kAuto;
      else if (m == "words") ns.mode = sketch::ShingleMode::kWords;
      else if (m == "chars") ns.mode = sketch::ShingleMode::kChars;
      else return fail("shingle: must be \"auto\", \"words\" or \"chars\"");
    } else if (k == "word_ngram") {
      if (!integer(v, 1, 64, &iv)) return fail("word_ngram: must be an integer from 1 to 64");
      ns.word_n = static_cast<int>(iv);
    } else if (k == "char_ngram") {
      if (!integer(v, 1, 64, &iv)) return fail("char_ngram: must be an integer from 1 to 64");
      ns.char_n = static_cast<int>(iv);
    } else if (k == "slots") {
      if (!integer(v, 8, 4096, &iv)) return fail("slots: must be an integer from 8 to 4096");
      ns.slots = static_cast<uint32_t>(iv);
    } else if (k == "bands") {
      if (!integer(v, 1, 4096, &iv)) return fail("bands: must be an integer from 1 to 4096");
      ns.banding.bands = static_cast<uint32_t>(iv);
      has_bands = true;
    } else if (k == "rows") {
      if (!integer(v, 1, 4096, &iv)) return fail("rows: must be an integer from 1 to 4096");
      ns.banding.rows = static_cast<uint32_t>(iv);
      has_rows = true;
    } else if (k == "verify") {
      std::string m = v.is_string() ? v.get<std::string>() : "";
      if (m == "estimate") ns.exact = false;
      else if (m == "exact") ns.exact = true;
      else return fail("verify: must be \"estimate\" or \"exact\"");
    } else if (k == "max_per_cluster") {
      if (!integer(v, 0, UINT32_MAX, &iv)) return fail("max_per_cluster: must be a whole number >= 0 (0 = no cap)");
      ns.max_per_cluster = static_cast<uint32_t>(iv);
    } else if (k == "candidates") {
      std::string m = v.is_string() ? v.get<std::string>() : "";
      if (m == "off") ns.cand_action = CandidateAction::kOff;
      else if (m == "flag") ns.cand_action = CandidateAction::kFlag;
      else if (m == "reject") ns.cand_action = CandidateAction::kReject;
      else return fail("candidates: must be \"flag\", \"reject\" or \"off\"");
    } else if (k == "candidate_threshold") {
      if (!number(v, 0.0, 1.0, &ns.cand_threshold) || ns.cand_threshold <= 0) {
        return fail("candidate_threshold: must be a number in (0, 1]");
      }
    } else if (k == "keys") {
      if (!integer(v, 0, 64, &iv)) return fail("keys: must be an integer from 0 to 64 (0 = whole-set bands only)");
      ns.keys = static_cast<uint32_t>(iv);
    } else if (k == "template_min_prompts") {
      if (!integer(v, 2, 1000000, &iv)) return fail("template_min_prompts: must be an integer from 2 to 1000000");
      ns.template_min_prompts = static_cast<uint32_t>(iv);
    } else if (k == "chain_keys") {
      if (!integer(v, 0, 64, &iv)) return fail("chain_keys: must be an integer from 0 to 64");
      ns.chain_keys = static_cast<uint32_t>(iv);
    } else if (k == "shared_key_share") {
      if (!number(v, 0.0, 1.0, &ns.shared_key_share)) return fail("shared_key_share: must be a number in [0, 1]");
    } else if (k == "candidate_ngram") {
      if (!integer(v, 1, 64, &iv)) return fail("candidate_ngram: must be an integer from 1 to 64");
      ns.cand_n = static_cast<int>(iv);
    } else {
      *error = Status::Usage("stages.near: unknown setting \"" + k + "\" (known: " + kKnown + ")");
      return nullptr;
    }
  }
  if (has_bands != has_rows) return fail("bands/rows: give both or neither");
  sketch::Banding banding = ns.banding;
  if (has_bands) {
    if (static_cast<uint64_t>(banding.bands) * banding.rows > ns.slots) {
      return fail("bands/rows: bands x rows = " + std::to_string(uint64_t{banding.bands} * banding.rows) +
                  " exceeds slots = " + std::to_string(ns.slots));
    }
  } else {
    auto chosen = sketch::ChooseBanding(ns.slots, ns.threshold);
    if (!chosen.ok()) return fail("threshold/slots: no banding reaches P(candidate) >= 0.99 at the threshold: " +
                                  chosen.status().message());
    banding = chosen.value();
  }
  auto stage = std::make_unique<NearDupsStage>(ns, plan);
  stage->SetBanding(banding);
  return stage;
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): the signatures, the key
// sketches, the shingle mode, the exact sets ("verify": "exact") and the candidate pairs.
namespace prefsift {
namespace {

void NearDupsStage::SaveObserved(StateWriter& out) const {
  out.U32(s_.slots);
  out.Vec(chars_mode_);
  out.Vec(signatures_);
  out.U32(s_.keys);
  out.Vec(keys_);
  out.U8(s_.exact);
  if (s_.exact) {
    for (const auto& set : sets_) out.Vec(set);
  }
  out.U8(s_.cand_action != CandidateAction::kOff);
  if (s_.cand_action != CandidateAction::kOff) {
    for (size_t i = 0; i < cand_pairs_.size(); ++i) out.Vec(cand_pairs_[i]);
  }
}

Status NearDupsStage::AppendObserved(StateReader& in, size_t first) {
  if (in.U32() != s_.slots) in.Fail("made with another number of slots");
  chars_mode_.resize(first);
  in.AppendVec(&chars_mode_);
  const size_t n = chars_mode_.size() - first;
  signatures_.resize(first * s_.slots);
  in.AppendVec(&signatures_);
  if (signatures_.size() != chars_mode_.size() * s_.slots) in.Fail("signatures and records do not match");
  if (in.U32() != s_.keys) in.Fail("made with another number of keys");
  keys_.resize(first * s_.keys);
  in.AppendVec(&keys_);
  if (keys_.size() != chars_mode_.size() * s_.keys) in.Fail("key sketches and records do not match");
  if (in.U8() != uint8_t{s_.exact}) in.Fail("made with another \"verify\" setting");
  if (s_.exact) {
    sets_.resize(first + n);
    for (size_t i = first; i < first + n && in.ok(); ++i) in.Vec(&sets_[i]);
  }
  const bool cand = s_.cand_action != CandidateAction::kOff;
  if (in.U8() != uint8_t{cand}) in.Fail("made with another \"candidates\" setting");
  if (cand) {
    cand_pairs_.resize(first + n);
    std::vector<CandidatePair> pairs;
    for (size_t i = first; i < first + n && in.ok(); ++i) {
      pairs.clear();
      in.Vec(&pairs);
      if (pairs.empty()) {
        cand_pairs_.Reset(i);
      } else {
        cand_pairs_.Set(i, pairs);
      }
    }
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
