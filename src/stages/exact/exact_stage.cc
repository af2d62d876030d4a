#include "stages/exact/exact_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <numeric>

#include "core/key_groups.h"
#include "core/small_vector.h"
#include "core/thread_pool.h"
#include "io/output_dir.h"
#include "stages/prior_join.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

enum class ConflictPolicy { kKeepMajority, kDropAll, kKeepAll };

struct ConflictGroup {
  std::vector<size_t> members;          // record indexes, input order
  std::vector<size_t> judgment_of;      // per member: index into distinct judgments
  std::vector<uint64_t> judgment_count; // per distinct judgment
  std::string resolution;
};

class ExactDupsStage : public Stage {
 public:
  explicit ExactDupsStage(ConflictPolicy p) : policy_(p) {}
  std::string name() const override { return "exact"; }

  Status Decide(StageContext& ctx) override {
    RunState& st = ctx.run;
    ThreadPool pool(ctx.plan.threads);  // 0: one per hardware thread
    RejectDegenerate(st, pool);
    // Kept records grouped by comparison key (core/key_groups.h: hash
    // partitions in parallel; groups in input order of their first record).
    std::vector<size_t> kept;
    for (size_t i = 0; i < st.records.size(); ++i) {
      if (st.IsKept(i)) kept.push_back(i);
    }
    std::vector<Hash128> key(kept.size()), judgment(kept.size());
    pool.ParallelFor(kept.size(), [&](size_t k, unsigned) { key[k] = ComparisonKeyOf(st.records[kept[k]], &judgment[k]); });
    KeyGroups groups = GroupRepeatedKeys(key, pool);
    std::vector<Hash128>().swap(key);
    comparisons_ = groups.distinct;
    // Resolve each group with more than one record, in that order.
    uint64_t agree_pairs = 0, all_pairs = 0;
    std::vector<size_t> members;
    std::vector<Hash128> judgments;
    for (size_t g = 0; g < groups.size(); ++g) {
      members.clear();
      judgments.clear();
      for (uint32_t k : groups[g]) {
        members.push_back(kept[k]);
        judgments.push_back(judgment[k]);
      }
      ResolveGroup(st, members, judgments, &agree_pairs, &all_pairs);
    }
    agreement_ = all_pairs ? static_cast<double>(agree_pairs) / static_cast<double>(all_pairs) : 1.0;
    judged_pairs_ = all_pairs;
    if (ctx.prior) {  // a store: comparisons it already holds (stages/prior_join.h)
      PriorJoin join;
      if (Status s = JoinComparisons(*ctx.prior, st, &join); !s.ok()) return s;
      ctx.results.Publish(std::move(join));
    }
    return Status::Ok();
  }

  // 1. Degenerate comparisons: the same text ranked above itself. Found in
  // parallel, rejected in input order.
  void RejectDegenerate(RunState& st, ThreadPool& pool) {
    const size_t n = st.records.size();
    constexpr size_t kChunk = 16384;
    struct Found {
      size_t record, a, b;
    };
    std::vector<std::vector<Found>> found((n + kChunk - 1) / kChunk);
    pool.ParallelFor(found.size(), [&](size_t c, unsigned) {
      for (size_t i = c * kChunk; i < std::min(n, (c + 1) * kChunk); ++i) {
        if (!st.IsKept(i)) continue;
        const RecordFacts& f = st.records[i];
        bool done = false;
        for (size_t a = 0; a < f.cands.size() && !done; ++a) {
          for (size_t b = a + 1; b < f.cands.size(); ++b) {
            if (f.cands[a].hash == f.cands[b].hash && f.cands[a].rank != f.cands[b].rank) {
              found[c].push_back(Found{i, a, b});
              done = true;
              break;
            }
          }
        }
      }
    });
    for (const auto& list : found) {
      for (const Found& d : list) {
        st.Reject(d.record, name(), "degenerate_comparison",
                  "candidates " + std::to_string(d.a) + " and " + std::to_string(d.b) +
                      " are the same text after normalisation but one is ranked above the other",
                  Json{{"candidates", {d.a, d.b}}}.dump());
        ++degenerate_;
      }
    }
  }

