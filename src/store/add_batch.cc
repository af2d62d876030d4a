// Incremental runs against a store; see add_batch.h and docs/store.md.
#include "store/add_batch.h"

#include <nlohmann/json.hpp>

#include <signal.h>
#include <unistd.h>

#include <algorithm>
#include <cstdlib>
#include <ctime>
#include <functional>
#include <map>
#include <set>
#include <span>
#include <unordered_map>

#include "core/file_digest.h"
#include "core/file_system.h"
#include "core/sha256.h"
#include "core/source_date.h"
#include "io/output_dir.h"
#include "sketch/clusters.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/union_find.h"
#include "stages/annotators/annotators_stage.h"
#include "stages/exact/exact_stage.h"
#include "pipeline/pipeline.h"
#include "stages/stage.h"
#include "store/store_db.h"

namespace prefsift::store {
namespace {

using Json = nlohmann::ordered_json;

const char* const kTieNames[] = {"prompt", "near", "thread", "annotator", "group"};
constexpr int kTieKinds = 5;

std::string Blob(const Hash128& h) {
  std::string b(16, '\0');
  for (int k = 0; k < 8; ++k) {
    b[k] = static_cast<char>(h.hi >> (56 - 8 * k));
    b[8 + k] = static_cast<char>(h.lo >> (56 - 8 * k));
  }
  return b;
}

Hash128 FromBlob(std::string_view b) {
  Hash128 h;
  for (size_t k = 0; k < 8 && k < b.size(); ++k) h.hi = (h.hi << 8) | static_cast<uint8_t>(b[k]);
  for (size_t k = 8; k < 16 && k < b.size(); ++k) h.lo = (h.lo << 8) | static_cast<uint8_t>(b[k]);
  return h;
}

std::string ClusterBlob(int64_t id) {
  std::string b(8, '\0');
  for (int k = 0; k < 8; ++k) b[k] = static_cast<char>(static_cast<uint64_t>(id) >> (56 - 8 * k));
  return b;
}

// Band keys are kept as 31-bit integers (4 bytes in SQLite's record format); a
// shorter key only adds candidates, which verification then drops.
int64_t BandRow(uint64_t key) { return static_cast<int64_t>(key >> 33); }

std::string Hex16(std::string_view blob) { return ToHex(FromBlob(blob)).substr(0, 16); }

// The split stage's settings as far as the store needs them. Defaults follow
// src/stages/split/split_stage.cc (splits train 0.8 / valid 0.1 / test 0.1; tie_by
// prompt, near, thread); the split stage validates the values itself.
struct SplitView {
  std::vector<std::string> names{"train", "valid", "test"};
  bool tie[kTieKinds] = {true, true, true, false, false};
};

Result<SplitView> ReadSplitView(const Plan& plan) {
  const Json& s = StageSettings(plan, "split");
  SplitView v;
  if (s.contains("enabled") && s["enabled"].is_boolean() && !s["enabled"].get<bool>()) {
    return Status::Usage("store: the split stage must run for a store (stages.split.enabled is false)");
  }
  if (s.contains("splits") && s["splits"].is_object()) {
    v.names.clear();
    for (auto it = s["splits"].begin(); it != s["splits"].end(); ++it) v.names.push_back(it.key());
  }
  if (s.contains("tie_by") && s["tie_by"].is_array()) {
    std::fill(std::begin(v.tie), std::end(v.tie), false);
    for (const auto& t : s["tie_by"]) {
      for (int k = 0; k < kTieKinds; ++k) {
        if (t.is_string() && t.get<std::string>() == kTieNames[k]) v.tie[k] = true;
      }
    }
  }
  if (s.contains("stratify_by") && s["stratify_by"] == "source") {
    return Status::Usage("store: stages.split.stratify_by \"source\" cuts by ranks over all data and cannot grow "
                         "batch by batch; use \"none\" with a store (docs/store.md)");
  }
  const Json& n = StageSettings(plan, "near");
  if (n.contains("verify") && n["verify"] == "exact") {
    return Status::Usage("store: stages.near.verify \"exact\" needs every stored shingle set; use \"estimate\" with a "
                         "store (docs/store.md)");
  }
  const Json& e = StageSettings(plan, "exact");
  if (e.contains("enabled") && e["enabled"].is_boolean() && !e["enabled"].get<bool>()) {
    return Status::Usage("store: the exact stage must run for a store (stages.exact.enabled is false)");
  }
  return v;
}

// The settings a store is bound to: changing them between batches would make
// stored facts incomparable with new ones.
Json BoundConfig(const Plan& plan) {
  Json near = StageSettings(plan, "near");
  for (const char* k : {"enabled", "max_per_cluster", "candidates", "candidate_threshold", "candidate_ngram"}) {
    near.erase(k);
  }
  Json split = StageSettings(plan, "split");
  split.erase("previous");
  split.erase("enabled");
  return Json{{"normalize", {{"strip_punctuation", plan.normalize.strip_punctuation}}},
              {"near", near},
              {"split", split}};
}

const char* PolicyName(ConflictPolicy p) { return p == ConflictPolicy::kJoinFirst ? "join-first" : "reject"; }

struct Conflict {
  std::vector<std::string> ids;  // batch records rejected (reject) or joined to the first group (join-first)
  Json groups;                   // [{group, split}]
  std::string via;               // "near cluster merge" or "ties"
  Json resolution;               // {"policy", "action", ...}

  Json ToJson() const { return Json{{"records", ids}, {"groups", groups}, {"via", via}, {"resolution", resolution}}; }
};

class StoreCompanion : public RunCompanion {
 public:
  StoreCompanion(StoreDb* db, const Plan& plan, SplitView view, ConflictPolicy policy, int64_t batch, int64_t first_seq)
      : db_(db), plan_(plan), view_(std::move(view)), policy_(policy), batch_(batch), first_seq_(first_seq) {
    for (const auto& info : AllStages()) order_.push_back(info.name);
  }
  std::string name() const override { return "store"; }

