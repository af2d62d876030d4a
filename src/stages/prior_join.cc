// Joining a batch to prior data; see prior_join.h and docs/store.md.
#include "stages/prior_join.h"

#include <algorithm>
#include <map>
#include <span>
#include <tuple>
#include <unordered_map>

#include "sketch/clusters.h"
#include "sketch/lsh.h"
#include "sketch/minhash.h"
#include "sketch/union_find.h"
#include "stages/exact/exact_stage.h"

namespace prefsift {
namespace {

using Json = nlohmann::ordered_json;

const char* const kTieNames[] = {"prompt", "near", "thread", "annotator", "group"};
constexpr int kTieKinds = 5;
enum { kTiePrompt = 0, kTieNear = 1, kTieThread = 2 };

Hash128 FromBlob(std::string_view b) {
  Hash128 h;
  for (size_t k = 0; k < 8 && k < b.size(); ++k) h.hi = (h.hi << 8) | static_cast<uint8_t>(b[k]);
  for (size_t k = 8; k < 16 && k < b.size(); ++k) h.lo = (h.lo << 8) | static_cast<uint8_t>(b[k]);
  return h;
}

std::string Hex16(std::string_view blob) { return ToHex(FromBlob(blob)).substr(0, 16); }

Json GroupsJson(const std::vector<StoredGroup>& groups) {
  Json out = Json::array();
  std::set<int64_t> seen;
  for (const auto& g : groups) {
    if (seen.insert(g.group).second) out.push_back(Json{{"group", Hex16(g.key)}, {"split", g.split}});
  }
  return out;
}

void RejectConflict(RunState& st, size_t i, PriorConflict& cf, PriorJoin* j) {
  j->stored_ok[i] = 0;
  if (st.Reject(i, kPriorStage, "store_group_conflict",
                "this record ties stored groups that sit in different splits (" + cf.groups.dump() +
                    "); it would move one of them, so it is held back (docs/store.md)",
                Json{{"groups", cf.groups}}.dump())) {
    cf.ids.push_back(st.records[i].id);
    ++j->conflict_records;
  }
}

std::string TieList(const SplitShape& shape) {
  std::string s;
  for (int t = 0; t < kTieKinds; ++t) {
    if (shape.tie[t]) s += (s.empty() ? "" : ", ") + std::string(kTieNames[t]);
  }
  return s;
}

}  // namespace

Json PriorConflict::ToJson() const {
  return Json{{"records", ids}, {"groups", groups}, {"via", via}, {"resolution", resolution}};
}

std::string HashBlob(const Hash128& h) {
  std::string b(16, '\0');
  for (int k = 0; k < 8; ++k) {
    b[k] = static_cast<char>(h.hi >> (56 - 8 * k));
    b[8 + k] = static_cast<char>(h.lo >> (56 - 8 * k));
  }
  return b;
}

std::string ClusterBlob(int64_t id) {
  std::string b(8, '\0');
  for (int k = 0; k < 8; ++k) b[k] = static_cast<char>(static_cast<uint64_t>(id) >> (56 - 8 * k));
  return b;
}

// 1. Comparison keys already stored.
Status JoinComparisons(const PriorData& prior, RunState& st, PriorJoin* j) {
  const size_t n = st.records.size();
  j->comparisons_done = true;
  j->key.assign(n, {});
  j->judgment.assign(n, {});
  j->stored_ok.assign(n, 0);
  j->cluster.assign(n, -1);
  for (size_t i = 0; i < n; ++i) {
    j->key[i] = ComparisonKeyOf(st.records[i], &j->judgment[i]);
    if (!st.IsKept(i)) continue;
    auto found = prior.FindComparison(j->key[i]);
    if (!found.ok()) return found.status();
    if (!found.value()) {
      j->stored_ok[i] = 1;
      continue;
    }
    const StoredComparison& c = *found.value();
    Json detail{{"stored_id", c.id}, {"stored_batch", c.batch}};
    if (c.judgment == j->judgment[i]) {
      st.Reject(i, kPriorStage, "store_duplicate",
                "the same comparison with the same judgment is already in the store (" + c.id + ", batch " +
                    std::to_string(c.batch) + ")",
                detail.dump());
      ++j->duplicates;
    } else {
      st.Reject(i, kPriorStage, "store_label_conflict",
                "the store already holds this comparison with a different judgment (" + c.id + ", batch " +
                    std::to_string(c.batch) + "); the stored judgment stays",
                detail.dump());
      ++j->label_conflicts;
    }
  }
  return Status::Ok();
}

// 2. Batch records against stored band keys; components over batch clusters
// and stored clusters.
Status JoinClusters(const PriorData& prior, RunState& st, const NearClusters* near, const NearSignatures* sig,
                    const SplitShape& shape, PriorJoin* j) {
  const size_t n = st.records.size();
  j->clusters_done = true;
  const auto seq = [&](size_t i) { return prior.first_seq() + static_cast<int64_t>(i); };
  const bool have_near = near && near->cluster.size() == n;
  for (size_t i = 0; i < n; ++i) j->cluster[i] = seq(i);
  j->comp_of.assign(n, -1);
  if (!sig) return Status::Ok();  // the near stage did not run
  if (sig->threshold < 0) return Status::Usage("store: stages.near.verify \"exact\" is not supported with a store");
  const uint32_t K = sig->slots;
  const sketch::Banding banding{sig->bands, sig->rows};
  j->bands = banding.bands;
  j->rows = banding.rows;
  Json nb{{"slots", K}, {"bands", banding.bands}, {"rows", banding.rows}, {"threshold", sig->threshold}};
  auto stored_nb = prior.StoredBanding();
  if (!stored_nb.ok()) return stored_nb.status();
  if (!stored_nb.value().empty() && stored_nb.value() != nb.dump()) {
    return Status::Usage("store " + prior.where() + ": the near settings give " + nb.dump() +
                         " but the store was built with " + stored_nb.value() + "; a store keeps one configuration");
  }
  j->banding_json = nb.dump();
  const float threshold = static_cast<float>(sig->threshold);
  const uint64_t band_seed = sketch::ClusterOptions{}.band_seed;
  std::vector<std::pair<uint32_t, int64_t>> edges;  // batch record, stored cluster id
  j->band_keys.assign(n * banding.bands, 0);
  std::vector<int64_t> in_band;
  for (size_t i = 0; i < n; ++i) {
    if (!j->stored_ok[i]) continue;  // every record the near stage clustered (kept after exact)
    std::span<const uint8_t> s(sig->bytes.data() + i * K, K);
    std::span<uint64_t> keys(j->band_keys.data() + i * banding.bands, banding.bands);
    sketch::BandKeys(s, banding, band_seed, keys);
    std::set<int64_t> cands;
    for (uint64_t k : keys) {
      in_band.clear();
      if (Status e = prior.StoredInBand(BandRow(k), &in_band); !e.ok()) return e;
      cands.insert(in_band.begin(), in_band.end());
    }
    for (int64_t other_seq : cands) {
      ++j->candidates_checked;
      auto other = prior.StoredSignature(other_seq);
      if (!other.ok()) return other.status();
      if (!other.value() || other.value()->signature.size() != K) continue;
      std::span<const uint8_t> o(reinterpret_cast<const uint8_t*>(other.value()->signature.data()), K);
      float sim = static_cast<float>(sketch::CompactMatchesToJaccard(sketch::CountEqualSlots(s, o), K));
      if (sim >= threshold) edges.emplace_back(static_cast<uint32_t>(i), other.value()->cluster);
    }
  }
  // Nodes: batch records, then stored clusters.
  std::map<int64_t, uint32_t> node_of_cluster;
  for (const auto& [i, c] : edges) node_of_cluster.emplace(c, 0);
  uint32_t next = static_cast<uint32_t>(n);
  for (auto& [c, node] : node_of_cluster) node = next++;
  sketch::UnionFind uf(next);
  for (size_t i = 0; i < n; ++i) {
    if (j->stored_ok[i] && have_near && near->cluster[i] >= 0) {
      uf.Union(static_cast<uint32_t>(i), static_cast<uint32_t>(near->cluster[i]));
    }
  }
  std::set<uint32_t> matched;
  for (const auto& [i, c] : edges) {
    uf.Union(i, node_of_cluster[c]);
    matched.insert(i);
  }
  j->near_matched = matched.size();
  // Components holding stored clusters.
  std::map<uint32_t, std::vector<int64_t>> stored_in;  // root -> stored cluster ids (ascending)
  for (const auto& [c, node] : node_of_cluster) stored_in[uf.Find(node)].push_back(c);
  std::map<uint32_t, int64_t> comp_index;
  for (auto& [root, list] : stored_in) {
    comp_index[root] = static_cast<int64_t>(j->comp_clusters.size());
    j->comp_clusters.push_back(list);
  }
  std::vector<std::vector<size_t>> members(j->comp_clusters.size());
  for (size_t i = 0; i < n; ++i) {
    if (!j->stored_ok[i]) continue;
    auto it = comp_index.find(uf.Find(static_cast<uint32_t>(i)));
    if (it == comp_index.end()) {
      if (have_near && near->cluster[i] >= 0) j->cluster[i] = seq(static_cast<size_t>(near->cluster[i]));
      continue;
    }
    j->comp_of[i] = it->second;
    j->cluster[i] = j->comp_clusters[static_cast<size_t>(it->second)].front();
    members[static_cast<size_t>(it->second)].push_back(i);
  }
  // Stored clusters bridged by the batch: merge, unless (with near ties)
  // their groups sit in different splits.
  for (size_t c = 0; c < j->comp_clusters.size(); ++c) {
    const auto& list = j->comp_clusters[c];
    if (list.size() < 2) continue;
    std::vector<StoredGroup> groups;
    for (int64_t cl : list) {
      if (Status e = prior.GroupsOfCluster(cl, &groups); !e.ok()) return e;
    }
    std::set<std::string> splits;
    for (const auto& g : groups) splits.insert(g.split);
    if (shape.tie[kTieNear] && splits.size() > 1) {
      PriorConflict cf;
      cf.via = "near-duplicate prompts joining stored clusters " + Json(list).dump();
      cf.groups = GroupsJson(groups);
      if (prior.conflict_policy() == PriorConflictPolicy::kJoinFirst) {
        // The records join the first stored cluster (smallest id: the
        // earliest accepted record); the other clusters stay apart. Their
        // group is settled when the split stage joins groups (JoinGroups).
        cf.resolution = Json{{"policy", "join-first"},
                             {"action", "joined the first stored cluster; the other clusters were not merged"},
                             {"cluster", list.front()}};
        for (size_t i : members[c]) {
          if (st.IsKept(i)) cf.ids.push_back(st.records[i].id);
        }
        for (size_t i : members[c]) {
          if (st.IsKept(i)) j->joined.insert(i);
        }
      } else {
        cf.resolution = Json{{"policy", "reject"}, {"action", "rejected (store_group_conflict)"}};
        for (size_t i : members[c]) RejectConflict(st, i, cf, j);
      }
      j->conflicts.push_back(std::move(cf));
      j->comp_clusters[c].resize(1);  // nothing merges
      continue;
    }
    for (size_t k = 1; k < list.size(); ++k) j->cluster_merges.emplace_back(list[0], list[k]);
    if (shape.tie[kTieNear]) {
      for (size_t k = 1; k < groups.size(); ++k) j->group_merges.emplace_back(groups[0].group, groups[k].group);
    }
  }
  return Status::Ok();
}

// 3. Ties to stored groups, before the split stage groups the batch.
Status JoinGroups(const PriorData& prior, RunState& st, const NearClusters* near, const SplitShape& shape,
                  PriorJoin* j) {
  const size_t n = st.records.size();
  j->groups_done = true;
  const bool have_near = near && near->cluster.size() == n;
  j->prior_split.assign(n, -1);
  std::vector<uint32_t> kept;
  for (size_t i = 0; i < n; ++i) {
    if (st.IsKept(i)) kept.push_back(static_cast<uint32_t>(i));
  }
  std::map<int64_t, StoredGroup> info;
  std::vector<std::pair<uint32_t, int64_t>> edges;  // batch record, stored group
  auto lookup = [&](uint32_t i, int kind, const std::string& tkey) -> Status {
    auto g = prior.GroupTiedBy(kind, tkey);
    if (!g.ok()) return g.status();
    if (g.value()) {
      info.emplace(g.value()->group, *g.value());
      edges.emplace_back(i, g.value()->group);
    }
    return Status::Ok();
  };
  sketch::UnionFind uf0(static_cast<uint32_t>(n));
  std::unordered_map<Hash128, uint32_t, Hash128Hasher> by_prompt;
  std::unordered_map<int64_t, uint32_t> by_near;
  std::unordered_map<std::string, uint32_t> by_text[kTieKinds];
  for (uint32_t i : kept) {
    const RecordFacts& f = st.records[i];
    if (shape.tie[kTiePrompt]) {
      auto [it, fresh] = by_prompt.try_emplace(f.prompt_hash, i);
      if (!fresh) uf0.Union(it->second, i);
      if (Status s = lookup(i, kTiePrompt, HashBlob(f.prompt_hash)); !s.ok()) return s;
    }
    if (shape.tie[kTieNear]) {
      if (have_near && near->cluster[i] >= 0) {
        auto [it, fresh] = by_near.try_emplace(near->cluster[i], i);
        if (!fresh) uf0.Union(it->second, i);
      }
      if (j->comp_of.size() == n && j->comp_of[i] >= 0) {
        for (int64_t cl : j->comp_clusters[static_cast<size_t>(j->comp_of[i])]) {
          if (Status s = lookup(i, kTieNear, ClusterBlob(cl)); !s.ok()) return s;
        }
      }
    }
    const std::string* text[kTieKinds] = {nullptr, nullptr, &st.Text(f.thread_id), &st.Text(f.annotator_id),
                                          &st.Text(f.group_id)};
    for (int t = kTieThread; t < kTieKinds; ++t) {
      if (!shape.tie[t] || text[t]->empty()) continue;
      auto [it, fresh] = by_text[t].try_emplace(*text[t], i);
      if (!fresh) uf0.Union(it->second, i);
      if (Status s = lookup(i, t, HashBlob(HashBytes(*text[t]))); !s.ok()) return s;
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
  j->group_target.assign(n, -1);
  j->new_group_of.assign(n, -1);
  for (auto& [root, list] : members) {
    auto it = groups_in.find(root);
    if (it == groups_in.end()) {
      // A new group: the split stage assigns it; the store records it after.
      int64_t k = static_cast<int64_t>(j->new_groups.size());
      j->new_groups.push_back(list);
      for (uint32_t i : list) j->new_group_of[i] = k;
      continue;
    }
    std::vector<int64_t> gl = it->second;  // ascending group ids
    std::set<std::string> splits;
    for (int64_t g : gl) splits.insert(info[g].split);
    if (splits.size() > 1) {
      std::vector<StoredGroup> gs;
      for (int64_t g : gl) gs.push_back(info[g]);
      PriorConflict cf;
      cf.via = "ties (" + TieList(shape) + ")";
      cf.groups = GroupsJson(gs);
      if (prior.conflict_policy() != PriorConflictPolicy::kJoinFirst) {
        cf.resolution = Json{{"policy", "reject"}, {"action", "rejected (store_group_conflict)"}};
        for (uint32_t i : list) RejectConflict(st, i, cf, j);
        j->conflicts.push_back(std::move(cf));
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
      j->joined.insert(list.begin(), list.end());
      j->conflicts.push_back(std::move(cf));
      splits = {split};
    }
    auto pos = std::find(shape.names.begin(), shape.names.end(), *splits.begin());
    if (pos == shape.names.end()) {
      return Status::Usage("store " + prior.where() + ": stored split \"" + *splits.begin() +
                           "\" is not among the plan's splits; a store keeps one configuration");
    }
    for (uint32_t i : list) {
      j->prior_split[i] = static_cast<int32_t>(pos - shape.names.begin());
      j->group_target[i] = gl.front();
      ++j->inherited;
    }
    for (size_t k = 1; k < gl.size(); ++k) j->group_merges.emplace_back(gl.front(), gl[k]);
  }
  return Status::Ok();
}

}  // namespace prefsift