  // 3. One comparison judged more than once: duplicates and label conflicts
  // by the policy; agreeing pairs counted.
  // `g` lists the group's records in input order, `judgment` their judgments.
  void ResolveGroup(RunState& st, const std::vector<size_t>& g, const std::vector<Hash128>& judgment,
                    uint64_t* agree_pairs_out, uint64_t* all_pairs_out) {
    uint64_t& agree_pairs = *agree_pairs_out;
    uint64_t& all_pairs = *all_pairs_out;
    ++repeated_;
    ConflictGroup cg;
    cg.members = g;
    std::vector<Hash128> distinct;
    for (size_t k = 0; k < g.size(); ++k) {
      auto it = std::find(distinct.begin(), distinct.end(), judgment[k]);
      size_t j = static_cast<size_t>(it - distinct.begin());
      if (it == distinct.end()) {
        distinct.push_back(judgment[k]);
        cg.judgment_count.push_back(0);
      }
      cg.judgment_of.push_back(j);
      ++cg.judgment_count[j];
    }
    all_pairs += g.size() * (g.size() - 1) / 2;
    for (uint64_t c : cg.judgment_count) agree_pairs += c * (c - 1) / 2;
    const std::string& first_id = st.records[g[0]].id;
    if (distinct.size() == 1) {
      for (size_t k = 1; k < g.size(); ++k) {
        if (st.Reject(g[k], name(), "duplicate_comparison", "the same comparison with the same judgment as " + first_id,
                      Json{{"kept", first_id}}.dump())) {
          ++duplicates_;
        }
      }
      return;
    }
    ++conflict_groups_;
    conflict_records_ += g.size();
    // The first record of each distinct judgment (input order).
    std::vector<size_t> first_of(distinct.size(), SIZE_MAX);
    for (size_t k = 0; k < g.size(); ++k) {
      if (first_of[cg.judgment_of[k]] == SIZE_MAX) first_of[cg.judgment_of[k]] = k;
    }
    size_t best = static_cast<size_t>(
        std::max_element(cg.judgment_count.begin(), cg.judgment_count.end()) - cg.judgment_count.begin());
    bool majority = 2 * cg.judgment_count[best] > g.size();
    for (size_t k = 0; k < g.size(); ++k) {
      size_t rec = g[k];
      size_t j = cg.judgment_of[k];
      const std::string& head_id = st.records[g[first_of[j]]].id;
      if (policy_ == ConflictPolicy::kDropAll) {
        st.Reject(rec, name(), "label_conflict_dropped",
                  "the same comparison was judged differently elsewhere; policy drop-all",
                  Json{{"comparison_of", first_id}}.dump());
      } else if (policy_ == ConflictPolicy::kKeepAll || (majority && j == best)) {
        if (k != first_of[j]) {
          if (st.Reject(rec, name(), "duplicate_comparison", "the same comparison with the same judgment as " + head_id,
                        Json{{"kept", head_id}}.dump())) {
            ++duplicates_;
          }
        }
      } else if (majority) {
        st.Reject(rec, name(), "label_conflict_minority",
                  "the majority of judgments of this comparison disagree with this one",
                  Json{{"kept", st.records[g[first_of[best]]].id},
                       {"majority_share", static_cast<double>(cg.judgment_count[best]) / static_cast<double>(g.size())}}
                      .dump());
      } else {
        st.Reject(rec, name(), "label_conflict_no_majority",
                  "the judgments of this comparison disagree and none has a majority",
                  Json{{"comparison_of", first_id}, {"judgments", distinct.size()}}.dump());
      }
    }
    cg.resolution = policy_ == ConflictPolicy::kDropAll ? "dropped all"
                    : policy_ == ConflictPolicy::kKeepAll ? "kept one per judgment"
                    : majority ? "kept the majority" : "no majority: dropped all";
    conflicts_.push_back(std::move(cg));
  }

  void Figures(const RunState&, GateFigures* g) const override { g->label_conflict_records = conflict_records_; }