  Status Between(const std::string& next, RunState& st) override {
    st.near_share = true;
    if (!exact_done_ && After(next, "exact")) {
      exact_done_ = true;
      if (Status s = ExactCheck(st); !s.ok()) return s;
    }
    if (!near_done_ && After(next, "near")) {
      near_done_ = true;
      if (Status s = NearJoin(st); !s.ok()) return s;
    }
    if (next == "split") {
      group_done_ = true;
      if (Status s = GroupCheck(st); !s.ok()) return s;
    }
    return Status::Ok();
  }

  Status Decide(RunState& st) override {
    if (!exact_done_) {
      exact_done_ = true;
      if (Status s = ExactCheck(st); !s.ok()) return s;
    }
    if (!near_done_) {
      near_done_ = true;
      if (Status s = NearJoin(st); !s.ok()) return s;
    }
    if (!group_done_) return Status::Usage("store: the split stage did not run; a store needs it");
    agreement_ = BatchAgreement(plan_, st);  // this batch's annotator agreement (docs/annotators.md)
    return Write(st);
  }

  void Report(const RunState&, Json* s) const override {
    (*s)["store"] = db_->path();
    (*s)["batch"] = batch_;
    (*s)["first_record_number"] = first_seq_;
    (*s)["exact"] = Json{{"store_duplicates", dup_}, {"store_label_conflicts", label_conflict_}};
    (*s)["near"] = Json{{"records_matched_to_stored_clusters", near_matched_},
                        {"stored_clusters_merged", clusters_merged_},
                        {"stored_candidates_checked", candidates_checked_}};
    (*s)["groups"] = Json{{"records_inheriting_a_split", inherited_},
                          {"records_in_new_groups", in_new_groups_},
                          {"new_groups", new_groups_},
                          {"stored_groups_merged", groups_merged_},
                          {"split_overridden_after_split_stage", hook_missing_}};
    Json conflicts = Json::array();
    for (size_t k = 0; k < conflicts_.size() && k < 50; ++k) conflicts.push_back(conflicts_[k].ToJson());
    (*s)["group_conflicts"] = Json{{"policy", PolicyName(policy_)},
                                   {"components", conflicts_.size()},
                                   {"records_rejected", conflict_records_},
                                   {"records_joined_first", joined_.size()},
                                   {"first", std::move(conflicts)},
                                   {"file", "store_conflicts.jsonl"}};
    (*s)["records_stored"] = stored_;
    (*s)["note"] = "records already in the store are not re-read; stored groups keep their split (docs/store.md)";
  }

  Status WriteOutputs(const RunState&, OutputDir& out) const override {
    auto f = out.Create("store_conflicts.jsonl");
    if (!f.ok()) return f.status();
    for (const auto& c : conflicts_) {
      Status s = f.value()->Append(c.ToJson().dump() + "\n");
      if (!s.ok()) return s;
    }
    return f.value()->Close();
  }

 private:
  bool After(const std::string& next, const std::string& stage) const {
    if (next.empty()) return true;
    auto a = std::find(order_.begin(), order_.end(), next), b = std::find(order_.begin(), order_.end(), stage);
    return a > b;
  }

  int64_t Seq(size_t i) const { return first_seq_ + static_cast<int64_t>(i); }

  // 1. Comparison keys already stored.
  Status ExactCheck(RunState& st) {
    const size_t n = st.records.size();
    key_.assign(n, {});
    judg_.assign(n, {});
    stored_ok_.assign(n, 0);
    cluster_.assign(n, -1);
    auto q = db_->Prepare("SELECT judgment, id, batch FROM records WHERE comparison = ?");
    if (!q.ok()) return q.status();
    Statement& stmt = *q.value();
    for (size_t i = 0; i < n; ++i) {
      key_[i] = ComparisonKeyOf(st.records[i], &judg_[i]);
      if (!st.IsKept(i)) continue;
      std::string kb = Blob(key_[i]);
      stmt.BindBlob(1, kb.data(), kb.size());
      Status err;
      if (stmt.Step(&err)) {
        bool same = FromBlob(stmt.Blob(0)) == judg_[i];
        std::string sid = stmt.Text(1);
        int64_t sb = stmt.Int(2);
        Json detail{{"stored_id", sid}, {"stored_batch", sb}};
        if (same) {
          st.Reject(i, name(), "store_duplicate",
                    "the same comparison with the same judgment is already in the store (" + sid + ", batch " +
                        std::to_string(sb) + ")",
                    detail.dump());
          ++dup_;
        } else {
          st.Reject(i, name(), "store_label_conflict",
                    "the store already holds this comparison with a different judgment (" + sid + ", batch " +
                        std::to_string(sb) + "); the stored judgment stays",
                    detail.dump());
          ++label_conflict_;
        }
      } else {
        stored_ok_[i] = 1;
      }
      stmt.Reset();
      if (!err.ok()) return err;
    }
    return Status::Ok();
  }

