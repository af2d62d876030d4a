// Group-aware, stable splits; see splits.h and docs/splits.md.
#include "stages/split/split_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <cctype>
#include <cmath>
#include <map>
#include <numeric>
#include <span>
#include <set>
#include <tuple>
#include <unordered_set>
#include <unordered_map>

#include "core/key_groups.h"
#include "core/ordered_lines.h"
#include "core/state_file.h"
#include "core/thread_pool.h"
#include "io/file_system.h"
#include "io/line_reader.h"
#include "io/output_dir.h"
#include "sketch/union_find.h"

namespace prefsift {

using Json = nlohmann::ordered_json;

namespace {

constexpr const char* kAssignmentsFile = "assignments.jsonl";
const char* const kTieKinds[] = {"prompt", "near", "thread", "annotator", "group"};
enum Tie { kPrompt, kNear, kThread, kAnnotator, kGroup, kTieCount };

const char* const kScripts[] = {"none",  "Latin", "Greek",  "Cyrillic", "Armenian", "Hebrew", "Arabic",
                                "Devanagari", "Bengali", "Tamil", "Thai", "Georgian", "Hangul", "Kana", "Han",
                                "other"};
enum Script : uint8_t {
  kNone, kLatin, kGreek, kCyrillic, kArmenian, kHebrew, kArabic, kDevanagari, kBengali, kTamil, kThai, kGeorgian,
  kHangul, kKana, kHan, kOther, kScriptCount
};

Script ScriptOf(uint32_t c) {
  if ((c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z')) return kLatin;
  if (c < 0xC0) return kNone;  // digits, punctuation, symbols, controls
  if (c <= 0x24F && c != 0xD7 && c != 0xF7) return kLatin;
  if (c >= 0x1E00 && c <= 0x1EFF) return kLatin;
  if (c >= 0x370 && c <= 0x3FF) return kGreek;
  if (c >= 0x1F00 && c <= 0x1FFF) return kGreek;
  if (c >= 0x400 && c <= 0x52F) return kCyrillic;
  if (c >= 0x530 && c <= 0x58F) return kArmenian;
  if (c >= 0x590 && c <= 0x5FF) return kHebrew;
  if ((c >= 0x600 && c <= 0x6FF) || (c >= 0x750 && c <= 0x77F)) return kArabic;
  if (c >= 0x900 && c <= 0x97F) return kDevanagari;
  if (c >= 0x980 && c <= 0x9FF) return kBengali;
  if (c >= 0xB80 && c <= 0xBFF) return kTamil;
  if (c >= 0xE00 && c <= 0xE7F) return kThai;
  if (c >= 0x10A0 && c <= 0x10FF) return kGeorgian;
  if ((c >= 0x1100 && c <= 0x11FF) || (c >= 0xAC00 && c <= 0xD7AF) || (c >= 0x3130 && c <= 0x318F)) return kHangul;
  if (c >= 0x3040 && c <= 0x30FF) return kKana;
  if ((c >= 0x4E00 && c <= 0x9FFF) || (c >= 0x3400 && c <= 0x4DBF) || (c >= 0x20000 && c <= 0x2FFFF)) return kHan;
  if (c >= 0x2000 && c <= 0x2BFF) return kNone;  // general punctuation, symbols, arrows
  if (c >= 0x3000 && c <= 0x303F) return kNone;  // CJK punctuation
  if (c >= 0x1F000) return kNone;                // emoji and pictographs
  return kOther;
}

Script DominantScriptOf(std::string_view s) {
  uint32_t counts[kScriptCount] = {};
  for (size_t i = 0; i < s.size();) {
    unsigned char b = static_cast<unsigned char>(s[i]);
    if (b < 0x80) {  // a run of ASCII: only its letters count (kNone's count never decides, see below)
      uint32_t letters = 0;
      for (; i < s.size() && static_cast<unsigned char>(s[i]) < 0x80; ++i) {
        letters += static_cast<unsigned char>((static_cast<unsigned char>(s[i]) | 0x20) - 'a') < 26;
      }
      counts[kLatin] += letters;
      continue;
    }
    uint32_t c = b;
    size_t len = b < 0x80 ? 1 : (b >> 5) == 6 ? 2 : (b >> 4) == 14 ? 3 : (b >> 3) == 30 ? 4 : 1;
    if (len > 1 && i + len <= s.size()) {
      c = b & (0xFF >> (len + 1));
      for (size_t k = 1; k < len; ++k) c = (c << 6) | (static_cast<unsigned char>(s[i + k]) & 0x3F);
    }
    i += len;
    ++counts[ScriptOf(c)];
  }
  // counts[kNone] is never compared with a count above 0 while best is kNone,
  // so it is not kept.
  Script best = kNone;
  for (int k = 1; k < kScriptCount; ++k) {
    if (counts[k] > counts[best] || (best == kNone && counts[k] > 0)) best = static_cast<Script>(k);
  }
  return best;
}

struct Settings {
  std::vector<std::pair<std::string, double>> splits{{"train", 0.8}, {"valid", 0.1}, {"test", 0.1}};
  bool tie[kTieCount] = {true, true, true, false, false};
  std::string salt = "prefsift-split";
  bool stratify_source = false;
  std::string previous;  // resolved path, "" = none
};

struct Group {
  Hash128 key;               // smallest prompt hash among members
  uint32_t anchor = 0;       // the member holding the key (smallest id among equals)
  std::span<const uint32_t> members;  // kept records, input order (a view of SplitStage::members_)
  std::string source;        // source of the anchor
  double u = 0;              // split position
  uint32_t split = 0;
  uint8_t ties = 0;          // bit per tie kind that joined two members
};

std::string Hex16(const Hash128& h) { return ToHex(h).substr(0, 16); }

double Round6(double x) { return std::round(x * 1e6) / 1e6; }

// log2 bins for lengths: bin k holds [2^k, 2^(k+1)), bin 0 also holds 0.
int Log2Bin(uint32_t v) {
  int k = 0;
  while (v > 1) { v >>= 1; ++k; }
  return k;
}

// The order statistics at floor(p (n - 1)): selected, not sorted (the same values).
Json Quantiles(std::vector<uint32_t> v) {
  if (v.empty()) return Json(nullptr);
  auto q = [&](double p) {
    auto at = v.begin() + static_cast<std::ptrdiff_t>(std::floor(p * static_cast<double>(v.size() - 1)));
    std::nth_element(v.begin(), at, v.end());
    return *at;
  };
  const uint32_t lo = *std::min_element(v.begin(), v.end()), hi = *std::max_element(v.begin(), v.end());
  const uint32_t p10 = q(0.1), median = q(0.5), p90 = q(0.9);
  return Json{{"min", lo}, {"p10", p10}, {"median", median}, {"p90", p90}, {"max", hi}};
}

class SplitStage : public Stage {
 public:
  explicit SplitStage(Settings s) : s_(std::move(s)) {}
  std::string name() const override { return "split"; }

  void Reserve(size_t n) override { script_.reserve(n); }
  void Grow(size_t n) override {
    if (script_.size() < n) script_.resize(n, kNone);
  }
  void Observe(size_t i, const Record& rec, const RecordFacts&, const MatchText&) override {
    script_[i] = DominantScriptOf(rec.UserPromptText());
  }

  void SaveObserved(StateWriter& out) const override;
  Status AppendObserved(StateReader& in, size_t first_record) override;

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    const size_t n = st.records.size();
    // A store: ties to stored groups first (stages/prior_join.h); a record tied
    // to a stored group takes its split below.
    std::vector<int32_t> prior_split;
    if (ctx.prior) {
      Status s = JoinStored(ctx, &prior_split);
      if (!s.ok()) return s;
    }
    std::vector<uint32_t> kept;
    for (size_t i = 0; i < n; ++i) {
      if (st.IsKept(i)) kept.push_back(static_cast<uint32_t>(i));
    }
    ThreadPool pool(ctx.plan.threads);  // 0: one per hardware thread
    FormGroups(st, kept, ctx.results.Find<NearClusters>(), pool);
    AssignSplits(st, pool);
    if (prior_split.size() == n) KeepPriorSplits(prior_split);
    RecordSplitsAndCheck(st, kept, pool);
    if (!s_.previous.empty()) {
      Status s = ComparePrevious(st, ctx.fs);
      if (!s.ok()) return s;
    }
    return Status::Ok();
  }

  // Groups: kept records tied by the plan's tie kinds (union-find), numbered
  // by first kept member; each group's key is its smallest prompt hash.
  // Each tie kind ties a record to the first kept record with the same value
  // (prompts grouped by hash in parallel, core/key_groups.h; near clusters and
  // interned texts by id); the unions run in input order, as the merge counts
  // depend on it.
  void FormGroups(const RunState& st, const std::vector<uint32_t>& kept, const NearClusters* near, ThreadPool& pool) {
    const size_t n = st.records.size();
    near_available_ = near && near->cluster.size() == n;
    FirstOfPrompt(st, kept, pool);
    sketch::UnionFind uf(static_cast<uint32_t>(n));
    std::vector<uint8_t> tie_bits(n, 0);  // per record: which tie kinds joined it
    auto join = [&](Tie t, uint32_t a, uint32_t b) {
      if (uf.Union(a, b)) ++merges_[t];
      tie_bits[a] |= uint8_t(1u << t);
      tie_bits[b] |= uint8_t(1u << t);
    };
    // First kept record per near cluster (ids are record indexes) and per text id.
    size_t near_ids = 0;  // cluster ids are record indexes (stage_results.h); sized to the largest
    if (near_available_ && s_.tie[kNear]) {
      for (int64_t c : near->cluster) near_ids = std::max(near_ids, static_cast<size_t>(c + 1));
    }
    std::vector<uint32_t> first_near(near_ids, UINT32_MAX);
    std::vector<uint32_t> first_text[kTieCount];
    for (int t = kThread; t < kTieCount; ++t) {
      if (s_.tie[t]) first_text[t].assign(st.text_count(), UINT32_MAX);
    }
    for (size_t k = 0; k < kept.size(); ++k) {
      const uint32_t i = kept[k];
      const RecordFacts& f = st.records[i];
      if (s_.tie[kPrompt] && first_prompt_[k] != k) join(kPrompt, kept[first_prompt_[k]], i);
      if (!first_near.empty() && near->cluster[i] >= 0) {
        uint32_t& first = first_near[static_cast<size_t>(near->cluster[i])];
        if (first == UINT32_MAX) first = i;
        else join(kNear, first, i);
      }
      const uint32_t id[kTieCount] = {0, 0, f.thread_id, f.annotator_id, f.group_id};
      for (int t = kThread; t < kTieCount; ++t) {
        if (!s_.tie[t] || id[t] == 0) continue;  // id 0 is the empty text
        uint32_t& first = first_text[t][id[t]];
        if (first == UINT32_MAX) first = i;
        else join(static_cast<Tie>(t), first, i);
      }
    }
    // Components, numbered by first kept member; members stored group by group.
    group_of_.assign(n, UINT32_MAX);
    std::vector<uint32_t> group_of_root(n, UINT32_MAX);
    std::vector<uint32_t> sizes;
    for (uint32_t i : kept) {
      uint32_t& g = group_of_root[uf.Find(i)];
      if (g == UINT32_MAX) {
        g = static_cast<uint32_t>(sizes.size());
        sizes.push_back(0);
      }
      ++sizes[g];
      group_of_[i] = g;
    }
    std::vector<uint32_t>().swap(group_of_root);
    std::vector<uint32_t> start(sizes.size() + 1, 0);
    for (size_t g = 0; g < sizes.size(); ++g) start[g + 1] = start[g] + sizes[g];
    members_.assign(kept.size(), 0);
    std::vector<uint32_t> fill(start.begin(), start.end() - 1);
    for (uint32_t i : kept) members_[fill[group_of_[i]]++] = i;
    groups_.assign(sizes.size(), Group{});
    // Each group's key and anchor: the smallest (prompt hash, id, source) among
    // its members, the first on a tie; groups on their own in parallel.
    pool.ParallelFor(groups_.size(), [&](size_t gi, unsigned) {
      Group& g = groups_[gi];
      g.members = std::span<const uint32_t>(members_.data() + start[gi], sizes[gi]);
      g.anchor = g.members[0];
      g.key = st.records[g.anchor].prompt_hash;
      for (uint32_t i : g.members) {
        g.ties |= tie_bits[i];
        const RecordFacts& f = st.records[i];
        const RecordFacts& a = st.records[g.anchor];
        if (f.prompt_hash < g.key ||
            (f.prompt_hash == g.key && std::tie(f.id, st.Text(f.source_id)) < std::tie(a.id, st.Text(a.source_id)))) {
          g.key = f.prompt_hash;
          g.anchor = i;
        }
      }
    });
  }

  // first_prompt_[k]: the position in `kept` of the first kept record with
  // kept[k]'s prompt; distinct_prompts_ counts the prompts.
  void FirstOfPrompt(const RunState& st, const std::vector<uint32_t>& kept, ThreadPool& pool) {
    std::vector<Hash128> prompt(kept.size());
    pool.ParallelFor(kept.size(), [&](size_t k, unsigned) { prompt[k] = st.records[kept[k]].prompt_hash; });
    const KeyGroups groups = GroupRepeatedKeys(prompt, pool);
    first_prompt_.resize(kept.size());
    std::iota(first_prompt_.begin(), first_prompt_.end(), 0u);
    for (size_t g = 0; g < groups.size(); ++g) {
      for (uint32_t k : groups[g]) first_prompt_[k] = groups[g][0];
    }
    distinct_prompts_ = groups.distinct;
  }

  // Each group's split: the hash of its key against the cumulative ratios, or
  // (stratified) cut by records within its source.
  void AssignSplits(const RunState& st, ThreadPool& pool) {
    std::vector<double> cum;
    double acc = 0;
    for (const auto& [name, r] : s_.splits) cum.push_back(acc += r);
    cum.back() = 1.0;
    auto split_at = [&](double x) {
      for (size_t k = 0; k < cum.size(); ++k) {
        if (x < cum[k]) return static_cast<uint32_t>(k);
      }
      return static_cast<uint32_t>(cum.size() - 1);
    };
    pool.ParallelFor(groups_.size(), [&](size_t k, unsigned) {
      Group& g = groups_[k];
      g.source = st.Text(st.records[g.anchor].source_id);
      g.u = SplitPosition(s_.salt, g.key);
      if (!s_.stratify_source) g.split = split_at(g.u);
    });
    if (s_.stratify_source) {
      // Per source: groups in order of their split position, cut by records at
      // the cumulative ratios (a group goes where its midpoint falls).
      std::map<std::string, std::vector<uint32_t>> by_source;
      for (uint32_t k = 0; k < groups_.size(); ++k) by_source[groups_[k].source].push_back(k);
      for (auto& [src, list] : by_source) {
        std::sort(list.begin(), list.end(), [&](uint32_t a, uint32_t b) {
          return std::tie(groups_[a].u, groups_[a].key) < std::tie(groups_[b].u, groups_[b].key);
        });
        double total = 0;
        for (uint32_t k : list) total += static_cast<double>(groups_[k].members.size());
        double before = 0;
        for (uint32_t k : list) {
          double w = static_cast<double>(groups_[k].members.size());
          groups_[k].split = split_at((before + w / 2) / total);
          before += w;
        }
      }
    }
  }

  // A store (docs/store.md): a group holding a record that inherits a stored
  // split takes that split (JoinGroups checked they agree).
  void KeepPriorSplits(const std::vector<int32_t>& prior_split) {
    for (Group& g : groups_) {
      for (uint32_t i : g.members) {
        if (prior_split[i] >= 0) g.split = static_cast<uint32_t>(prior_split[i]);
      }
    }
  }

  // Every kept record's decision gets its group's split; the checks are read
  // back from the decisions.
  void RecordSplitsAndCheck(RunState& st, const std::vector<uint32_t>& kept, ThreadPool& pool) {
    st.split_names.clear();
    for (const auto& [name, r] : s_.splits) st.split_names.push_back(name);
    // Groups hold distinct records: each group writes its own decisions.
    pool.ParallelFor(groups_.size(), [&](size_t k, unsigned) {
      for (uint32_t i : groups_[k].members) st.DecisionOf(i).split = groups_[k].split;
    });
    // Checks, read back from the decisions.
    spanning_ = 0;
    for (const Group& g : groups_) {
      for (uint32_t i : g.members) {
        if (st.DecisionOf(i).split != g.split) { ++spanning_; break; }
      }
    }
    // A prompt is split apart when some record's split differs from its first record's.
    std::vector<uint8_t> apart(kept.size(), 0);  // by the prompt's first position
    for (size_t k = 0; k < kept.size(); ++k) {
      const uint32_t first = first_prompt_[k];
      if (first != k && st.DecisionOf(kept[k]).split != st.DecisionOf(kept[first]).split) apart[first] = 1;
    }
    prompts_apart_ = static_cast<uint64_t>(std::count(apart.begin(), apart.end(), uint8_t{1}));
    std::vector<uint32_t>().swap(first_prompt_);
    kept_ = kept.size();
  }

  Status JoinStored(StageContext& ctx, std::vector<int32_t>* prior_split) const {
    const PriorJoin* before = ctx.results.Find<PriorJoin>();
    if (!before) return Status::Internal("split: prior data without the exact stage's comparisons");
    auto shape = SplitShapeOf(ctx.plan);
    if (!shape.ok()) return shape.status();
    PriorJoin join = *before;
    const NearClusters* near = ctx.results.Find<NearClusters>();
    Status s;
    if (!join.clusters_done) s = JoinClusters(*ctx.prior, ctx.run, near, nullptr, shape.value(), &join);  // near off
    if (s.ok()) s = JoinGroups(*ctx.prior, ctx.run, near, shape.value(), &join);
    if (!s.ok()) return s;
    *prior_split = join.prior_split;
    ctx.results.Publish(std::move(join));
    return Status::Ok();
  }

  // The split checks' fractions (docs/splits.md): each split's share of records
  // within 3 sd of its ratio, judged only with 30 or more effective groups.
  struct Fractions {
    double total = 0, sum_w2 = 0, n_eff = 0;
    std::vector<uint64_t> recs, grps;
    std::vector<double> share, sd;
    std::vector<uint8_t> within;
    bool meaningful = false, all_within = true;
  };
  Fractions ComputeFractions() const {
    Fractions f;
    f.total = static_cast<double>(kept_);
    for (const Group& g : groups_) f.sum_w2 += static_cast<double>(g.members.size()) * static_cast<double>(g.members.size());
    f.n_eff = f.sum_w2 > 0 ? f.total * f.total / f.sum_w2 : 0;
    f.recs.assign(s_.splits.size(), 0);
    f.grps.assign(s_.splits.size(), 0);
    for (const Group& g : groups_) {
      f.recs[g.split] += g.members.size();
      ++f.grps[g.split];
    }
    f.meaningful = !s_.stratify_source && f.n_eff >= 30;
    for (size_t k = 0; k < s_.splits.size(); ++k) {
      double p = s_.splits[k].second;
      double share = f.total > 0 ? static_cast<double>(f.recs[k]) / f.total : 0;
      double sd = f.total > 0 ? std::sqrt(p * (1 - p) * f.sum_w2) / f.total : 0;
      bool within = std::fabs(share - p) <= 3 * sd + 1e-12;
      if (f.meaningful) f.all_within = f.all_within && within;
      f.share.push_back(share);
      f.sd.push_back(sd);
      f.within.push_back(within);
    }
    return f;
  }
  bool ChecksPassed(bool meaningful, bool all_within) const {
    return spanning_ == 0 && (!s_.tie[kPrompt] || prompts_apart_ == 0) && (!meaningful || all_within);
  }

  void Figures(const RunState&, GateFigures* g) const override {
    const Fractions f = ComputeFractions();
    g->split_checks_passed = ChecksPassed(f.meaningful, f.all_within);
  }

  void Report(const RunState& st, Json* out) const override {
    Json& j = *out;
    Json tie = Json::array();
    for (int t = 0; t < kTieCount; ++t) {
      if (s_.tie[t]) tie.push_back(kTieKinds[t]);
    }
    j["tie_by"] = tie;
    if (s_.tie[kNear] && !near_available_) j["tie_by_note"] = "the near stage did not run: no near-duplicate ties";
    j["salt"] = s_.salt;
    j["assignment"] = s_.stratify_source ? "stratified by source: groups cut by records in split-position order"
                                         : "hash of the group key against the cumulative ratios";
    j["stratify_by"] = s_.stratify_source ? "source" : "none";
    // Fractions and their tolerance.
    const Fractions f = ComputeFractions();
    const double total = f.total;
    const double n_eff = f.n_eff;
    const bool all_within = f.all_within;
    const bool meaningful = f.meaningful;
    Json splits = Json::array();
    for (size_t k = 0; k < s_.splits.size(); ++k) {
      double p = s_.splits[k].second;
      Json e{{"name", s_.splits[k].first}, {"ratio", p},          {"groups", f.grps[k]},
             {"records", f.recs[k]},        {"share", Round6(f.share[k])}, {"sd", Round6(f.sd[k])}};
      if (meaningful) e["within_3_sd"] = f.within[k] != 0;
      splits.push_back(std::move(e));
    }
    j["splits"] = std::move(splits);
    // Groups.
    Json groups;
    groups["count"] = groups_.size();
    std::map<uint64_t, uint64_t> hist;
    for (const Group& g : groups_) ++hist[g.members.size()];
    Json h = Json::object();
    for (const auto& [size, count] : hist) h[std::to_string(size)] = count;
    groups["size_histogram"] = std::move(h);
    groups["effective_number"] = Round6(n_eff);
    Json merges = Json::object();
    for (int t = 0; t < kTieCount; ++t) {
      if (s_.tie[t]) merges[kTieKinds[t]] = merges_[t];
    }
    groups["merges_by_tie"] = std::move(merges);
    std::vector<uint32_t> order(groups_.size());
    for (uint32_t k = 0; k < order.size(); ++k) order[k] = k;
    std::sort(order.begin(), order.end(), [&](uint32_t a, uint32_t b) {
      if (groups_[a].members.size() != groups_[b].members.size()) {
        return groups_[a].members.size() > groups_[b].members.size();
      }
      return groups_[a].key < groups_[b].key;
    });
    Json largest = Json::array();
    for (size_t r = 0; r < std::min<size_t>(5, order.size()); ++r) {
      const Group& g = groups_[order[r]];
      Json ties = Json::array();
      for (int t = 0; t < kTieCount; ++t) {
        if (g.ties & (1u << t)) ties.push_back(kTieKinds[t]);
      }
      double share = total > 0 ? static_cast<double>(g.members.size()) / total : 0;
      largest.push_back(Json{{"group", Hex16(g.key)},
                             {"records", g.members.size()},
                             {"share_of_records", Round6(share)},
                             {"split", s_.splits[g.split].first},
                             {"tied_by", ties},
                             {"example_id", st.records[g.anchor].id}});
    }
    groups["largest"] = std::move(largest);
    double smallest_ratio = 1;
    for (const auto& sp : s_.splits) smallest_ratio = std::min(smallest_ratio, sp.second);
    double top = order.empty() || total == 0 ? 0 : static_cast<double>(groups_[order[0]].members.size()) / total;
    groups["largest_share"] = Round6(top);
    groups["skew_note"] =
        top > smallest_ratio / 2
            ? "the largest group holds more than half the target share of the smallest split: realised fractions "
              "can be far from the ratios; consider fewer ties (tie_by) or more data"
            : "no single group is large enough to move a split's share by more than half its target";
    j["groups"] = std::move(groups);
    Json checks;
    checks["groups_spanning_splits"] = spanning_;
    checks["distinct_prompts"] = distinct_prompts_;
    checks["prompts_split_apart"] = prompts_apart_;
    if (meaningful) {
      checks["fractions_within_tolerance"] = all_within;
    } else {
      checks["fractions_within_tolerance"] = nullptr;
    }
    checks["tolerance"] =
        s_.stratify_source
            ? "not applied: stratified cuts are exact up to one group per source"
        : meaningful
            ? "each split's share of records within 3 sd of its ratio; sd = sqrt(p(1-p) * sum of squared group "
              "sizes) / records (groups assigned independently with probability p)"
            : "not evaluated: fewer than 30 effective groups";
    checks["passed"] = ChecksPassed(meaningful, all_within);
    j["checks"] = std::move(checks);
    if (!s_.previous.empty()) j["previous"] = previous_;
    j["assignments_file"] = kAssignmentsFile;
    j["composition"] = Composition(st);
  }

  // One line per kept record, in record order (formatted in parallel blocks).
  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.CreateStream(kAssignmentsFile);
    if (!f.ok()) return f.status();
    Status s = AppendLinesInOrder(f.value().get(), st.records.size(), st.plan().threads, [&](size_t i, std::string* t) {
      if (group_of_.size() <= i || group_of_[i] == UINT32_MAX) return;
      const Entry& e = st.entries[st.records[i].entry];
      const Group& g = groups_[group_of_[i]];
      Json j{{"id", st.records[i].id},
             {"input", st.plan().inputs[e.input].name},
             {"line", e.line},
             {"split", s_.splits[g.split].first},
             {"group", Hex16(g.key)}};
      *t += j.dump();
      *t += '\n';
    });
    if (!s.ok()) return s;
    return f.value()->Close();
  }

 private:
  Status ComparePrevious(const RunState& st, FileSystem* fs) {
    // The shared reading path: plain, gzip or zstd, the plan's line limit.
    auto opened = LineReader::Open(fs, s_.previous, st.plan().limits.max_line_bytes);
    if (!opened.ok()) {
      return Status::Input("stages.split.previous: cannot read " + s_.previous + ": " + opened.status().message());
    }
    std::unordered_map<std::string, std::string> before;
    std::string_view line;
    uint64_t no = 0;
    for (;;) {
      auto next = opened.value()->Read(&line, &no);
      if (!next.ok()) return Status::Input("stages.split.previous: " + s_.previous + ": " + next.status().message());
      if (next.value() == LineReader::Next::kEnd) break;
      if (next.value() == LineReader::Next::kTooLong) {
        return Status::Input("stages.split.previous: " + s_.previous + ":" + std::to_string(no) +
                             ": line longer than the line limit");
      }
      if (line.empty()) continue;
      Json j = Json::parse(line, nullptr, false);
      if (!j.is_object() || !j.contains("id") || !j["id"].is_string() || !j.contains("split") || !j["split"].is_string()) {
        return Status::Input("stages.split.previous: " + s_.previous + ":" + std::to_string(no) +
                             ": not an assignment line ({\"id\":..., \"split\":...})");
      }
      before[j["id"].get<std::string>()] = j["split"].get<std::string>();
    }
    uint64_t same = 0, moved = 0, added = 0;
    Json moves = Json::array();
    std::set<std::string> seen;
    for (size_t i = 0; i < st.records.size(); ++i) {
      if (group_of_[i] == UINT32_MAX) continue;
      const std::string& id = st.records[i].id;
      seen.insert(id);
      auto it = before.find(id);
      const std::string& now = s_.splits[groups_[group_of_[i]].split].first;
      if (it == before.end()) { ++added; continue; }
      if (it->second == now) { ++same; continue; }
      ++moved;
      if (moves.size() < 50) moves.push_back(Json{{"id", id}, {"from", it->second}, {"to", now}});
    }
    uint64_t gone = 0;
    for (const auto& [id, sp] : before) gone += seen.count(id) ? 0 : 1;
    previous_ = Json{{"file", s_.previous}, {"records_before", before.size()}, {"unchanged", same}, {"moved", moved},
                     {"new", added}, {"no_longer_kept", gone}, {"moves", moves},
                     {"note", "a record moves only when its group gained a member with a smaller group key"}};
    return Status::Ok();
  }

  Json Composition(const RunState& st) const {
    Json c;
    c["scope"] = "kept records";
    c["records"] = kept_;
    std::map<size_t, uint64_t> cands;
    std::map<size_t, std::vector<uint64_t>> slots;
    uint64_t top_tied = 0, pairwise = 0;
    std::map<std::string, uint64_t> sources, annotators, shapes;
    std::vector<uint64_t> per_source(st.text_count(), 0), per_annotator_id(st.text_count(), 0);  // by text id, named below
    uint64_t no_source = 0;
    uint64_t with_annotator = 0, with_thread = 0;
    uint64_t scripts[kScriptCount] = {};
    std::vector<uint32_t> prompt_len, chosen_len, rejected_len;
    std::map<int, uint64_t> chosen_bins, rejected_bins;
    for (size_t i = 0; i < st.records.size(); ++i) {
      if (group_of_.size() <= i || group_of_[i] == UINT32_MAX) continue;
      const RecordFacts& f = st.records[i];
      size_t b = f.cands.size();
      ++cands[b];
      if (f.shape == JudgmentShape::kPairwise) {
        ++pairwise;  // chosen/rejected fields: no slot order to speak of
      } else if (f.chosen >= 0) {
        auto& v = slots[b];
        v.resize(b, 0);
        ++v[static_cast<size_t>(f.chosen)];
      } else {
        ++top_tied;
      }
      if (f.source_id == 0) ++no_source;
      else ++per_source[f.source_id];
      if (f.annotator_id != 0) {
        ++per_annotator_id[f.annotator_id];
        ++with_annotator;
      }
      with_thread += f.thread_id == 0 ? 0 : 1;
      ++shapes[JudgmentShapeName(f.shape)];
      ++scripts[i < script_.size() ? script_[i] : kNone];
      prompt_len.push_back(f.prompt_chars);
      for (size_t k = 0; k < b && k < f.cands.size(); ++k) {
        bool best = f.cands[k].rank == 1;
        (best ? chosen_len : rejected_len).push_back(f.cands[k].chars);
        ++(best ? chosen_bins : rejected_bins)[Log2Bin(f.cands[k].chars)];
      }
    }
    if (no_source) sources["(not given)"] += no_source;
    for (uint32_t id = 1; id < per_source.size(); ++id) {
      if (per_source[id]) sources[st.Text(id)] += per_source[id];
      if (per_annotator_id[id]) annotators[st.Text(id)] += per_annotator_id[id];
    }
    Json jc = Json::object();
    for (const auto& [b, k] : cands) jc[std::to_string(b)] = k;
    c["candidates_per_record"] = std::move(jc);
    Json js = Json::object();
    for (const auto& [b, v] : slots) js[std::to_string(b)] = v;
    c["chosen_slot_by_candidates"] = std::move(js);
    c["records_with_tied_top"] = top_tied;
    c["pairwise_records_without_slot"] = pairwise;
    Json jsh = Json::object();
    for (const auto& [k, v] : shapes) jsh[k] = v;
    c["judgment_shapes"] = std::move(jsh);
    Json jsrc = Json::object();
    for (const auto& [k, v] : sources) jsrc[k] = v;
    c["sources"] = std::move(jsrc);
    std::vector<uint32_t> per_annotator;
    uint64_t max_ann = 0;
    for (const auto& [k, v] : annotators) {
      per_annotator.push_back(static_cast<uint32_t>(v));
      max_ann = std::max(max_ann, v);
    }
    c["annotators"] = Json{{"distinct", annotators.size()},
                           {"records_with_annotator", with_annotator},
                           {"records_per_annotator", Quantiles(per_annotator)},
                           {"largest_share", with_annotator ? Round6(double(max_ann) / double(with_annotator)) : 0.0}};
    c["records_with_thread"] = with_thread;
    Json jscript = Json::object();
    for (int k = 0; k < kScriptCount; ++k) {
      if (scripts[k]) jscript[kScripts[k]] = scripts[k];
    }
    c["prompt_script"] = Json{{"method", "dominant Unicode script of the prompt's letters (block ranges; crude)"},
                              {"records", std::move(jscript)}};
    c["prompt_chars"] = Quantiles(prompt_len);
    c["chosen_chars"] = Quantiles(chosen_len);
    c["rejected_chars"] = Quantiles(rejected_len);
    int max_bin = 0;
    for (const auto& [k, v] : chosen_bins) max_bin = std::max(max_bin, k);
    for (const auto& [k, v] : rejected_bins) max_bin = std::max(max_bin, k);
    int min_bin = max_bin;
    for (const auto& [k, v] : chosen_bins) min_bin = std::min(min_bin, k);
    for (const auto& [k, v] : rejected_bins) min_bin = std::min(min_bin, k);
    Json bins = Json::array();
    for (int k = min_bin; k <= max_bin && (!chosen_bins.empty() || !rejected_bins.empty()); ++k) {
      auto get = [&](const std::map<int, uint64_t>& m) {
        auto it = m.find(k);
        return it == m.end() ? uint64_t{0} : it->second;
      };
      bins.push_back(Json{{"from", k == 0 ? 0u : (1u << k)}, {"to", 1u << (k + 1)}, {"chosen", get(chosen_bins)},
                          {"rejected", get(rejected_bins)}});
    }
    c["candidate_chars_histogram"] = Json{{"note", "code points; bins [from, to); chosen = rank 1"}, {"bins", bins}};
    return c;
  }

  Settings s_;
  std::vector<Script> script_;
  bool near_available_ = false;
  std::vector<Group> groups_;
  std::vector<uint32_t> members_;       // every group's members, group by group (Group::members views)
  std::vector<uint32_t> group_of_;
  std::vector<uint32_t> first_prompt_;  // Decide only: per kept position, its prompt's first position
  uint64_t merges_[kTieCount] = {};
  uint64_t spanning_ = 0, prompts_apart_ = 0, distinct_prompts_ = 0, kept_ = 0;
  Json previous_;
};

bool ValidSplitName(const std::string& s) {
  if (s.empty() || s.size() > 40) return false;
  for (char c : s) {
    if (!(std::isalnum(static_cast<unsigned char>(c)) || c == '_' || c == '-')) return false;
  }
  return s != "rejects" && s != "summary" && s != "conflicts" && s != "assignments";
}

}  // namespace

std::string DominantScript(std::string_view utf8) { return kScripts[DominantScriptOf(utf8)]; }

double SplitPosition(const std::string& salt, const Hash128& key) {
  std::string bytes = salt;
  bytes.push_back('\0');
  bytes += ToHex(key);
  Hash128 h = HashBytes(bytes);
  return static_cast<double>(h.hi >> 11) * 0x1.0p-53;
}

namespace {

Result<Settings> ParseSettings(const Plan& plan) {
  const Json& js = StageSettings(plan, "split");
  Settings s;
  auto fail = [&](const std::string& m) -> Result<Settings> { return Status::Usage("stages.split." + m); };
  for (auto it = js.begin(); it != js.end(); ++it) {
    const std::string& k = it.key();
    const Json& v = it.value();
    if (k == "splits") {
      if (!v.is_object() || v.empty()) return fail("splits: must be an object of split name to share, e.g. {\"train\": 0.8, \"valid\": 0.1, \"test\": 0.1}");
      s.splits.clear();
      double sum = 0;
      for (auto sp = v.begin(); sp != v.end(); ++sp) {
        if (!ValidSplitName(sp.key())) {
          return fail("splits: \"" + sp.key() + "\" is not a usable split name (letters, digits, _ and -; not a name prefsift writes itself)");
        }
        if (!sp.value().is_number() || sp.value().get<double>() <= 0) {
          return fail("splits." + sp.key() + ": must be a number > 0");
        }
        s.splits.emplace_back(sp.key(), sp.value().get<double>());
        sum += sp.value().get<double>();
      }
      if (std::fabs(sum - 1.0) > 1e-6) return fail("splits: the shares must add up to 1 (they add up to " + std::to_string(sum) + ")");
    } else if (k == "tie_by") {
      if (!v.is_array()) return fail("tie_by: must be an array, e.g. [\"prompt\", \"near\", \"thread\"]");
      std::fill(std::begin(s.tie), std::end(s.tie), false);
      for (const auto& t : v) {
        int found = -1;
        for (int q = 0; q < kTieCount; ++q) {
          if (t.is_string() && t.get<std::string>() == kTieKinds[q]) found = q;
        }
        if (found < 0) return fail("tie_by: " + t.dump() + " is not one of prompt, near, thread, annotator, group");
        s.tie[found] = true;
      }
    } else if (k == "salt") {
      if (!v.is_string()) return fail("salt: must be a string");
      s.salt = v.get<std::string>();
    } else if (k == "stratify_by") {
      std::string m = v.is_string() ? v.get<std::string>() : "";
      if (m == "source") s.stratify_source = true;
      else if (m != "none") return fail("stratify_by: must be \"none\" or \"source\"");
    } else if (k == "previous") {
      if (!v.is_string() || v.get<std::string>().empty()) return fail("previous: must be the path of an assignments.jsonl");
      std::string p = v.get<std::string>();
      if (p[0] != '/' && !plan.plan_path.empty()) {
        auto slash = plan.plan_path.rfind('/');
        if (slash != std::string::npos) p = plan.plan_path.substr(0, slash + 1) + p;
      }
      s.previous = p;
    } else if (k != "enabled") {
      return fail(k + ": unknown setting (known: splits, tie_by, salt, stratify_by, previous)");
    }
  }
  return s;
}

}  // namespace

Result<SplitShape> SplitShapeOf(const Plan& plan) {
  auto s = ParseSettings(plan);
  if (!s.ok()) return s.status();
  SplitShape shape;
  for (const auto& [name, ratio] : s.value().splits) shape.names.push_back(name);
  for (int t = 0; t < kTieCount; ++t) shape.tie[t] = s.value().tie[t];
  shape.stratify_source = s.value().stratify_source;
  return shape;
}

std::unique_ptr<Stage> MakeSplitStage(const Plan& plan, FileSystem* /*fs*/, Status* error) {
  auto s = ParseSettings(plan);
  if (!s.ok()) {
    *error = s.status();
    return nullptr;
  }
  return std::make_unique<SplitStage>(std::move(s).value());
}

}  // namespace prefsift

// Observed state (state files, docs/parts.md): each prompt's dominant script.
namespace prefsift {
namespace {

void SplitStage::SaveObserved(StateWriter& out) const {
  static_assert(sizeof(Script) <= 4);
  std::vector<uint8_t> scripts(script_.size());
  for (size_t i = 0; i < script_.size(); ++i) scripts[i] = static_cast<uint8_t>(script_[i]);
  out.Vec(scripts);
}

Status SplitStage::AppendObserved(StateReader& in, size_t first) {
  std::vector<uint8_t> scripts;
  in.Vec(&scripts);
  script_.resize(first + scripts.size(), kNone);
  for (size_t i = 0; i < scripts.size(); ++i) {
    if (scripts[i] >= kScriptCount) in.Fail("a script code out of range");
    script_[first + i] = static_cast<Script>(scripts[i]);
  }
  return Status::Ok();
}

}  // namespace
}  // namespace prefsift
