// PriorJoin: how a batch relates to prior data (a store; stages/prior_data.h),
// decided by the stages themselves and published as a typed result
// (stages/stage_results.h). Three steps, each inside a stage's Decide:
//
//   exact  JoinComparisons  rejects records whose comparison is stored:
//                           store_duplicate (same judgment) or
//                           store_label_conflict (another judgment)
//   near   JoinClusters     batch records join stored clusters through the
//                           stored band keys (same banding and verification as
//                           the near stage); bridged stored clusters merge
//   split  JoinGroups       batch records tied to stored groups take their
//                           split; a component tying groups in different
//                           splits is rejected (store_group_conflict) or, with
//                           join-first, joins the group accepted first
//
// Rejects made against prior data carry the stage name "store" (docs/reasons.md).
// The store persists the final PriorJoin after the batch (src/store). Nothing
// is decided after the split stage, and no decision is overridden.
#pragma once

#include <nlohmann/json.hpp>

#include <cstdint>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "core/hash.h"
#include "core/run_state.h"
#include "core/status.h"
#include "stages/prior_data.h"
#include "stages/stage_results.h"

namespace prefsift {

// The tie kinds of the split stage, in its order (prompt, near, thread,
// annotator, group), and its split names: read by JoinClusters/JoinGroups
// and the store (stages/split/split_stage.h, SplitShapeOf).
struct SplitShape {
  std::vector<std::string> names;
  bool tie[5] = {true, true, true, false, false};
  bool stratify_source = false;
};

struct PriorConflict {
  std::vector<std::string> ids;  // batch records rejected (reject) or joined to the first group (join-first)
  nlohmann::ordered_json groups;  // [{group, split}]
  std::string via;                // "near-duplicate prompts joining ..." or "ties (...)"
  nlohmann::ordered_json resolution;  // {"policy", "action", ...}
  nlohmann::ordered_json ToJson() const;
};

struct PriorJoin {
  // JoinComparisons.
  bool comparisons_done = false;
  std::vector<Hash128> key, judgment;  // per record: comparison key and judgment (ComparisonKeyOf)
  std::vector<uint8_t> stored_ok;      // per record: 1 = goes into the store
  uint64_t duplicates = 0, label_conflicts = 0;
  // JoinClusters.
  bool clusters_done = false;
  std::vector<int64_t> cluster;        // per record: its store cluster id (a sequence number)
  std::vector<int64_t> comp_of;        // per record: index into comp_clusters, -1 = none
  std::vector<std::vector<int64_t>> comp_clusters;  // stored clusters (ascending) per component
  std::vector<std::pair<int64_t, int64_t>> cluster_merges, group_merges;
  std::vector<PriorConflict> conflicts;
  std::set<size_t> joined;             // records joined to the first group (join-first)
  uint64_t near_matched = 0, candidates_checked = 0, conflict_records = 0;
  uint32_t bands = 0, rows = 0;        // the banding of band_keys
  std::string banding_json;            // "" when the near stage did not run
  std::vector<uint64_t> band_keys;     // per record x band
  // JoinGroups.
  bool groups_done = false;
  std::vector<int32_t> prior_split;    // per record: the split index it inherits, -1 = none
  std::vector<int64_t> group_target;   // per record: the stored group it joins, -1 = none
  std::vector<int64_t> new_group_of;   // per record: index into new_groups, -1 = none
  std::vector<std::vector<uint32_t>> new_groups;
  uint64_t inherited = 0;
};

// The stage name on rejects made against prior data.
inline constexpr const char* kPriorStage = "store";

Status JoinComparisons(const PriorData& prior, RunState& st, PriorJoin* j);
Status JoinClusters(const PriorData& prior, RunState& st, const NearClusters* near, const NearSignatures* sig,
                    const SplitShape& shape, PriorJoin* j);
Status JoinGroups(const PriorData& prior, RunState& st, const NearClusters* near, const SplitShape& shape,
                  PriorJoin* j);

// Byte forms the store keys its tables by (big-endian).
std::string HashBlob(const Hash128& h);
std::string ClusterBlob(int64_t id);
// Band keys are kept as 31-bit integers (4 bytes in SQLite's record format); a
// shorter key only adds candidates, which verification then drops.
inline int64_t BandRow(uint64_t key) { return static_cast<int64_t>(key >> 33); }

}  // namespace prefsift