  // 2. Batch records against stored band keys; components over batch clusters
  // and stored clusters.
  Status NearJoin(RunState& st) {
    const size_t n = st.records.size();
    for (size_t i = 0; i < n; ++i) cluster_[i] = Seq(i);
    comp_of_.assign(n, -1);
    if (st.near_slots == 0) return Status::Ok();  // the near stage did not run
    if (st.near_threshold < 0) return Status::Usage("store: stages.near.verify \"exact\" is not supported with a store");
    const uint32_t K = st.near_slots;
    banding_ = sketch::Banding{st.near_bands, st.near_rows};
    Json nb{{"slots", K}, {"bands", banding_.bands}, {"rows", banding_.rows}, {"threshold", st.near_threshold}};
    auto stored_nb = db_->Meta("near_banding");
    if (!stored_nb.ok()) return stored_nb.status();
    if (!stored_nb.value().empty() && stored_nb.value() != nb.dump()) {
      return Status::Usage("store " + db_->path() + ": the near settings give " + nb.dump() + " but the store was built with " +
                           stored_nb.value() + "; a store keeps one configuration");
    }
    near_banding_json_ = nb.dump();
    const float threshold = static_cast<float>(st.near_threshold);
    const uint64_t seed = sketch::ClusterOptions{}.band_seed;
    auto qb = db_->Prepare("SELECT seq FROM bands WHERE bkey = ?");
    auto qs = db_->Prepare("SELECT s.sig, r.cluster FROM signatures s JOIN records r ON r.seq = s.seq WHERE s.seq = ?");
    if (!qb.ok()) return qb.status();
    if (!qs.ok()) return qs.status();
    std::unordered_map<int64_t, int64_t> verdict;  // stored seq -> cluster id or -1 (below threshold) per record: reset
    std::vector<std::pair<uint32_t, int64_t>> edges;  // batch record, stored cluster id
    band_keys_.assign(n * banding_.bands, 0);
    for (size_t i = 0; i < n; ++i) {
      if (!stored_ok_[i]) continue;  // every record the near stage clustered (kept after exact)
      std::span<const uint8_t> sig(st.near_signatures.data() + i * K, K);
      std::span<uint64_t> keys(band_keys_.data() + i * banding_.bands, banding_.bands);
      sketch::BandKeys(sig, banding_, seed, keys);
      std::set<int64_t> cands;
      for (uint64_t k : keys) {
        qb.value()->Bind(1, BandRow(k));
        Status err;
        while (qb.value()->Step(&err)) cands.insert(qb.value()->Int(0));
        qb.value()->Reset();
        if (!err.ok()) return err;
      }
      for (int64_t seq : cands) {
        ++candidates_checked_;
        qs.value()->Bind(1, seq);
        Status err;
        if (qs.value()->Step(&err)) {
          std::string_view other = qs.value()->Blob(0);
          if (other.size() == K) {
            std::span<const uint8_t> o(reinterpret_cast<const uint8_t*>(other.data()), K);
            float sim = static_cast<float>(sketch::CompactMatchesToJaccard(sketch::CountEqualSlots(sig, o), K));
            if (sim >= threshold) edges.emplace_back(static_cast<uint32_t>(i), qs.value()->Int(1));
          }
        }
        qs.value()->Reset();
        if (!err.ok()) return err;
      }
    }
    // Nodes: batch records, then stored clusters.
    std::map<int64_t, uint32_t> node_of_cluster;
    for (const auto& [i, c] : edges) node_of_cluster.emplace(c, 0);
    uint32_t next = static_cast<uint32_t>(n);
    std::vector<int64_t> cluster_of_node;
    for (auto& [c, node] : node_of_cluster) {
      node = next++;
      cluster_of_node.push_back(c);
    }
    sketch::UnionFind uf(next);
    for (size_t i = 0; i < n; ++i) {
      if (stored_ok_[i] && st.near_cluster.size() == n && st.near_cluster[i] >= 0) {
        uf.Union(static_cast<uint32_t>(i), static_cast<uint32_t>(st.near_cluster[i]));
      }
    }
    std::set<uint32_t> matched;
    for (const auto& [i, c] : edges) {
      uf.Union(i, node_of_cluster[c]);
      matched.insert(i);
    }
    near_matched_ = matched.size();
    // Components holding stored clusters.
    std::map<uint32_t, std::vector<int64_t>> stored_in;  // root -> stored cluster ids (ascending)
    for (const auto& [c, node] : node_of_cluster) stored_in[uf.Find(node)].push_back(c);
    std::map<uint32_t, int64_t> comp_index;
    for (auto& [root, list] : stored_in) {
      comp_index[root] = static_cast<int64_t>(comp_clusters_.size());
      comp_clusters_.push_back(list);
    }
    std::vector<std::vector<size_t>> members(comp_clusters_.size());
    for (size_t i = 0; i < n; ++i) {
      if (!stored_ok_[i]) continue;
      auto it = comp_index.find(uf.Find(static_cast<uint32_t>(i)));
      if (it == comp_index.end()) {
        if (st.near_cluster.size() == n && st.near_cluster[i] >= 0) cluster_[i] = Seq(static_cast<size_t>(st.near_cluster[i]));
        continue;
      }
      comp_of_[i] = it->second;
      cluster_[i] = comp_clusters_[static_cast<size_t>(it->second)].front();
      members[static_cast<size_t>(it->second)].push_back(i);
    }
    // Stored clusters bridged by the batch: merge, unless (with near ties)
    // their groups sit in different splits.
    auto qg = db_->Prepare(
        "SELECT DISTINCT g.grp, g.split, g.gkey FROM records r JOIN groups g ON g.grp = r.grp "
        "WHERE r.cluster = ? AND r.kept = 1 ORDER BY g.grp");
    if (!qg.ok()) return qg.status();
    for (size_t c = 0; c < comp_clusters_.size(); ++c) {
      const auto& list = comp_clusters_[c];
      if (list.size() < 2) continue;
      std::vector<std::tuple<int64_t, std::string, std::string>> groups;
      for (int64_t cl : list) {
        qg.value()->Bind(1, cl);
        Status err;
        while (qg.value()->Step(&err)) {
          groups.emplace_back(qg.value()->Int(0), qg.value()->Text(1), std::string(qg.value()->Blob(2)));
        }
        qg.value()->Reset();
        if (!err.ok()) return err;
      }
      std::set<std::string> splits;
      for (const auto& g : groups) splits.insert(std::get<1>(g));
      if (view_.tie[kTieNear] && splits.size() > 1) {
        Conflict cf;
        cf.via = "near-duplicate prompts joining stored clusters " + Json(list).dump();
        cf.groups = GroupsJson(groups);
        if (policy_ == ConflictPolicy::kJoinFirst) {
          // The records join the first stored cluster (smallest id: the
          // earliest accepted record); the other clusters stay apart. Their
          // group is settled before the split stage (GroupCheck).
          cf.resolution = Json{{"policy", "join-first"},
                               {"action", "joined the first stored cluster; the other clusters were not merged"},
                               {"cluster", list.front()}};
          for (size_t i : members[c]) {
            if (st.IsKept(i)) cf.ids.push_back(st.records[i].id);
          }
          for (size_t i : members[c]) {
            if (st.IsKept(i)) joined_.insert(i);
          }
        } else {
          cf.resolution = Json{{"policy", "reject"}, {"action", "rejected (store_group_conflict)"}};
          for (size_t i : members[c]) RejectConflict(st, i, cf);
        }
        conflicts_.push_back(std::move(cf));
        comp_clusters_[c].resize(1);  // nothing merges
        continue;
      }
      for (size_t k = 1; k < list.size(); ++k) cluster_merges_.emplace_back(list[0], list[k]);
      if (view_.tie[kTieNear]) {
        for (size_t k = 1; k < groups.size(); ++k) group_merges_.emplace_back(std::get<0>(groups[0]), std::get<0>(groups[k]));
      }
    }
    return Status::Ok();
  }