  void Report(const RunState&, Json* s) const override {
    (*s)["conflict_policy"] = policy_ == ConflictPolicy::kKeepMajority ? "keep-majority"
                              : policy_ == ConflictPolicy::kDropAll    ? "drop-all" : "keep-all";
    (*s)["distinct_comparisons"] = comparisons_;
    (*s)["comparisons_seen_more_than_once"] = repeated_;
    (*s)["duplicates_removed"] = duplicates_;
    (*s)["degenerate_comparisons"] = degenerate_;
    (*s)["label_conflicts"] = Json{{"comparisons", conflict_groups_}, {"records", conflict_records_}};
    // Pairwise agreement over comparisons judged more than once: the share of
    // pairs of judgments of one comparison that agree (docs/exact-duplicates.md).
    (*s)["agreement"] = Json{{"pairs_of_judgments", judged_pairs_}, {"pairwise_agreement_rate", agreement_}};
  }

  Status WriteOutputs(const RunState& st, OutputDir& out) const override {
    auto f = out.Create("conflicts.jsonl");
    if (!f.ok()) return f.status();
    for (const auto& cg : conflicts_) {
      Json j;
      Json members = Json::array();
      for (size_t k = 0; k < cg.members.size(); ++k) {
        const auto& rf = st.records[cg.members[k]];
        const auto& d = st.decisions[rf.entry];
        members.push_back(Json{{"id", rf.id}, {"judgment", cg.judgment_of[k]}, {"ranks", RanksOf(rf)},
                               {"kept", !d.rejected || st.StageOf(d) != "exact" ? !d.rejected : false}});
      }
      j["comparison_of"] = st.records[cg.members[0]].id;
      j["judgment_counts"] = cg.judgment_count;
      j["resolution"] = cg.resolution;
      j["members"] = std::move(members);
      Status s = f.value()->Append(j.dump() + "\n");
      if (!s.ok()) return s;
    }
    return f.value()->Close();
  }

 private:
  ConflictPolicy policy_;
  uint64_t comparisons_ = 0, repeated_ = 0, duplicates_ = 0, degenerate_ = 0, conflict_groups_ = 0,
           conflict_records_ = 0, judged_pairs_ = 0;
  double agreement_ = 1.0;
  std::vector<ConflictGroup> conflicts_;
};

}  // namespace

Hash128 ComparisonKeyOf(const RecordFacts& f, Hash128* judgment) {
  // Candidates in a stable order of their hashes; no heap for up to 15
  // candidates (this runs for every record in two decide steps).
  const size_t b = f.cands.size();
  SmallVector<uint32_t, 16> order(b);
  for (size_t k = 0; k < b; ++k) order[k] = static_cast<uint32_t>(k);
  auto by_hash = [&](uint32_t x, uint32_t y) { return f.cands[x].hash < f.cands[y].hash; };
  if (b <= 16) {
    for (size_t k = 1; k < b; ++k) {  // insertion sort: stable
      for (size_t j = k; j > 0 && by_hash(order[j], order[j - 1]); --j) std::swap(order[j], order[j - 1]);
    }
  } else {
    std::stable_sort(order.begin(), order.end(), by_hash);
  }
  SmallVector<Hash128, 16> key_parts, judg;
  key_parts.push_back(f.prompt_hash);
  for (uint32_t k : order) {
    key_parts.push_back(f.cands[k].hash);
    judg.push_back(Hash128{0, static_cast<uint64_t>(f.cands[k].rank)});
  }
  *judgment = HashOfHashes(judg.data(), judg.size());
  return HashOfHashes(key_parts.data(), key_parts.size());
}

std::unique_ptr<Stage> MakeExactStage(const Plan& plan, FileSystem* /*fs*/, Status* error) {
  const Json& s = StageSettings(plan, "exact");
  ConflictPolicy p = ConflictPolicy::kKeepMajority;
  for (auto it = s.begin(); it != s.end(); ++it) {
    if (it.key() == "conflicts") {
      std::string v = it.value().is_string() ? it.value().get<std::string>() : "";
      if (v == "keep-majority") p = ConflictPolicy::kKeepMajority;
      else if (v == "drop-all") p = ConflictPolicy::kDropAll;
      else if (v == "keep-all") p = ConflictPolicy::kKeepAll;
      else {
        *error = Status::Usage("stages.exact.conflicts: must be \"keep-majority\", \"drop-all\" or \"keep-all\"");
        return nullptr;
      }
    } else if (it.key() != "enabled") {
      *error = Status::Usage("stages.exact: unknown setting \"" + it.key() + "\" (known: conflicts)");
      return nullptr;
    }
  }
  return std::make_unique<ExactDupsStage>(p);
}

}  // namespace prefsift
