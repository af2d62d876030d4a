#include "stages/exact/exact_stage.h"

#include <nlohmann/json.hpp>

#include <algorithm>
#include <numeric>
#include <unordered_map>

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
    RejectDegenerate(st);
    std::vector<std::vector<size_t>> groups;
    std::vector<Hash128> judgment;
    GroupByComparison(st, &groups, &judgment);
    comparisons_ = groups.size();
    // Resolve each group with more than one record.
    uint64_t agree_pairs = 0, all_pairs = 0;
    for (const auto& g : groups) {
      if (g.size() >= 2) ResolveGroup(st, g, judgment, &agree_pairs, &all_pairs);
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

  // 1. Degenerate comparisons: the same text ranked above itself.
  void RejectDegenerate(RunState& st) {
    const size_t n = st.records.size();
    // 1. Degenerate comparisons.
    for (size_t i = 0; i < n; ++i) {
      if (!st.IsKept(i)) continue;
      const RecordFacts& f = st.records[i];
      for (size_t a = 0; a < f.cand_hashes.size(); ++a) {
        bool done = false;
        for (size_t b = a + 1; b < f.cand_hashes.size(); ++b) {
          if (f.cand_hashes[a] == f.cand_hashes[b] && f.ranks[a] != f.ranks[b]) {
            st.Reject(i, name(), "degenerate_comparison",
                      "candidates " + std::to_string(a) + " and " + std::to_string(b) +
                          " are the same text after normalisation but one is ranked above the other",
                      Json{{"candidates", {a, b}}}.dump());
            ++degenerate_;
            done = true;
            break;
          }
        }
        if (done) break;
      }
    }
  }

  // 2. Kept records grouped by comparison key, in input order; each record's judgment.
  void GroupByComparison(const RunState& st, std::vector<std::vector<size_t>>* groups_out,
                         std::vector<Hash128>* judgment_out) {
    const size_t n = st.records.size();
    std::vector<std::vector<size_t>>& groups = *groups_out;
    std::vector<Hash128>& judgment = *judgment_out;
    judgment.assign(n, Hash128{});
    // 2. Group by comparison key, in input order.
    std::unordered_map<Hash128, size_t, Hash128Hasher> group_of;
    for (size_t i = 0; i < n; ++i) {
      if (!st.IsKept(i)) continue;
      Hash128 key = ComparisonKeyOf(st.records[i], &judgment[i]);
      auto [it, fresh] = group_of.try_emplace(key, groups.size());
      if (fresh) groups.emplace_back();
      groups[it->second].push_back(i);
    }
    comparisons_ = groups.size();
  }

  // 3. One comparison judged more than once: duplicates and label conflicts
  // by the policy; agreeing pairs counted.
  void ResolveGroup(RunState& st, const std::vector<size_t>& g, const std::vector<Hash128>& judgment,
                    uint64_t* agree_pairs_out, uint64_t* all_pairs_out) {
    uint64_t& agree_pairs = *agree_pairs_out;
    uint64_t& all_pairs = *all_pairs_out;
    ++repeated_;
    ConflictGroup cg;
    cg.members = g;
    std::vector<Hash128> distinct;
    for (size_t i : g) {
      auto it = std::find(distinct.begin(), distinct.end(), judgment[i]);
      size_t j = static_cast<size_t>(it - distinct.begin());
      if (it == distinct.end()) {
        distinct.push_back(judgment[i]);
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
        members.push_back(Json{{"id", rf.id}, {"judgment", cg.judgment_of[k]}, {"ranks", rf.ranks.to_vector()},
                               {"kept", !d.rejected || d.stage != "exact" ? !d.rejected : false}});
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
  std::vector<size_t> order(f.cand_hashes.size());
  std::iota(order.begin(), order.end(), 0);
  std::stable_sort(order.begin(), order.end(),
                   [&](size_t a, size_t b) { return f.cand_hashes[a] < f.cand_hashes[b]; });
  std::vector<Hash128> key_parts{f.prompt_hash};
  std::vector<Hash128> judg;
  for (size_t k : order) {
    key_parts.push_back(f.cand_hashes[k]);
    judg.push_back(Hash128{0, static_cast<uint64_t>(f.ranks[k])});
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