  Json GroupsJson(const std::vector<std::tuple<int64_t, std::string, std::string>>& groups) const {
    Json out = Json::array();
    std::set<int64_t> seen;
    for (const auto& [g, split, key] : groups) {
      if (seen.insert(g).second) out.push_back(Json{{"group", Hex16(key)}, {"split", split}});
    }
    return out;
  }

  void RejectConflict(RunState& st, size_t i, Conflict& cf) {
    stored_ok_[i] = 0;
    if (st.Reject(i, name(), "store_group_conflict",
                  "this record ties stored groups that sit in different splits (" + cf.groups.dump() +
                      "); it would move one of them, so it is held back (docs/store.md)",
                  Json{{"groups", cf.groups}}.dump())) {
      cf.ids.push_back(st.records[i].id);
      ++conflict_records_;
    }
  }

  // 3. Ties to stored groups, before the split stage groups the batch.
  Status GroupCheck(RunState& st) {
    const size_t n = st.records.size();
    st.prior_split.assign(n, -1);
    std::vector<uint32_t> kept;
    for (size_t i = 0; i < n; ++i) {
      if (st.IsKept(i)) kept.push_back(static_cast<uint32_t>(i));
    }
    auto qt = db_->Prepare(
        "SELECT t.grp, g.split, g.gkey, g.first_batch FROM ties t JOIN groups g ON g.grp = t.grp WHERE t.kind = ? AND t.tkey = ?");
    if (!qt.ok()) return qt.status();
    struct StoredGroup {
      std::string split, key;
      int64_t first_batch = 0;
    };
    std::map<int64_t, StoredGroup> info;
    std::vector<std::pair<uint32_t, int64_t>> edges;  // batch record, stored group
    auto lookup = [&](uint32_t i, int kind, const std::string& tkey) -> Status {
      qt.value()->Bind(1, kind).BindBlob(2, tkey.data(), tkey.size());
      Status err;
      if (qt.value()->Step(&err)) {
        int64_t g = qt.value()->Int(0);
        info.emplace(g, StoredGroup{qt.value()->Text(1), std::string(qt.value()->Blob(2)), qt.value()->Int(3)});
        edges.emplace_back(i, g);
      }
      qt.value()->Reset();
      return err;
    };
    sketch::UnionFind uf0(static_cast<uint32_t>(n));
    std::unordered_map<Hash128, uint32_t, Hash128Hasher> by_prompt;
    std::unordered_map<int64_t, uint32_t> by_near;
    std::unordered_map<std::string, uint32_t> by_text[kTieKinds];
    for (uint32_t i : kept) {
      const RecordFacts& f = st.records[i];
      if (view_.tie[kTiePrompt]) {
        auto [it, fresh] = by_prompt.try_emplace(f.prompt_hash, i);
        if (!fresh) uf0.Union(it->second, i);
        if (Status s = lookup(i, kTiePrompt, Blob(f.prompt_hash)); !s.ok()) return s;
      }
      if (view_.tie[kTieNear]) {
        if (st.near_cluster.size() == n && st.near_cluster[i] >= 0) {
          auto [it, fresh] = by_near.try_emplace(st.near_cluster[i], i);
          if (!fresh) uf0.Union(it->second, i);
        }
        if (comp_of_.size() == n && comp_of_[i] >= 0) {
          for (int64_t cl : comp_clusters_[static_cast<size_t>(comp_of_[i])]) {
            if (Status s = lookup(i, kTieNear, ClusterBlob(cl)); !s.ok()) return s;
          }
        }
      }
      const std::string* text[kTieKinds] = {nullptr, nullptr, &st.Text(f.thread_id), &st.Text(f.annotator_id),
                                            &st.Text(f.group_id)};
      for (int t = kTieThread; t < kTieKinds; ++t) {
        if (!view_.tie[t] || text[t]->empty()) continue;
        auto [it, fresh] = by_text[t].try_emplace(*text[t], i);
        if (!fresh) uf0.Union(it->second, i);
        if (Status s = lookup(i, t, Blob(HashBytes(*text[t]))); !s.ok()) return s;
      }
    }
    // Group nodes after the records.
    std::map<int64_t, uint32_t> node_of_group;
    uint32_t next = static_cast<uint32_t>(n);
    for (const auto& [g, gi] : info) node_of_group[g] = next++;
    sketch::UnionFind uf(next);
    for (uint32_t i : kept) uf.Union(i, uf0.Find(i));
    for (const auto& [i, g] : edges) uf.Union(i, node_of_group[g]);
    std::map<uint32_t, std::vector<int64_t>> groups_in;
    for (const auto& [g, node] : node_of_group) groups_in[uf.Find(node)].push_back(g);
    std::map<uint32_t, std::vector<uint32_t>> members;
    for (uint32_t i : kept) members[uf.Find(i)].push_back(i);
    group_target_.assign(n, -1);
    new_group_of_.assign(n, -1);
    for (auto& [root, list] : members) {
      auto it = groups_in.find(root);
      if (it == groups_in.end()) {
        // A new group: the split stage assigns it; the store records it after.
        int64_t k = static_cast<int64_t>(new_groups_members_.size());
        new_groups_members_.push_back(list);
        for (uint32_t i : list) new_group_of_[i] = k;
        continue;
      }
      std::vector<int64_t> gl = it->second;  // ascending group ids
      std::set<std::string> splits;
      for (int64_t g : gl) splits.insert(info[g].split);
      if (splits.size() > 1) {
        std::vector<std::tuple<int64_t, std::string, std::string>> gs;
        for (int64_t g : gl) gs.emplace_back(g, info[g].split, info[g].key);
        Conflict cf;
        cf.via = "ties (" + TieList() + ")";
        cf.groups = GroupsJson(gs);
        if (policy_ != ConflictPolicy::kJoinFirst) {
          cf.resolution = Json{{"policy", "reject"}, {"action", "rejected (store_group_conflict)"}};
          for (uint32_t i : list) RejectConflict(st, i, cf);
          conflicts_.push_back(std::move(cf));
          continue;
        }
        // join-first: the group accepted first (earliest batch, then the
        // smaller group id) takes the records; stored groups of its split
        // merge with it as usual, groups of other splits stay where they are.
        int64_t first = gl.front();
        for (int64_t g : gl) {
          if (info[g].first_batch < info[first].first_batch) first = g;
        }
        const std::string split = info[first].split;
        std::vector<int64_t> same;
        same.push_back(first);
        for (int64_t g : gl) {
          if (g != first && info[g].split == split) same.push_back(g);
        }
        gl = same;
        cf.resolution = Json{{"policy", "join-first"},
                             {"action", "joined the group accepted first; nothing stored moved"},
                             {"group", Hex16(info[first].key)},
                             {"split", split},
                             {"first_batch", info[first].first_batch}};
        for (uint32_t i : list) cf.ids.push_back(st.records[i].id);
        joined_.insert(list.begin(), list.end());
        conflicts_.push_back(std::move(cf));
        splits = {split};
      }
      auto pos = std::find(view_.names.begin(), view_.names.end(), *splits.begin());
      if (pos == view_.names.end()) {
        return Status::Usage("store " + db_->path() + ": stored split \"" + *splits.begin() +
                             "\" is not among the plan's splits; a store keeps one configuration");
      }
      for (uint32_t i : list) {
        st.prior_split[i] = static_cast<int32_t>(pos - view_.names.begin());
        group_target_[i] = gl.front();
        ++inherited_;
      }
      for (size_t k = 1; k < gl.size(); ++k) group_merges_.emplace_back(gl.front(), gl[k]);
    }
    return Status::Ok();
  }

  std::string TieList() const {
    std::string s;
    for (int t = 0; t < kTieKinds; ++t) {
      if (view_.tie[t]) s += (s.empty() ? "" : ", ") + std::string(kTieNames[t]);
    }
    return s;
  }

  // 4. The batch's facts into the store (inside the caller's transaction).
  Status Write(RunState& st) {
    const size_t n = st.records.size();
    records_ = n;
    for (size_t e = 0; e < st.decisions.size(); ++e) {
      const Decision& d = st.decisions[e];
      if (d.rejected) ++rejected_by_reason_[std::string(d.stage) + "/" + std::string(d.reason)];
    }
    // The split stage's hook gives inheriting groups their stored split; if
    // the hook were missing, the decision is corrected here and counted.
    for (size_t i = 0; i < n; ++i) {
      if (st.prior_split.size() == n && st.prior_split[i] >= 0 && st.IsKept(i) &&
          st.DecisionOf(i).split != static_cast<uint32_t>(st.prior_split[i])) {
        st.DecisionOf(i).split = static_cast<uint32_t>(st.prior_split[i]);
        ++hook_missing_;
      }
    }
    std::map<std::string, uint64_t> by_split;
    for (size_t i = 0; i < n; ++i) {
      if (st.IsKept(i)) ++by_split[st.split_names[st.DecisionOf(i).split]];
    }
    for (const auto& [k, v] : by_split) kept_by_split_[k] = v;
    Json config = BoundConfig(plan_);
    auto stored_config = db_->Meta("config");
    if (!stored_config.ok()) return stored_config.status();
    if (stored_config.value().empty()) {
      if (Status s = db_->SetMeta("config", config.dump()); !s.ok()) return s;
      if (Status s = db_->SetMeta("splits", Json(view_.names).dump()); !s.ok()) return s;
      if (!near_banding_json_.empty()) {
        if (Status s = db_->SetMeta("near_banding", near_banding_json_); !s.ok()) return s;
      }
    }
    // Group merges (union-find over stored group ids).
    std::map<int64_t, int64_t> parent;
    std::function<int64_t(int64_t)> find = [&](int64_t g) {
      auto it = parent.find(g);
      if (it == parent.end() || it->second == g) return g;
      return it->second = find(it->second);
    };
    for (auto [a, b] : group_merges_) {
      int64_t ra = find(a), rb = find(b);
      if (ra == rb) continue;
      if (rb < ra) std::swap(ra, rb);
      parent[rb] = ra;
    }
    for (const auto& [g, p] : parent) {
      int64_t t = find(g);
      if (t == g) continue;
      ++groups_merged_;
      for (const char* sql : {"UPDATE records SET grp = ?1 WHERE grp = ?2", "UPDATE ties SET grp = ?1 WHERE grp = ?2",
                              "DELETE FROM groups WHERE grp = ?2"}) {
        auto u = db_->Prepare(sql);
        if (!u.ok()) return u.status();
        u.value()->Bind(1, t).Bind(2, g);
        if (Status s = u.value()->Run(); !s.ok()) return s;
      }
    }
    // Cluster merges.
    for (const auto& [target, other] : cluster_merges_) {
      ++clusters_merged_;
      auto u = db_->Prepare("UPDATE records SET cluster = ?1 WHERE cluster = ?2");
      if (!u.ok()) return u.status();
      u.value()->Bind(1, target).Bind(2, other);
      if (Status s = u.value()->Run(); !s.ok()) return s;
      auto d = db_->Prepare("DELETE FROM ties WHERE kind = 1 AND tkey = ?");
      if (!d.ok()) return d.status();
      std::string ob = ClusterBlob(other);
      d.value()->BindBlob(1, ob.data(), ob.size());
      if (Status s = d.value()->Run(); !s.ok()) return s;
      if (view_.tie[kTieNear]) {
        auto t = db_->Prepare(
            "INSERT OR IGNORE INTO ties(kind, tkey, grp) SELECT 1, ?1, grp FROM records "
            "WHERE cluster = ?2 AND kept = 1 AND grp IS NOT NULL ORDER BY seq LIMIT 1");
        if (!t.ok()) return t.status();
        std::string tb = ClusterBlob(target);
        t.value()->BindBlob(1, tb.data(), tb.size()).Bind(2, target);
        if (Status s = t.value()->Run(); !s.ok()) return s;
      }
    }
    // New groups: key = smallest prompt hash, as the split stage computes it.
    std::vector<int64_t> new_grp(new_groups_members_.size(), -1);
    auto ig = db_->Prepare("INSERT INTO groups(gkey, split, first_batch) VALUES(?, ?, ?)");
    if (!ig.ok()) return ig.status();
    for (size_t k = 0; k < new_groups_members_.size(); ++k) {
      const auto& list = new_groups_members_[k];
      bool any = false;
      Hash128 key;
      for (uint32_t i : list) {
        if (!st.IsKept(i)) continue;
        if (!any || st.records[i].prompt_hash < key) key = st.records[i].prompt_hash;
        any = true;
      }
      if (!any) continue;
      std::string kb = Blob(key);
      const std::string& split = st.split_names[st.DecisionOf(list.front()).split];
      ig.value()->BindBlob(1, kb.data(), kb.size()).Bind(2, split).Bind(3, batch_);
      if (Status s = ig.value()->Run(); !s.ok()) return s;
      new_grp[k] = db_->LastInsertId();
      ++new_groups_;
      in_new_groups_ += list.size();
    }
    // Records, signatures, band keys, ties.
    auto ir = db_->Prepare(
        "INSERT INTO records(seq, batch, id, prompt, comparison, judgment, cluster, kept, grp, split) "
        "VALUES(?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
    auto is = db_->Prepare("INSERT INTO signatures(seq, sig) VALUES(?, ?)");
    auto ib = db_->Prepare("INSERT OR IGNORE INTO bands(bkey, seq) VALUES(?, ?)");
    auto it = db_->Prepare("INSERT OR IGNORE INTO ties(kind, tkey, grp) VALUES(?, ?, ?)");
    for (auto* p : {&ir, &is, &ib, &it}) {
      if (!p->ok()) return p->status();
    }
    const bool near_ran = st.near_slots > 0;
    const uint32_t K = st.near_slots;
    size_t half = 0;
    std::vector<std::pair<int64_t, int64_t>> bands;  // (band key, seq)
    for (size_t i = 0; i < n; ++i) {
      if (!stored_ok_[i]) continue;
      bool kept = st.IsKept(i);
      int64_t grp = -1;
      if (kept) {
        if (group_target_[i] >= 0) grp = FindTarget(parent, group_target_[i]);
        else if (new_group_of_[i] >= 0) grp = new_grp[static_cast<size_t>(new_group_of_[i])];
      }
      const RecordFacts& f = st.records[i];
      std::string pb = Blob(f.prompt_hash), kb = Blob(key_[i]), jb = Blob(judg_[i]);
      Statement& r = *ir.value();
      r.Bind(1, Seq(i)).Bind(2, batch_).Bind(3, f.id);
      r.BindBlob(4, pb.data(), pb.size()).BindBlob(5, kb.data(), kb.size()).BindBlob(6, jb.data(), jb.size());
      r.Bind(7, cluster_[i]).Bind(8, kept ? 1 : 0);
      if (grp >= 0) r.Bind(9, grp).Bind(10, st.split_names[st.DecisionOf(i).split]);
      else r.BindNull(9).BindNull(10);
      if (Status s = r.Run(); !s.ok()) {
        return Status::Io("store " + db_->path() + ": record " + f.id + ": " + s.message());
      }
      ++stored_;
      if (near_ran) {
        is.value()->Bind(1, Seq(i)).BindBlob(2, st.near_signatures.data() + i * K, K);
        if (Status s = is.value()->Run(); !s.ok()) return s;
        for (uint32_t b = 0; b < banding_.bands; ++b) bands.emplace_back(BandRow(band_keys_[i * banding_.bands + b]), Seq(i));
      }
      if (grp >= 0) {
        auto tie = [&](int kind, const std::string& key) {
          it.value()->Bind(1, kind).BindBlob(2, key.data(), key.size()).Bind(3, grp);
          return it.value()->Run();
        };
        Status s;
        if (view_.tie[kTiePrompt]) s = tie(kTiePrompt, pb);
        if (s.ok() && view_.tie[kTieNear]) s = tie(kTieNear, ClusterBlob(cluster_[i]));
        const std::string* text[kTieKinds] = {nullptr, nullptr, &st.Text(f.thread_id), &st.Text(f.annotator_id),
                                              &st.Text(f.group_id)};
        for (int t = kTieThread; t < kTieKinds && s.ok(); ++t) {
          if (view_.tie[t] && !text[t]->empty()) s = tie(t, Blob(HashBytes(*text[t])));
        }
        if (!s.ok()) return s;
      }
      if (++half == 50) MaybeKill("mid-write");
    }
    if (half < 50) MaybeKill("mid-write");
    // Band keys in key order: inserts walk the B-tree once instead of at random.
    std::sort(bands.begin(), bands.end());
    for (const auto& [key, seq] : bands) {
      ib.value()->Bind(1, key).Bind(2, seq);
      if (Status s = ib.value()->Run(); !s.ok()) return s;
    }
    return Status::Ok();
  }

  static int64_t FindTarget(std::map<int64_t, int64_t>& parent, int64_t g) {
    for (;;) {
      auto it = parent.find(g);
      if (it == parent.end() || it->second == g) return g;
      g = it->second;
    }
  }

 public:
  // Counts for the batch row.
  uint64_t stored() const { return stored_; }
  uint64_t records() const { return records_; }
  Json Counts(const RunState* st = nullptr) const {
    (void)st;
    Json by_reason = Json::object();
    for (const auto& [k, v] : rejected_by_reason_) by_reason[k] = v;
    return Json{{"rejected_by_reason", by_reason}, {"kept_by_split", kept_by_split_}, {"store_duplicates", dup_},
                {"store_label_conflicts", label_conflict_}, {"group_conflict_policy", PolicyName(policy_)},
                {"store_group_conflicts", conflict_records_}, {"group_conflict_components", conflicts_.size()},
                {"records_joined_first", joined_.size()}, {"records_inheriting_a_split", inherited_},
                {"new_groups", new_groups_}, {"stored_clusters_merged", clusters_merged_},
                {"stored_groups_merged", groups_merged_}, {"annotator_agreement", agreement_}};
  }

 private:
  StoreDb* db_;
  const Plan& plan_;
  SplitView view_;
  ConflictPolicy policy_;
  int64_t batch_, first_seq_;
  Json agreement_;
  std::vector<std::string> order_;
  bool exact_done_ = false, near_done_ = false, group_done_ = false;
  // Per record.
  std::vector<Hash128> key_, judg_;
  std::vector<uint8_t> stored_ok_;      // passed exact and the store's checks: stored at the end
  std::vector<int64_t> cluster_;        // global cluster id
  std::vector<int64_t> comp_of_;        // index into comp_clusters_, -1 = touches no stored cluster
  std::vector<int64_t> group_target_;   // stored group inherited, -1 = none
  std::vector<int64_t> new_group_of_;   // index into new_groups_members_
  std::vector<uint64_t> band_keys_;
  sketch::Banding banding_{};
  std::string near_banding_json_;
  std::vector<std::vector<int64_t>> comp_clusters_;
  std::vector<std::vector<uint32_t>> new_groups_members_;
  std::vector<std::pair<int64_t, int64_t>> cluster_merges_, group_merges_;
  std::vector<Conflict> conflicts_;
  uint64_t dup_ = 0, label_conflict_ = 0, near_matched_ = 0, clusters_merged_ = 0, candidates_checked_ = 0,
           inherited_ = 0, in_new_groups_ = 0, new_groups_ = 0, groups_merged_ = 0, hook_missing_ = 0,
           conflict_records_ = 0, stored_ = 0, records_ = 0;
  std::set<size_t> joined_;  // batch records placed by join-first
  std::map<std::string, uint64_t> rejected_by_reason_;
  Json kept_by_split_ = Json::object();
};

}  // namespace

void MaybeKill(const char* phase) {
  const char* at = std::getenv("PREFSIFT_TEST_KILL_AT");
  if (at && std::string(at) == phase) ::raise(SIGKILL);
}

Result<StoreSettings> StoreSettingsFromPlan(FileSystem* fs, const Plan& plan) {
  StoreSettings out;
  if (plan.plan_path.empty()) return out;
  auto text = ReadWholeFile(fs, plan.plan_path);
  Json j = Json::parse(text.ok() ? text.value() : "", nullptr, false, /*ignore_comments=*/true);
  if (!j.is_object() || !j.contains("store")) return out;
  const Json& st = j["store"];
  const std::string where = plan.plan_path + ": store";
  std::string p;
  if (st.is_string()) {
    p = st.get<std::string>();
    if (p.empty()) return Status::Usage(where + ": must be the path of the store file");
  } else if (st.is_object()) {
    for (auto it = st.begin(); it != st.end(); ++it) {
      const std::string& k = it.key();
      if (k == "$comment") continue;
      if (k == "path") {
        if (!it.value().is_string() || it.value().get<std::string>().empty()) {
          return Status::Usage(where + ".path: must be the path of the store file");
        }
        p = it.value().get<std::string>();
      } else if (k == "group_conflicts") {
        std::string v = it.value().is_string() ? it.value().get<std::string>() : "";
        if (v == "reject") out.group_conflicts = ConflictPolicy::kReject;
        else if (v == "join-first") out.group_conflicts = ConflictPolicy::kJoinFirst;
        else {
          return Status::Usage(where + ".group_conflicts: " + it.value().dump() +
                               " is not a policy (known: \"reject\", \"join-first\"; docs/store.md)");
        }
      } else {
        return Status::Usage(where + "." + k + ": unknown key (known: path, group_conflicts)");
      }
    }
  } else {
    return Status::Usage(where + ": must be the store file's path or an object {\"path\", \"group_conflicts\"}");
  }
  if (!p.empty() && p[0] != '/') {
    auto slash = plan.plan_path.rfind('/');
    if (slash != std::string::npos) p = plan.plan_path.substr(0, slash + 1) + p;
  }
  out.path = p;
  return out;
}

Result<AddOutcome> AddBatch(const Plan& plan, const AddOptions& options, FileSystem* fs, std::FILE* log) {
  auto settings = StoreSettingsFromPlan(fs, plan);
  if (!settings.ok()) return settings.status();
  std::string path = options.store_path.empty() ? settings.value().path : options.store_path;
  if (path.empty()) return Status::Usage("no store: pass --store FILE or set \"store\" in the plan");
  if (plan.inputs.empty()) return Status::Usage("no input files: name them on the command line or in the plan's \"inputs\"");
  auto view = ReadSplitView(plan);
  if (!view.ok()) return view.status();
  // Digests of the batch: inputs, plan, evaluation sets.
  Json inputs = Json::array();
  std::string joined;
  for (const auto& in : plan.inputs) {
    auto d = DigestFile(fs, in.path);
    if (!d.ok()) return d.status();
    inputs.push_back(Json{{"name", in.name}, {"path", in.path}, {"sha256", d.value().sha256}});
    joined += d.value().sha256 + "\n";
  }
  std::string inputs_digest = Sha256Hex(joined);
  Json evals = Json::array();
  const Json& leak = StageSettings(plan, "leakage");
  if (leak.contains("eval_sets") && leak["eval_sets"].is_array()) {
    std::string base = plan.plan_path.empty() ? "" : plan.plan_path.substr(0, plan.plan_path.rfind('/') + 1);
    for (const auto& e : leak["eval_sets"]) {
      if (!e.is_object() || !e.contains("path") || !e["path"].is_string()) continue;
      std::string p = e["path"].get<std::string>();
      if (!p.empty() && p[0] != '/') p = base + p;
      auto d = DigestFile(fs, p);
      evals.push_back(Json{{"name", e.value("name", "")}, {"sha256", d.ok() ? d.value().sha256 : "unreadable"}});
    }
  }
  auto db = StoreDb::Open(path, options.wait_ms, /*create=*/true);
  if (!db.ok()) return db.status();
  StoreDb& store = *db.value();
  if (Status s = store.BeginImmediate(); !s.ok()) return s;
  MaybeKill("after-begin");
  struct Rollback {
    StoreDb* db;
    bool armed = true;
    ~Rollback() {
      if (armed) db->Rollback();
    }
  } guard{&store};
  AddOutcome outcome;
  {
    auto q = store.Prepare("SELECT batch FROM batches WHERE inputs_digest = ? AND plan_digest = ?");
    if (!q.ok()) return q.status();
    q.value()->Bind(1, inputs_digest).Bind(2, plan.plan_digest);
    Status err;
    if (q.value()->Step(&err)) {
      outcome.already_added = true;
      outcome.batch = q.value()->Int(0);
      return outcome;
    }
    if (!err.ok()) return err;
  }
  auto stored_config = store.Meta("config");
  if (!stored_config.ok()) return stored_config.status();
  std::string config = BoundConfig(plan).dump();
  if (!stored_config.value().empty() && stored_config.value() != config) {
    return Status::Usage("store " + path + ": the plan's settings " + config + " differ from the store's " +
                         stored_config.value() + "; a store keeps one configuration (docs/store.md)");
  }
  int64_t batch = 1, first_seq = 0;
  {
    auto q = store.Prepare("SELECT COALESCE(MAX(batch), 0) + 1, COALESCE(MAX(first_seq + records), 0) FROM batches");
    if (!q.ok()) return q.status();
    Status err;
    if (q.value()->Step(&err)) {
      batch = q.value()->Int(0);
      first_seq = q.value()->Int(1);
    }
    if (!err.ok()) return err;
  }
  StoreCompanion companion(&store, plan, view.value(), settings.value().group_conflicts, batch, first_seq);
  PipelineOptions popts;
  for (const auto& info : AllStages()) popts.stages.push_back(info.name);
  popts.progress = options.progress;
  popts.table = options.table;
  popts.companion = &companion;
  popts.also_reads.push_back({path, "store"});
  // The batch row goes in from the companion's facts after the run; the
  // output folder is committed inside RunPipeline, the store right after.
  auto run = RunPipeline(plan, popts, fs, log);
  if (!run.ok()) return run.status();
  if (run.value().gate_failed) {
    // A batch that fails the gate is written out for review but not added.
    outcome.gate_failed = true;
    outcome.entries = run.value().entries;
    outcome.kept = run.value().kept;
    outcome.rejected = run.value().rejected;
    return outcome;  // the guard rolls the transaction back
  }
  // Count parsed records from the outputs' ledger: the next batch's numbers start after them.
  Json counts = companion.Counts();
  auto ib = store.Prepare(
      "INSERT INTO batches(batch, added_at, plan_digest, inputs_digest, inputs, eval_sets, first_seq, records, entries, "
      "kept, rejected, stored, counts) VALUES(?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)");
  if (!ib.ok()) return ib.status();
  Statement& b = *ib.value();
  b.Bind(1, batch).Bind(2, UtcText(NowOrSourceDate())).Bind(3, plan.plan_digest).Bind(4, inputs_digest).Bind(5, inputs.dump());
  b.Bind(6, evals.dump()).Bind(7, first_seq).Bind(8, static_cast<int64_t>(companion.records()));
  b.Bind(9, static_cast<int64_t>(run.value().entries)).Bind(10, static_cast<int64_t>(run.value().kept));
  b.Bind(11, static_cast<int64_t>(run.value().rejected)).Bind(12, static_cast<int64_t>(companion.stored()));
  b.Bind(13, counts.dump());
  if (Status s = b.Run(); !s.ok()) return s;
  MaybeKill("before-commit");
  if (Status s = store.Commit(); !s.ok()) return s;
  guard.armed = false;
  MaybeKill("after-commit");
  outcome.batch = batch;
  outcome.entries = run.value().entries;
  outcome.kept = run.value().kept;
  outcome.rejected = run.value().rejected;
  outcome.gate_failed = run.value().gate_failed;
  return outcome;
}

}  // namespace prefsift::store
